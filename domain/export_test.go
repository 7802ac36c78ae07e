package domain

// What the external tests (package domain_test, which use domain/sim) need
// of the package's internals.

// Combine is combine: the verdict of a result against its prediction.
var Combine = combine

// SIUnit is siUnit: the SI unit symbol of a dimension.
var SIUnit = siUnit

// VerdictOf is the tolerance's verdict for a z and a percent difference.
func (t Tolerance) VerdictOf(z, pct float64) Verdict { return t.verdict(z, pct) }
