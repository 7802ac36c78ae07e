package wasmclient

import (
	"sort"
	"strings"
	"testing"
)

// TestAttentionOrder: unsafe, off, check, a group that stalled, need data,
// consistent; a quiet bench keeps its verdict's place when that asks more,
// and a finished one (done) is not pushed up.
func TestAttentionOrder(t *testing.T) {
	tiles := []*Tile{
		{Label: "consistent", Verdict: "consistent"},
		{Label: "done", Verdict: "consistent", Activity: "done"},
		{Label: "need-data", Verdict: "need-data"},
		{Label: "stalled-consistent", Verdict: "consistent", Activity: "stalled"},
		{Label: "check", Verdict: "check"},
		{Label: "stalled-off", Verdict: "off", Activity: "stalled"},
		{Label: "unsafe", Verdict: "unsafe"},
	}
	sort.SliceStable(tiles, func(i, j int) bool { return attention(tiles[i]) < attention(tiles[j]) })
	var got []string
	for _, t := range tiles {
		got = append(got, t.Label)
	}
	want := "unsafe stalled-off check stalled-consistent need-data consistent done"
	if strings.Join(got, " ") != want {
		t.Errorf("order %q, want %q", strings.Join(got, " "), want)
	}
}
