//go:build !js

package wasmclient

import (
	"crypto/sha256"
	"embed"
	"encoding/hex"
	"errors"
	"io/fs"
	"net/http"
	"strings"

	"github.com/maxence-charriere/go-app/v9/pkg/app"
)

//go:embed static
var static embed.FS

// Built names the files `make wasm` writes: the compiled dashboard, its gzip
// copy, and the wasm_exec.js of the Go release that compiled it (go-app's own
// copy may lag behind the toolchain).
const (
	BuiltWASM     = "app.wasm"
	BuiltWASMGzip = "app.wasm.gz"
	BuiltExecJS   = "wasm_exec.js"
)

// resources tells go-app where the files are; the handler below serves them.
type resources struct{}

func (resources) Package() string { return "" }
func (resources) Static() string  { return "" }
func (resources) AppWASM() string { return "/web/app.wasm" }

// Handler serves the dashboard: the page shell from go-app, app.wasm (gzip
// when the browser accepts it, since go-app serves it uncompressed), the
// matching wasm_exec.js, and the style sheet and icon. built holds the files
// of `make wasm`; when app.wasm is missing, the page says how to build it.
func Handler(built fs.FS) (http.Handler, error) {
	Routes()
	staticFS, err := fs.Sub(static, "static")
	if err != nil {
		return nil, err
	}
	version := "unbuilt"
	// Only the hash is kept: the file is served from built, not held in
	// memory (12 MB).
	wasm, err := fs.ReadFile(built, BuiltWASM)
	switch {
	case err == nil:
		sum := sha256.Sum256(wasm)
		version = hex.EncodeToString(sum[:8])
	case errors.Is(err, fs.ErrNotExist):
	default:
		return nil, err
	}
	haveWASM := wasm != nil
	wasm = nil
	_, gzErr := fs.Stat(built, BuiltWASMGzip)
	hasGzip := gzErr == nil
	execJS, execErr := fs.ReadFile(built, BuiltExecJS)

	page := &app.Handler{
		Name:         "fluxroom",
		ShortName:    "fluxroom",
		Title:        "fluxroom — room view",
		Description:  "Live view of a magnetism teaching lab",
		LoadingLabel: "Loading the room… {progress}%",
		Styles:       []string{"/web/fluxroom.css"},
		Icon:         app.Icon{Default: "/web/icon.svg", SVG: "/web/icon.svg", AppleTouch: "/web/icon.svg"},
		// A build id keeps the service worker from refetching everything
		// after each server restart.
		Version:         version,
		Resources:       resources{},
		BackgroundColor: "#f7f5ef",
		ThemeColor:      "#1d2430",
	}
	files := http.FileServerFS(staticFS)
	mux := http.NewServeMux()
	mux.HandleFunc("/web/app.wasm", func(w http.ResponseWriter, r *http.Request) {
		if !haveWASM {
			http.Error(w, "the dashboard is not built: run `make wasm` (or `make build`) and restart", http.StatusServiceUnavailable)
			return
		}
		w.Header().Set("Content-Type", "application/wasm")
		w.Header().Set("Cache-Control", "no-cache")
		w.Header().Set("ETag", `"`+version+`"`)
		if hasGzip && strings.Contains(r.Header.Get("Accept-Encoding"), "gzip") {
			w.Header().Set("Content-Encoding", "gzip")
			w.Header().Set("Vary", "Accept-Encoding")
			http.ServeFileFS(w, r, built, BuiltWASMGzip)
			return
		}
		http.ServeFileFS(w, r, built, BuiltWASM)
	})
	if execErr == nil {
		mux.HandleFunc("/wasm_exec.js", func(w http.ResponseWriter, r *http.Request) {
			w.Header().Set("Content-Type", "text/javascript")
			w.Write(execJS)
		})
	}
	mux.Handle("/web/", http.StripPrefix("/web/", files))
	mux.Handle("/", page)
	return mux, nil
}
