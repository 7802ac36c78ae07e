// Package wasmclient is the instructor's dashboard: go-app components
// compiled to WebAssembly and run in the browser, fed by one gRPC-Web room
// stream per tab.
//
// It imports the message package (fluxroompb) and the domain (for the same
// validation the server applies); never grpc-go, store or server, which
// would bloat app.wasm or not compile for js/wasm, nor an HTTP client
// library: RPCs go over the browser's fetch in the binary gRPC-Web framing
// (grpcweb.go, api_js.go). A test (internal/importcheck) enforces it.
//
// Pages: "/" the room (tiles, unsafe banner, findings, bench detail), "/setup"
// the session and its benches, "/station" a bench's laptop.
// The server side of the same package (handler.go, not built for js) serves
// the page, the compiled app.wasm and the static files.
package wasmclient
