package main

import (
	"context"
	"fmt"
	"runtime/debug"
)

// version is set at build time with -ldflags "-X main.version=…"; otherwise
// it comes from the module's build information.
var version = ""

func init() {
	if version != "" {
		return
	}
	version = "devel"
	if bi, ok := debug.ReadBuildInfo(); ok {
		for _, s := range bi.Settings {
			if s.Key == "vcs.revision" && len(s.Value) >= 12 {
				version = "devel+" + s.Value[:12]
			}
		}
	}
}

func (m *Main) versionCmd(ctx context.Context, args []string) error {
	fmt.Fprintf(m.Stdout, "fluxroom %s\n", version)
	return nil
}
