package main

import (
	"context"
	"fmt"
	"runtime/debug"
)

// version is set at build time with -ldflags "-X main.version=…"; otherwise
// it comes from the build information (versionFrom).
var version = ""

func init() {
	if version != "" {
		return
	}
	bi, _ := debug.ReadBuildInfo()
	version = versionFrom(bi)
}

// versionFrom is the version the build information gives: the module's
// version when it was built as a released module, else "devel" with the
// commit, its time and "dirty" when the tree had changes (make build stamps
// them; a build with -buildvcs=false has none).
func versionFrom(bi *debug.BuildInfo) string {
	if bi == nil {
		return "devel"
	}
	if v := bi.Main.Version; v != "" && v != "(devel)" {
		return v
	}
	var rev, at string
	dirty := false
	for _, s := range bi.Settings {
		switch s.Key {
		case "vcs.revision":
			rev = s.Value
		case "vcs.time":
			at = s.Value
		case "vcs.modified":
			dirty = s.Value == "true"
		}
	}
	v := "devel"
	if len(rev) >= 12 {
		v += "+" + rev[:12]
	}
	if dirty {
		v += "-dirty"
	}
	if at != "" {
		v += " (" + at + ")"
	}
	return v
}

func (m *Main) versionCmd(ctx context.Context, args []string) error {
	fs := m.newFlags("version")
	if err := parse(fs, args); err != nil {
		return err
	}
	fmt.Fprintf(m.Stdout, "fluxroom %s\n", version)
	return nil
}
