// Command app is the dashboard's WebAssembly entry point; `make wasm` builds
// it with GOOS=js GOARCH=wasm.
package main

import (
	"github.com/maxence-charriere/go-app/v9/pkg/app"

	"example.com/fluxroom/wasmclient"
)

func main() {
	wasmclient.Routes()
	app.RunWhenOnBrowser()
}
