// Package importcheck holds the test that enforces fluxroom's dependency
// rules: the browser build links neither grpc-go nor bbolt nor the server
// side, and the domain depends on no other part of fluxroom and no wire or
// storage library.
package importcheck
