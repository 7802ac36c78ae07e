package wasmclient

import (
	"sync"

	"github.com/maxence-charriere/go-app/v9/pkg/app"
)

var routesOnce sync.Once

// Routes registers the dashboard's pages. The browser build and the server
// must both call it: the server renders the page shell for these paths.
func Routes() {
	routesOnce.Do(func() {
		app.RouteFunc("/", func() app.Composer { return &Room{} })
		app.RouteFunc("/setup", func() app.Composer { return &Setup{} })
		app.RouteFunc("/station", func() app.Composer { return &Station{} })
	})
}
