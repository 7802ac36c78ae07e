package domain

import (
	"encoding/json"
	"testing"
)

func TestValues(t *testing.T) {
	v := ValuesOf(map[string]Quantity{"force": {Value: 0.48, Unit: "N"}, "current": {Value: 1, Unit: "A"}})
	if len(v) != 2 || v[0].Name != "current" || v[1].Name != "force" {
		t.Fatalf("ValuesOf: %v, want current then force", v)
	}
	for _, tc := range []struct {
		name string
		want Quantity
		ok   bool
	}{
		{"current", Quantity{Value: 1, Unit: "A"}, true},
		{"force", Quantity{Value: 0.48, Unit: "N"}, true},
		{"field", Quantity{}, false},
	} {
		if q, ok := v.Get(tc.name); q != tc.want || ok != tc.ok {
			t.Errorf("Get(%q) = %v, %v; want %v, %v", tc.name, q, ok, tc.want, tc.ok)
		}
		if q := v.At(tc.name); q != tc.want {
			t.Errorf("At(%q) = %v, want %v", tc.name, q, tc.want)
		}
	}
	w := ValuesOf(nil)
	w.Set("force", Quantity{Value: 0.48, Unit: "N"})
	w.Set("current", Quantity{Value: 9, Unit: "A"})
	if w.Equal(v) {
		t.Error("Equal with another current")
	}
	w.Set("current", Quantity{Value: 1, Unit: "A"})
	if !w.Equal(v) || w[0].Name != "current" || len(w) != 2 {
		t.Errorf("after Set: %v, want %v in name order", w, v)
	}
	w.Set("heater_voltage", Quantity{Value: 6.3, Unit: "V"})
	if w.Equal(v) || v.Equal(w) || w[1].Name != "force" || w[2].Name != "heater_voltage" {
		t.Errorf("after a third value: %v", w)
	}
	// JSON: an object by name, as the map it replaced was written.
	b, err := json.Marshal(v)
	if want := `{"current":{"Value":1,"Unit":"A","Uncertainty":0},"force":{"Value":0.48,"Unit":"N","Uncertainty":0}}`; err != nil || string(b) != want {
		t.Errorf("JSON %s, %v; want %s", b, err, want)
	}
	var back Values
	if err := json.Unmarshal(b, &back); err != nil || !back.Equal(v) {
		t.Errorf("JSON back: %v, %v", back, err)
	}
	if m := v.Map(); len(m) != 2 || m["force"].Value != 0.48 {
		t.Errorf("Map: %v", m)
	}
}
