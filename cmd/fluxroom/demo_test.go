package main

import (
	"bytes"
	"context"
	"io"
	"regexp"
	"strings"
	"sync"
	"testing"
)

// lockedBuffer is a bytes.Buffer safe for the demo's printing goroutine.
type lockedBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (l *lockedBuffer) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.Write(p)
}

func (l *lockedBuffer) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}

// TestDemoRunsAClass runs the real demo command at a fast pace: twelve
// simulated benches join and submit over native gRPC, and the last room
// summary shows the seeded mistakes where they were seeded.
func TestDemoRunsAClass(t *testing.T) {
	var out lockedBuffer
	m := NewMain(&out, io.Discard)
	err := m.Run(context.Background(), []string{"demo", "--addr", "127.0.0.1:0", "--data", t.TempDir(),
		"--pace", "5ms", "--every", "200ms", "--duration", "3s"})
	if err != nil {
		t.Fatalf("demo: %v\n%s", err, out.String())
	}
	text := out.String()
	if !regexp.MustCompile(`dashboard: http://127\.0\.0\.1:\d+/\?session=1`).MatchString(text) {
		t.Errorf("demo printed no dashboard URL:\n%s", text)
	}
	last := text[strings.LastIndex(text, "— room at"):]
	lines := map[string]string{}
	for _, l := range strings.Split(last, "\n")[1:] {
		if f := strings.Fields(l); len(f) > 1 {
			lines[f[0]] = l
		}
	}
	if len(lines) != 12 {
		t.Fatalf("last summary has %d benches, want 12:\n%s", len(lines), last)
	}
	for _, tc := range []struct{ bench, want string }{
		{"B2", "check"}, // force sensor not zeroed
		{"C3", "off"},   // shorter coil than the bench's L
		{"A4", "check"}, // magnet weaker than its label
		{"A1", "consistent"},
		{"C4", "consistent"},
	} {
		if f := strings.Fields(lines[tc.bench]); len(f) < 2 || f[1] != tc.want {
			t.Errorf("%s: %q, want verdict %s", tc.bench, lines[tc.bench], tc.want)
		}
	}
	if !strings.Contains(lines["B2"], "not zeroed") {
		t.Errorf("B2 reason does not name the skipped zero: %q", lines["B2"])
	}
	for b, l := range lines {
		if !strings.Contains(l, "11 readings") {
			t.Errorf("%s did not finish its run of 11 readings: %q", b, l)
		}
	}
}
