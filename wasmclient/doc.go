// Package wasmclient is the instructor's dashboard: go-app components
// compiled to WebAssembly and run in the browser, fed by one gRPC-Web room
// stream per tab.
//
// It imports the message package (fluxroompb) and connect-go's client only;
// never grpc-go, store or server, which would bloat app.wasm or not compile
// for js/wasm. A check in `make test` (internal/importcheck) enforces it.
// The server side of the same package (handler.go, not built for js) serves
// the page, the compiled app.wasm and the static files.
package wasmclient
