package main

import (
	"bytes"
	"context"
	"errors"
	"flag"
	"os"
	"path/filepath"
	"runtime/debug"
	"strings"
	"testing"
)

// TestCommandLine: flags after the file, help that is not an error, and a
// readings file that is only a header or lacks a column, each said plainly.
func TestCommandLine(t *testing.T) {
	dir := t.TempDir()
	file := func(name, text string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	header := file("header.csv", "bench,experiment,current [A],force [N]\n")
	noForce := file("noforce.csv", "bench,experiment,current [A]\nA1,coil_force,1\nA1,coil_force,2\nA1,coil_force,3\n")
	for _, tc := range []struct {
		name     string
		args     []string
		code     int
		stdout   string // in standard output
		stderr   string // in standard error and the error together
		stderrN  int    // how often stderr's text appears; 0: any
		notInErr string
	}{
		{"flags after the file", []string{"analyze", "../../testdata/readings-example.csv", "--json"}, 0, `"benches": [`, "", 0, ""},
		{"flags before the file", []string{"analyze", "--json", "../../testdata/readings-example.csv"}, 0, `"benches": [`, "", 0, ""},
		{"help of a command", []string{"analyze", "--help"}, 0, "", "-json", 0, ""},
		{"help of serve", []string{"serve", "-h"}, 0, "", "-addr", 0, ""},
		{"a file with only its header", []string{"analyze", header}, 1, "", "the file has a header but no readings", 1, ""},
		{"a missing column, named once", []string{"analyze", noForce}, 1, "", "the header has no force column", 1, "values["},
		{"an unknown flag", []string{"analyze", "--jsn", header}, 2, "", "-jsn", 0, ""},
		{"no internal prefixes", []string{"export", "--db", filepath.Join(dir, "none.db"), "--policy", file("p.json", `{"points": {"accuracy": -1}}`)}, 0, "", "", 0, "domain:"},
		{"export of a missing file", []string{"export", "--db", filepath.Join(dir, "missing.db"), "--session", "1"}, 1, "", "no such file; nothing was created", 1, ""},
		{"backup of a missing file", []string{"backup", "--db", filepath.Join(dir, "missing.db"), "--out", filepath.Join(dir, "b.db")}, 1, "", "no such file; nothing was created", 1, ""},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var out, errOut bytes.Buffer
			err := NewMain(&out, &errOut).Run(context.Background(), tc.args)
			if err != nil {
				errOut.WriteString(err.Error())
			}
			if tc.name == "no internal prefixes" {
				// Whatever export says of the file or the policy, no
				// package name stands in front of it.
				if strings.Contains(errOut.String(), tc.notInErr) {
					t.Errorf("message %q carries an internal prefix", errOut.String())
				}
				return
			}
			if got := exitCode(err); got != tc.code {
				t.Errorf("exit status %d (%v), want %d", got, err, tc.code)
			}
			if !strings.Contains(out.String(), tc.stdout) {
				t.Errorf("stdout %q, want %q in it", out.String(), tc.stdout)
			}
			if n := strings.Count(errOut.String(), tc.stderr); n == 0 || tc.stderrN > 0 && n != tc.stderrN {
				t.Errorf("stderr %q has %q %d times, want %d", errOut.String(), tc.stderr, n, max(tc.stderrN, 1))
			}
			if tc.notInErr != "" && strings.Contains(errOut.String(), tc.notInErr) {
				t.Errorf("stderr %q has %q", errOut.String(), tc.notInErr)
			}
		})
	}
	if _, err := os.Stat(filepath.Join(dir, "missing.db")); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("export or backup of a missing file made one: %v", err)
	}
	if exitCode(flag.ErrHelp) != 0 || exitCode(usageError{"x"}) != 2 || exitCode(errors.New("x")) != 1 || exitCode(nil) != 0 {
		t.Error("exit statuses: help 0, usage 2, failure 1, success 0")
	}
}

// TestVersionFromBuildInfo: the version says the commit, its time and
// whether the tree had changes, from the build information.
func TestVersionFromBuildInfo(t *testing.T) {
	for _, tc := range []struct {
		name string
		bi   *debug.BuildInfo
		want string
	}{
		{"no build information", nil, "devel"},
		{"a released module", &debug.BuildInfo{Main: debug.Module{Version: "v1.2.0"}}, "v1.2.0"},
		{"a clean checkout", &debug.BuildInfo{Main: debug.Module{Version: "(devel)"}, Settings: []debug.BuildSetting{
			{Key: "vcs.revision", Value: "9afc1552a0569f5644d5b2bb421210a6f8234dbd"}, {Key: "vcs.time", Value: "2026-12-02T15:39:55Z"},
			{Key: "vcs.modified", Value: "false"}}}, "devel+9afc1552a056 (2026-12-02T15:39:55Z)"},
		{"changes not committed", &debug.BuildInfo{Main: debug.Module{Version: "(devel)"}, Settings: []debug.BuildSetting{
			{Key: "vcs.revision", Value: "9afc1552a0569f5644d5b2bb421210a6f8234dbd"}, {Key: "vcs.modified", Value: "true"}}}, "devel+9afc1552a056-dirty"},
	} {
		if got := versionFrom(tc.bi); got != tc.want {
			t.Errorf("%s: %q, want %q", tc.name, got, tc.want)
		}
	}
}
