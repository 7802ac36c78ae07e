package domain_test

import (
	"fmt"
	"math/rand/v2"
	"testing"
	"time"

	. "example.com/fluxroom/domain"
	"example.com/fluxroom/domain/sim"
)

// BenchmarkAssessAfterReading is the hot path of every submission: judge a
// bench again with its newest reading, for runs of 10, 30 and 100 readings,
// from scratch and, as the server does, with the bench's Memo holding the
// earlier readings' work.
func BenchmarkAssessAfterReading(b *testing.B) {
	for _, exp := range sim.Experiments() {
		for _, n := range []int{10, 30, 100} {
			g, _ := sim.Simulate(exp, "", rand.New(rand.NewPCG(1, 2)), time.Time{})
			var rs []Reading
			for len(rs) < n {
				r := g.Readings[len(rs)%len(g.Readings)]
				r.ID = fmt.Sprintf("r%d", len(rs))
				rs = append(rs, r)
			}
			b.Run(fmt.Sprintf("%s/%d", exp, n), func(b *testing.B) {
				b.ReportAllocs()
				for i := 0; i < b.N; i++ {
					Assess(g.Bench, rs, DefaultTolerance())
				}
			})
			b.Run(fmt.Sprintf("%s/%d/memo", exp, n), func(b *testing.B) {
				var m Memo
				a := AssessMemo(g.Bench, rs[:n-1], DefaultTolerance(), &m)
				ResultOfMemo(g.Bench, a, rs[:n-1], &m)
				b.ReportAllocs()
				for i := 0; i < b.N; i++ {
					a := AssessMemo(g.Bench, rs, DefaultTolerance(), &m)
					ResultOfMemo(g.Bench, a, rs, &m)
				}
			})
		}
	}
}

// BenchmarkRoomFindings is the room-level rule over 30 benches, run after
// every change.
func BenchmarkRoomFindings(b *testing.B) {
	var results []BenchResult
	for i := 0; i < 30; i++ {
		g, _ := sim.Simulate("coil_force", "", rand.New(rand.NewPCG(uint64(i), 2)), time.Time{})
		g.Bench.ID = uint64(i + 1)
		a := Assess(g.Bench, g.Readings, DefaultTolerance())
		results = append(results, ResultOf(g.Bench, a, g.Readings))
	}
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		RoomFindings(results, DefaultTolerance())
	}
}
