package domain

import (
	"math"
	"sort"
	"strings"
)

// Quantity is a value as a person typed it: number, unit symbol and an
// optional standard uncertainty in the same unit (zero: use the default).
type Quantity struct {
	Value       float64
	Unit        string
	Uncertainty float64
}

// Measurement is a value with its standard uncertainty, in SI.
type Measurement struct {
	Value       float64
	Uncertainty float64
}

// RelUncertainty returns u/|x|, or +Inf when the value is zero.
func (m Measurement) RelUncertainty() float64 {
	if m.Value == 0 {
		return math.Inf(1)
	}
	return m.Uncertainty / math.Abs(m.Value)
}

// Dimension is the physical dimension a quantity must have.
type Dimension int

// Dimensions. Append only.
const (
	Dimensionless Dimension = iota // counts such as turns
	Length
	Current
	Force
	MagneticField
	Voltage
	Mass
	CoilConstant // T/A
	TurnDensity  // 1/m
	ForcePerCurrent
	ChargeToMassRatio
)

var dimensionNames = map[Dimension]string{
	Dimensionless:     "a count",
	Length:            "a length",
	Current:           "a current",
	Force:             "a force",
	MagneticField:     "a magnetic field",
	Voltage:           "a voltage",
	Mass:              "a mass",
	CoilConstant:      "a coil constant",
	TurnDensity:       "a turn density",
	ForcePerCurrent:   "a force per current",
	ChargeToMassRatio: "a charge-to-mass ratio",
}

func (d Dimension) String() string { return dimensionNames[d] }

// units maps each accepted unit symbol to its dimension and SI factor.
// Symbols are matched exactly after trimming spaces, except that the micro
// sign may be typed as µ (U+00B5), μ (U+03BC) or u.
var units = map[string]struct {
	dim    Dimension
	factor float64
}{
	"1": {Dimensionless, 1}, "turns": {Dimensionless, 1},
	"m": {Length, 1}, "cm": {Length, 1e-2}, "mm": {Length, 1e-3},
	"A": {Current, 1}, "mA": {Current, 1e-3},
	"N": {Force, 1}, "mN": {Force, 1e-3},
	// 1 G = 1e-4 T exactly [pub: NIST SP 811, Table 10].
	"T": {MagneticField, 1}, "mT": {MagneticField, 1e-3}, "uT": {MagneticField, 1e-6},
	"G": {MagneticField, 1e-4}, "mG": {MagneticField, 1e-7},
	"V": {Voltage, 1}, "kV": {Voltage, 1e3}, "mV": {Voltage, 1e-3},
	"kg": {Mass, 1}, "g": {Mass, 1e-3},
	"T/A": {CoilConstant, 1}, "mT/A": {CoilConstant, 1e-3},
	"N/A": {ForcePerCurrent, 1}, "mN/A": {ForcePerCurrent, 1e-3},
	"C/kg": {ChargeToMassRatio, 1},
	"1/m":  {TurnDensity, 1}, "1/cm": {TurnDensity, 1e2}, "turns/m": {TurnDensity, 1}, "turns/cm": {TurnDensity, 1e2},
}

// normalizeUnit folds the spellings people type for the same symbol.
func normalizeUnit(u string) string {
	u = strings.TrimSpace(u)
	u = strings.ReplaceAll(u, "µ", "u")
	u = strings.ReplaceAll(u, "μ", "u")
	return u
}

// UnitsFor lists the unit symbols accepted for a dimension, sorted.
func UnitsFor(d Dimension) []string {
	var out []string
	for sym, u := range units {
		if u.dim == d {
			out = append(out, sym)
		}
	}
	sort.Strings(out)
	return out
}

// toSIFast converts q when it is valid, without building an error.
func toSIFast(q Quantity, d Dimension) (Measurement, bool) {
	if math.IsNaN(q.Value) || math.IsInf(q.Value, 0) || math.IsNaN(q.Uncertainty) || math.IsInf(q.Uncertainty, 0) || q.Uncertainty < 0 {
		return Measurement{}, false
	}
	u, ok := units[q.Unit]
	if !ok {
		u, ok = units[normalizeUnit(q.Unit)]
	}
	if !ok || u.dim != d {
		return Measurement{}, false
	}
	return Measurement{Value: q.Value * u.factor, Uncertainty: q.Uncertainty * u.factor}, true
}

// ToSI converts q to SI for dimension d. field names the input in errors.
func ToSI(field string, q Quantity, d Dimension) (Measurement, error) {
	if math.IsNaN(q.Value) || math.IsInf(q.Value, 0) {
		return Measurement{}, Invalid(field+".value", "must be a finite number, got %v", q.Value)
	}
	if math.IsNaN(q.Uncertainty) || math.IsInf(q.Uncertainty, 0) || q.Uncertainty < 0 {
		return Measurement{}, Invalid(field+".uncertainty", "must be a finite number ≥ 0, got %v", q.Uncertainty)
	}
	sym := normalizeUnit(q.Unit)
	if sym == "" {
		return Measurement{}, Invalid(field+".unit", "is missing; use one of %s", strings.Join(UnitsFor(d), ", "))
	}
	u, ok := units[sym]
	if !ok {
		return Measurement{}, Invalid(field+".unit", "unknown unit %q; use one of %s", q.Unit, strings.Join(UnitsFor(d), ", "))
	}
	if u.dim != d {
		return Measurement{}, Invalid(field+".unit", "%q is %s, but this field is %s; use one of %s", q.Unit, u.dim, d, strings.Join(UnitsFor(d), ", "))
	}
	return Measurement{Value: q.Value * u.factor, Uncertainty: q.Uncertainty * u.factor}, nil
}
