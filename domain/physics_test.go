package domain

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/unit/constant"
)

// TestConstants cross-checks the project's CODATA 2022 table.
func TestConstants(t *testing.T) {
	// μ0 and 4π·10⁻⁷ differ by about 1e-10 relative since 2019
	// [pub: Mohr et al., Rev. Mod. Phys. 97, 025002 (2025)].
	if e := relErr(Mu0, 4*math.Pi*1e-7); e > 1e-9 || e == 0 {
		t.Errorf("μ0 vs 4π·10⁻⁷: rel diff %.2g, want 0 < d ≤ 1e-9", e)
	}
	// e/mₑ from e and mₑ of the same table [pub: CODATA 2022].
	if e := relErr(ElementaryCharge/ElectronMass, ElectronChargeToMass); e > 1e-9 {
		t.Errorf("e/mₑ = %.12g, table %.12g", ElementaryCharge/ElectronMass, ElectronChargeToMass)
	}
	// gonum v0.17.0 holds CODATA 2018 [pub: gonum unit/constant]; compare
	// plain floats only (its MagneticConstant has the wrong dimensions).
	if e := relErr(float64(constant.ElementaryCharge), ElementaryCharge); e > 1e-15 {
		t.Errorf("e: gonum %.12g, table %.12g", float64(constant.ElementaryCharge), ElementaryCharge)
	}
	if e := relErr(float64(constant.MagneticConstant), Mu0); e > 1e-9 {
		t.Errorf("μ0: gonum (CODATA 2018) %.12g, table (2022) %.12g, rel diff %.2g", float64(constant.MagneticConstant), Mu0, e)
	}
	if e := relErr(HelmholtzFactor, math.Pow(0.8, 1.5)); e > 1e-15 {
		t.Errorf("(4/5)^{3/2} = %.16g, want %.16g", HelmholtzFactor, math.Pow(0.8, 1.5))
	}
}

func TestWorkedExamples(t *testing.T) {
	for _, tc := range []struct {
		name, source string
		got, want    float64
		relTol       float64
	}{
		// PHYSICS.md §2(b) [derived]: a pair of 130 turns, 15.0 cm radius.
		{"Helmholtz k, N=130 R=15 cm (T/A)", "derived", HelmholtzFactor * Mu0 * 130 / 0.150, 7.793e-4, 1e-3},
		{"B at 1.5 A (T)", "derived", HelmholtzFactor * Mu0 * 130 / 0.150 * 1.5, 1.169e-3, 1e-3},
		{"r at 150 V, 1.5 A (m)", "derived", orbitRadius(150, 1.5), 0.0353, 2e-3},
		{"r at 150 V, 1.0 A (m)", "derived", orbitRadius(150, 1.0), 0.0530, 2e-3},
		{"r at 200 V, 1.5 A (m)", "derived", orbitRadius(200, 1.5), 0.0408, 2e-3},
		{"r at 300 V, 2.0 A (m)", "derived", orbitRadius(300, 2.0), 0.0375, 2e-3},
		{"v at 150 V (m/s)", "derived", math.Sqrt(2 * ElectronChargeToMass * 150), 7.26e6, 1e-3},
		// PHYSICS.md §2(c) [pub: OpenStax College Physics §22.9]:
		// 1.0e-4 T at 5.0 cm needs 25 A.
		{"wire: B at 5.0 cm, 25 A (T)", "pub", WireField(25, 0.05, math.Inf(1)), 1.0e-4, 1e-3},
		// B[G] = 0.2·I[A]/r[cm] // common practice.
		{"wire: handy rule, 10 A at 2 cm (G)", "cp", WireField(10, 0.02, math.Inf(1)) * 1e4, 0.2 * 10 / 2, 1e-3},
		// PHYSICS.md §2(d) [derived]: N=500, L=0.15 m, R=0.02 m, 1 A.
		{"solenoid: ideal (T)", "derived", Mu0 * 500 / 0.15, 4.189e-3, 1e-3},
		{"solenoid: centre (T)", "derived", SolenoidField(500, 0.15, 0.02, 1, 0), 4.047e-3, 1e-3},
		{"solenoid: end (T)", "derived", SolenoidField(500, 0.15, 0.02, 1, 0.075), 2.076e-3, 1e-3},
		// [pub: OpenStax College Physics §22.9]: 2000 loops, 2.00 m, 1600 A.
		{"solenoid: OpenStax (T)", "pub", Mu0 * 2000 / 2.00 * 1600, 2.01, 3e-3},
		// PHYSICS.md §2(e) [derived]: N=200, R=0.105 m, 1 A.
		{"flat coil: centre (T)", "derived", CoilField(200, 0.105, 1, 0), 1.197e-3, 1e-3},
		{"flat coil: B(R)/B0", "derived", CoilField(200, 0.105, 1, 0.105) / CoilField(200, 0.105, 1, 0), 0.3536, 1e-3},
		// PHYSICS.md §2(a) [derived]: calibration with 0.5 kg.
		{"0.5 kg × gₙ (N)", "derived", 0.5 * StandardGravity, 4.903, 1e-3},
	} {
		if e := relErr(tc.got, tc.want); e > tc.relTol {
			t.Errorf("%s [%s]: got %.5g, want %.5g (rel err %.2g)", tc.name, tc.source, tc.got, tc.want, e)
		}
	}
}

// orbitRadius is r = √(2V·m/e)/B for the N=130, R=15 cm pair.
func orbitRadius(V, I float64) float64 {
	return math.Sqrt(2*V/ElectronChargeToMass) / (HelmholtzFactor * Mu0 * 130 / 0.150 * I)
}

// TestEOverMWorkedTable feeds the derived table of PHYSICS.md §2(b) as
// readings (diameters, 3 figures) and expects CODATA back within the
// rounding of the table [derived].
func TestEOverMWorkedTable(t *testing.T) {
	b, err := ValidateBench("b", Bench{Label: "E1", Experiment: "e_over_m"})
	if err != nil {
		t.Fatal(err)
	}
	var rs []Reading
	for _, row := range []struct{ V, I, d float64 }{{150, 1.5, 7.07}, {150, 1.0, 10.60}, {200, 1.5, 8.16}, {300, 2.0, 7.50}} {
		rs = append(rs, Reading{Values: ValuesOf(map[string]Quantity{"anode_voltage": qty(row.V, "V"), "coil_current": qty(row.I, "A"),
			"beam_diameter": qty(row.d, "cm")})})
	}
	a := Assess(b, rs, DefaultTolerance())
	if e := relErr(a.Measured.Value, ElectronChargeToMass); e > 0.005 {
		t.Errorf("e/m = %.4g, want %.4g within 0.5 %% (%s)", a.Measured.Value, ElectronChargeToMass, a.Reason)
	}
	if a.Verdict != Consistent {
		t.Errorf("verdict %s, want consistent (%s)", a.Verdict.Label(), a.Reason)
	}
	// For a single run the diameter reading dominates the budget
	// (±1 mm on 70 mm, doubled) // common practice (PHYSICS.md §2(b)).
	one := Assess(b, rs[:1], DefaultTolerance())
	if len(one.Budget) == 0 || one.Budget[0].Input != "beam diameter d" {
		t.Errorf("single-run budget = %+v, want the beam diameter first", one.Budget)
	}
}

// TestSafety: a reading over a bench limit makes the bench unsafe at once,
// whatever the data say, with the caution text.
func TestSafety(t *testing.T) {
	b, _ := ValidateBench("b", Bench{Label: "E1", Experiment: "e_over_m"})
	ok := map[string]Quantity{"anode_voltage": qty(150, "V"), "coil_current": qty(1.5, "A"), "beam_diameter": qty(7.07, "cm")}
	for _, tc := range []struct {
		name   string
		edit   func(map[string]Quantity)
		unsafe bool
	}{
		{"all within limits", func(map[string]Quantity) {}, false},
		{"heater 7.5 V", func(m map[string]Quantity) { m["heater_voltage"] = qty(7.5, "V") }, true},
		{"heater 6.3 V", func(m map[string]Quantity) { m["heater_voltage"] = qty(6.3, "V") }, false},
		{"anode 450 V", func(m map[string]Quantity) { m["anode_voltage"] = qty(450, "V") }, true},
		{"coil current 3 A", func(m map[string]Quantity) { m["coil_current"] = qty(3, "A") }, true},
		{"reversed coil current −3 A", func(m map[string]Quantity) { m["coil_current"] = qty(-3, "A") }, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m := map[string]Quantity{}
			for k, v := range ok {
				m[k] = v
			}
			tc.edit(m)
			a := Assess(b, []Reading{{Values: ValuesOf(m)}}, DefaultTolerance())
			if got := a.Verdict == Unsafe; got != tc.unsafe {
				t.Errorf("unsafe = %v, want %v (%s)", got, tc.unsafe, a.Reason)
			}
			if tc.unsafe && (a.Caution == "" || !contains(a.Caution, "equipment maker")) {
				t.Errorf("caution %q does not defer to local rules and the maker's limits", a.Caution)
			}
		})
	}
}

func contains(s, sub string) bool { return indexOf(s, sub) >= 0 }

func indexOf(s, sub string) int {
	for i := 0; i+len(sub) <= len(s); i++ {
		if s[i:i+len(sub)] == sub {
			return i
		}
	}
	return -1
}

func TestUnits(t *testing.T) {
	for _, tc := range []struct {
		q    Quantity
		dim  Dimension
		want float64
		ok   bool
	}{
		{Quantity{Value: 5, Unit: "G"}, MagneticField, 5e-4, true},
		{Quantity{Value: 5, Unit: "µT"}, MagneticField, 5e-6, true},
		{Quantity{Value: 5, Unit: "μT"}, MagneticField, 5e-6, true},
		{Quantity{Value: 5, Unit: "uT"}, MagneticField, 5e-6, true},
		{Quantity{Value: 2, Unit: " kV "}, Voltage, 2000, true},
		{Quantity{Value: 250, Unit: "g"}, Mass, 0.25, true},
		{Quantity{Value: 3, Unit: "mm"}, Length, 3e-3, true},
		{Quantity{Value: 3, Unit: "in"}, Length, 0, false},
		{Quantity{Value: 3, Unit: "A"}, Length, 0, false},
	} {
		m, err := ToSI("f", tc.q, tc.dim)
		if (err == nil) != tc.ok || tc.ok && relErr(m.Value, tc.want) > 1e-12 {
			t.Errorf("ToSI(%v, %v) = %v, %v; want %v, ok %v", tc.q, tc.dim, m.Value, err, tc.want, tc.ok)
		}
	}
}

// TestEOverMLinearForms: readings of the derived table on one line of each
// form give CODATA back from the fitted slope [derived from PHYSICS.md §2(b)].
func TestEOverMLinearForms(t *testing.T) {
	b, _ := ValidateBench("b", Bench{Label: "E1", Experiment: "e_over_m"})
	var rs []Reading
	add := func(V, I float64) {
		d := 2 * orbitRadius(V, I)
		rs = append(rs, Reading{Values: ValuesOf(map[string]Quantity{"anode_voltage": qty(V, "V"), "coil_current": qty(I, "A"), "beam_diameter": qty(d, "m")})})
	}
	for _, V := range []float64{150, 200, 250, 300} {
		add(V, 1.5)
	}
	for _, I := range []float64{1.2, 1.8, 2.0} {
		add(200, I)
	}
	a := Assess(b, rs, DefaultTolerance())
	var forms int
	for _, n := range a.Notes {
		if contains(n, "r² against V at 1.50 A (4 points): e/m (1.758820") || contains(n, "1/r against I at 200 V (4 points): e/m (1.758820") {
			forms++
		}
	}
	if forms != 2 {
		t.Errorf("notes = %q, want both linear forms giving 1.7588e11", a.Notes)
	}
}
