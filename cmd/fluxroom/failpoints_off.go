//go:build !failpoints

package main

import (
	"flag"
	"log/slog"

	"example.com/fluxroom/server"
)

// testFlags adds no flag in the release build: the test switches exist
// only in a failpoints build (failpoints.go).
func testFlags(*flag.FlagSet) func(*slog.Logger) func(*server.Server) {
	return func(*slog.Logger) func(*server.Server) { return nil }
}
