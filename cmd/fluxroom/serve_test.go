package main

import (
	"bytes"
	"context"
	"errors"
	"os"
	"strings"
	"testing"
)

func TestParseBytes(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want int64
		ok   bool
	}{
		{"300MiB", 300 << 20, true}, {"2GiB", 2 << 30, true}, {"1.5GiB", 3 << 29, true}, {"512 KiB", 512 << 10, true},
		{"300", 0, false}, {"MiB", 0, false}, {"-1MiB", 0, false}, {"lots GiB", 0, false},
	} {
		got, err := parseBytes(tc.in)
		if (err == nil) != tc.ok || got != tc.want {
			t.Errorf("parseBytes(%q) = %d, %v; want %d, ok %v", tc.in, got, err, tc.want, tc.ok)
		}
	}
}

// serve refuses a bad memory or timing setting before it opens anything.
func TestServeRejectsBadFlags(t *testing.T) {
	for _, tc := range []struct {
		name string
		args []string
		flag string
	}{
		{"limit without a unit", []string{"--memory-limit", "300"}, "--memory-limit"},
		{"negative limit", []string{"--memory-limit", "-1GiB"}, "--memory-limit"},
		{"zero gc percent", []string{"--gc-percent", "0"}, "--gc-percent"},
		{"negative room idle", []string{"--room-idle", "-1m"}, "--room-idle"},
		{"watch pace of zero", []string{"--watch-every", "0s"}, "--watch-every"},
		{"watch pace of a minute", []string{"--watch-every", "1m"}, "--watch-every"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			db := t.TempDir() + "/fluxroom.db"
			var out bytes.Buffer
			err := NewMain(&out, &out).Run(context.Background(), append([]string{"serve", "--db", db, "--addr", "127.0.0.1:0"}, tc.args...))
			var ue usageError
			if !errors.As(err, &ue) || !strings.Contains(err.Error(), tc.flag) {
				t.Fatalf("serve %v: %v; want a usage error naming %s", tc.args, err, tc.flag)
			}
			if _, serr := os.Stat(db); !errors.Is(serr, os.ErrNotExist) {
				t.Errorf("serve %v made %s before refusing", tc.args, db)
			}
		})
	}
}
