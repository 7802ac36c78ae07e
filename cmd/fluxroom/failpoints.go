//go:build failpoints

package main

import (
	"flag"
	"log/slog"

	"example.com/fluxroom/server"
)

// testFlags adds the serve flags of a failpoints build (go build -tags
// failpoints): the durability test's negative control. The release build
// has none (failpoints_off.go).
func testFlags(fs *flag.FlagSet) func(*slog.Logger) func(*server.Server) {
	ackEarly := fs.Bool("test-ack-before-commit", false, "negative control of the durability test: acknowledges readings before writing them, and loses some; never use")
	return func(log *slog.Logger) func(*server.Server) {
		if !*ackEarly {
			return nil
		}
		log.Warn("--test-ack-before-commit: readings are acknowledged before they are written and WILL be lost")
		return func(s *server.Server) { s.SetHooks(server.Hooks{AckBeforeCommit: true}) }
	}
}
