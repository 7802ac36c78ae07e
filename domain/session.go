package domain

import (
	"math"
	"time"
)

// Session is one lab section meeting in one room.
type Session struct {
	ID    uint64
	Title string
	// Course is the course the session belongs to; staff see and change
	// only their courses' sessions.
	Course    string
	JoinCode  string
	CreatedAt time.Time
	// Tolerance is the session's verdict rule; the zero value means
	// DefaultTolerance().
	Tolerance Tolerance
	// StationsSeeVerdicts lets a bench's laptop see its own verdict and hint.
	StationsSeeVerdicts bool
	// GradingPolicy is the course's policy file as JSON; empty for
	// DefaultPolicy(). It is parsed at the edges (internal/export).
	GradingPolicy string
	// Closed sessions take no readings; their join code stops working.
	Closed bool
}

// EffectiveTolerance is the session's tolerance with defaults filled in.
func (s Session) EffectiveTolerance() Tolerance {
	t := s.Tolerance
	d := DefaultTolerance()
	if t.ZConsistent == 0 {
		t.ZConsistent = d.ZConsistent
	}
	if t.ZOff == 0 {
		t.ZOff = d.ZOff
	}
	if t.GoodPercent == 0 {
		t.GoodPercent = d.GoodPercent
	}
	if t.AcceptablePercent == 0 {
		t.AcceptablePercent = d.AcceptablePercent
	}
	return t
}

// ValidateTitle checks a session's title: one line of 1–80 characters.
func ValidateTitle(field, title string) error {
	if !validLine(title, 80) {
		return Invalid(field, "must be 1–80 characters, such as the course and section")
	}
	return nil
}

// ValidateTolerance checks a tolerance profile; zero fields mean "default".
func ValidateTolerance(prefix string, t Tolerance) error {
	var vs violations
	e := t
	full := Session{Tolerance: t}.EffectiveTolerance()
	for _, f := range []struct {
		name string
		v    float64
		max  float64
	}{{"z_consistent", e.ZConsistent, 10}, {"z_off", e.ZOff, 20}, {"good_percent", e.GoodPercent, 100}, {"acceptable_percent", e.AcceptablePercent, 100}} {
		if math.IsNaN(f.v) || f.v < 0 || f.v > f.max {
			vs.add(prefix+"."+f.name, "must be between 0 (the default) and %g, got %v", f.max, f.v)
		}
	}
	if len(vs) == 0 && full.ZOff < full.ZConsistent {
		vs.add(prefix+".z_off", "must be at least z_consistent (%g), got %g", full.ZConsistent, full.ZOff)
	}
	if len(vs) == 0 && full.AcceptablePercent < full.GoodPercent {
		vs.add(prefix+".acceptable_percent", "must be at least good_percent (%g), got %g", full.GoodPercent, full.AcceptablePercent)
	}
	return vs.err()
}
