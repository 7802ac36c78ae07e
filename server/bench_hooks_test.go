//go:build failpoints

package server

import "testing"

// BenchmarkSubmitReadingUnjudged is BenchmarkSubmitReading with the
// judging left out (Hooks.SkipJudging), to show its share of a reading's
// cost.
func BenchmarkSubmitReadingUnjudged(b *testing.B) {
	benchmarkSubmitReading(b, func(s *Server) { s.SetHooks(Hooks{SkipJudging: true}) })
}
