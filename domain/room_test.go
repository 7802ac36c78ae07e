package domain_test

import (
	"strings"
	"testing"
	"time"

	. "example.com/fluxroom/domain"
)

func TestRoomFindings(t *testing.T) {
	res := func(id uint64, ratio float64, v Verdict) BenchResult {
		return BenchResult{BenchID: id, Label: string(rune('A'+id)) + "1", Experiment: "e_over_m", Verdict: v, Ratio: ratio, RelU: 0.04}
	}
	for _, tc := range []struct {
		name     string
		results  []BenchResult
		wantCode string
		wantN    int
	}{
		{"a shared single-loop k", []BenchResult{res(1, 2.05, Off), res(2, 2.03, Off), res(3, 2.07, Off), res(4, 2.04, Off), res(5, 1.01, Consistent)},
			CodeSharedCause, 4},
		{"off in different directions", []BenchResult{res(1, 2.05, Off), res(2, 0.5, Off), res(3, 1.3, Check), res(4, 1.0, Consistent)}, "", 0},
		{"too few groups", []BenchResult{res(1, 2.05, Off), res(2, 2.05, Off)}, "", 0},
		{"same direction, widely spread", []BenchResult{res(1, 1.2, Check), res(2, 2.5, Off), res(3, 4.0, Off)}, "", 0},
		// Each group is check for a cause of its own (say a skipped zero)
		// while its result agrees with theory: nothing is shared.
		{"check inside the good band", []BenchResult{res(1, 1.01, Check), res(2, 1.02, Check), res(3, 1.015, Check), res(4, 1.0, Consistent)}, "", 0},
	} {
		t.Run(tc.name, func(t *testing.T) {
			fs := RoomFindings(tc.results, DefaultTolerance())
			if tc.wantCode == "" {
				if len(fs) != 0 {
					t.Errorf("findings = %+v, want none", fs)
				}
				return
			}
			if len(fs) != 1 || fs[0].Code != tc.wantCode || len(fs[0].BenchIDs) != tc.wantN {
				t.Fatalf("findings = %+v, want one %s over %d benches", fs, tc.wantCode, tc.wantN)
			}
			if !strings.Contains(fs[0].Message, CodeKSingleLoop) {
				t.Errorf("message %q does not point at the single-loop k (×2.048)", fs[0].Message)
			}
		})
	}
}

func TestIdenticalReadings(t *testing.T) {
	g := simulate(t, "coil_force", "", 3)
	a := Assess(g.Bench, g.Readings, DefaultTolerance())
	b1, b2, b3 := g.Bench, g.Bench, g.Bench
	b1.ID, b2.ID, b3.ID = 1, 2, 3
	b1.Label, b2.Label, b3.Label = "A1", "A2", "A3"
	other := simulate(t, "coil_force", "", 4)
	fs := RoomFindings([]BenchResult{ResultOf(b1, a, g.Readings), ResultOf(b2, a, g.Readings),
		ResultOf(b3, Assess(other.Bench, other.Readings, DefaultTolerance()), other.Readings)}, DefaultTolerance())
	if len(fs) != 1 || fs[0].Code != CodeIdenticalReadings || len(fs[0].BenchIDs) != 2 {
		t.Fatalf("findings = %+v, want identical readings at A1 and A2", fs)
	}
}

func TestStalled(t *testing.T) {
	now := time.Date(2026, 3, 5, 15, 0, 0, 0, time.UTC)
	rs := []BenchResult{
		{BenchID: 1, LastReadingAt: now.Add(-20 * time.Minute), Verdict: Consistent},
		{BenchID: 2, LastReadingAt: now.Add(-1 * time.Minute), Verdict: Check},
		{BenchID: 3}, // has not started: not stalled
	}
	got := StalledBenches(rs, now, 10*time.Minute)
	if !got[1] || got[2] || got[3] || len(got) != 1 {
		t.Errorf("stalled = %v, want only bench 1", got)
	}
	// When the whole room is quiet (a break), nobody is stalled.
	if got := StalledBenches(rs[:1], now, 10*time.Minute); len(got) != 0 {
		t.Errorf("quiet room: stalled = %v, want none", got)
	}
}
