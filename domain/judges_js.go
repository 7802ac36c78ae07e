package domain

// judges is empty in the dashboard's build (judges.go): Assess there says
// the bench is not judged in this build.
var judges = map[string]judge{}
