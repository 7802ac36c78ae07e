package export

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"flag"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/google/go-cmp/cmp"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/domain/sim"
	"example.com/fluxroom/store"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata/export/")

var t0 = time.Date(2026, 3, 5, 13, 30, 0, 0, time.UTC)

// fixedSession stores an invented session with fixed data and times in a
// real bbolt file: four groups, a correction, a note, an unsafe reading
// and a grade override.
func fixedSession(t testing.TB) (*store.DB, uint64) {
	t.Helper()
	db, err := store.Open(filepath.Join(t.TempDir(), "fluxroom.db"), store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { db.Close() })
	s, err := db.CreateSession(domain.Session{Title: "Kestrel Vale Polytechnic · PHY 142 · Thursday", Course: "PHY 142", JoinCode: "K7Q2MX", CreatedAt: t0})
	if err != nil {
		t.Fatal(err)
	}
	groups := []struct {
		label, exp, mistake, members string
	}{
		{"A1", "coil_force", "", "Ilka V., Tomas R."},
		{"A2", "coil_force", domain.CodeSensorNotZeroed, "Group 2"},
		{"B1", "e_over_m", domain.CodeDiameterAsRadius, ""},
		{"B2", "straight_wire", "", "Ada, Bo, Cy"},
	}
	for i, g := range groups {
		run, err := sim.Simulate(g.exp, g.mistake, rand.New(rand.NewPCG(31, uint64(i))), t0)
		if err != nil {
			t.Fatal(err)
		}
		b := run.Bench
		b.Label, b.Row, b.Column, b.Members = g.label, i/2, i%2, g.members
		bs, err := db.PutBenches(s.ID, []domain.Bench{b})
		if err != nil {
			t.Fatal(err)
		}
		id := bs[len(bs)-1].ID
		for j, r := range run.Readings {
			r.ID = g.label + "-" + string(rune('a'+j))
			if g.label == "B1" && j == 3 {
				r.Values.Set("heater_voltage", domain.Quantity{Value: 7.1, Unit: "V"}) // unsafe
			}
			if _, _, err := db.AppendReading(s.ID, id, r); err != nil {
				t.Fatal(err)
			}
		}
		if g.label == "A1" {
			// A slipped decimal and its correction.
			db.AppendReading(s.ID, id, domain.Reading{ID: "A1-slip", ReceivedAt: t0.Add(20 * time.Minute),
				Values: domain.ValuesOf(map[string]domain.Quantity{"current": {Value: 2, Unit: "A"}, "force": {Value: 4.6, Unit: "N"}})})
			db.AppendReading(s.ID, id, domain.Reading{ID: "A1-fix", Supersedes: "A1-slip", ReceivedAt: t0.Add(21 * time.Minute),
				Values: domain.ValuesOf(map[string]domain.Quantity{"current": {Value: 2, Unit: "A"}, "force": {Value: 0.46, Unit: "N"}})})
			db.AppendNote(s.ID, domain.Note{BenchID: id, Kind: domain.NoteKindNote, Text: "retook the 2 A point", Author: "Teo Vasquez-Lind", At: t0.Add(22 * time.Minute)})
		}
		if g.label == "A2" {
			db.AppendNote(s.ID, domain.Note{BenchID: id, Kind: domain.NoteKindGradeOverride, Text: "sensor fault confirmed by staff",
				Author: "Rosalind Achterberg", At: t0.Add(2 * time.Hour), Points: 9.5, PreviousPoints: 9})
		}
	}
	return db, s.ID
}

func prepared(t testing.TB) Session {
	t.Helper()
	db, id := fixedSession(t)
	d, err := db.ReadSession(id)
	if err != nil {
		t.Fatal(err)
	}
	s, err := Prepare(d)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// TestGoldenExports compares every format with testdata/export (go test
// -update rewrites them).
func TestGoldenExports(t *testing.T) {
	s := prepared(t)
	for _, f := range Formats {
		t.Run(string(f), func(t *testing.T) {
			var buf bytes.Buffer
			name, _, err := Write(&buf, s, f)
			if err != nil {
				t.Fatal(err)
			}
			golden := filepath.Join("..", "..", "testdata", "export", goldenName(name))
			if *update {
				os.WriteFile(golden, buf.Bytes(), 0o644)
			}
			want, err := os.ReadFile(golden)
			if err != nil {
				t.Fatal(err)
			}
			if diff := cmp.Diff(buf.String(), string(want)); diff != "" {
				t.Errorf("%s (-got +want):\n%s", name, diff)
			}
		})
	}
}

// TestGradebookParsesBack reads the gradebook with encoding/csv (RFC 4180).
func TestGradebookParsesBack(t *testing.T) {
	s := prepared(t)
	var buf bytes.Buffer
	if err := WriteGradebookCSV(&buf, s); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(buf.String(), "\r\n") {
		t.Error("rows do not end in CRLF (RFC 4180)")
	}
	recs, err := csv.NewReader(&buf).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if diff := cmp.Diff(recs[0], GradebookHeader); diff != "" {
		t.Errorf("header (-got +want):\n%s", diff)
	}
	if len(recs) != 5 {
		t.Fatalf("%d rows, want a header and 4 groups", len(recs))
	}
	byBench := map[string][]string{}
	for _, r := range recs[1:] {
		byBench[r[0]] = r
	}
	col := func(name string) int {
		for i, h := range GradebookHeader {
			if h == name {
				return i
			}
		}
		t.Fatalf("no column %q", name)
		return -1
	}
	if got := byBench["A2"][col("points")]; got != "9.5" {
		t.Errorf("A2 points = %s, want the override 9.5", got)
	}
	if got := byBench["A2"][col("override reason")]; got != "sensor fault confirmed by staff" {
		t.Errorf("A2 override reason = %q", got)
	}
	if got := byBench["A1"][col("group members")]; got != "Ilka V., Tomas R." {
		t.Errorf("A1 members = %q (a comma inside a field must survive)", got)
	}
	if got := byBench["B1"][col("deduction points")]; got != "1" {
		t.Errorf("B1 deduction = %s, want 1 for one unsafe reading", got)
	}
	if got := byBench["B1"][col("diagnosis codes")]; !strings.Contains(got, domain.CodeDiameterAsRadius) {
		t.Errorf("B1 codes = %q", got)
	}
}

// TestRegradeKeepsOverrides: a stricter policy changes the computed points
// but the instructor's override stays, with its audit.
func TestRegradeKeepsOverrides(t *testing.T) {
	db, id := fixedSession(t)
	d, _ := db.ReadSession(id)
	d.Session.GradingPolicy = `{"name": "strict", "accuracy": {"full_within_z": 1, "full_within_percent": 1, "half_at_percent": 2, "zero_from_percent": 5}}`
	s, err := Prepare(d)
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range s.Rows {
		if r.Bench.Label == "A2" {
			if r.Grade.Final != 9.5 || r.Grade.Override == nil || r.Grade.Override.Previous != 9 || r.Grade.Override.Author != "Rosalind Achterberg" {
				t.Errorf("A2 after regrade: final %g, override %+v", r.Grade.Final, r.Grade.Override)
			}
		}
	}
	if s.Policy.Name != "strict" || s.Policy.Points != domain.DefaultPolicy().Points {
		t.Errorf("policy = %+v: fields left out must keep their defaults", s.Policy)
	}
}

func TestParsePolicyErrors(t *testing.T) {
	for _, tc := range []struct {
		name, json, wantField string
	}{
		{"unknown field", `{"pointz": {}}`, "pointz"},
		{"wrong type", `{"points": {"accuracy": "four"}}`, "points.accuracy"},
		{"bad value", `{"unsafe_deduction": -3}`, "unsafe_deduction"},
		{"unknown experiment", `{"required_readings": {"levitation": 4}}`, `required_readings["levitation"]`},
		{"not JSON", `{"points": `, "policy"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ParsePolicy([]byte(tc.json))
			var ve *domain.ValidationError
			if err == nil || !asValidation(err, &ve) {
				t.Fatalf("ParsePolicy = %v, want a field error", err)
			}
			found := false
			for _, v := range ve.Violations {
				found = found || v.Field == tc.wantField
			}
			if !found {
				t.Errorf("violations %+v, want field %s", ve.Violations, tc.wantField)
			}
		})
	}
	if _, err := ParsePolicy(nil); err != nil {
		t.Errorf("an empty policy (the default) is rejected: %v", err)
	}
}

// TestPolicyExample parses the README's example policy file.
func TestPolicyExample(t *testing.T) {
	b, err := os.ReadFile(filepath.Join("..", "..", "testdata", "policy-example.json"))
	if err != nil {
		t.Fatal(err)
	}
	p, err := ParsePolicy(b)
	if err != nil {
		t.Fatal(err)
	}
	if p.Max() != 10 || p.RequiredReadings["coil_force"] != 10 || p.RequiredReadings["solenoid"] != 5 || p.UnsafeDeduction != 2 {
		t.Errorf("policy = %+v", p)
	}
}

// TestRoomFindingsInExports: what the dashboard showed about the room as a
// whole (here three groups sharing a single-loop coil constant) is in the
// JSON and at the head of the HTML report, naming the benches.
func TestRoomFindingsInExports(t *testing.T) {
	db, err := store.Open(filepath.Join(t.TempDir(), "fluxroom.db"), store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	s, err := db.CreateSession(domain.Session{Title: "Kestrel Vale Polytechnic · PHY 142 · Friday", JoinCode: "R4M8QT", CreatedAt: t0})
	if err != nil {
		t.Fatal(err)
	}
	for i, label := range []string{"C1", "C2", "C3"} {
		run, err := sim.Simulate("e_over_m", domain.CodeKSingleLoop, rand.New(rand.NewPCG(77, uint64(i))), t0)
		if err != nil {
			t.Fatal(err)
		}
		b := run.Bench
		b.Label, b.Column = label, i
		bs, err := db.PutBenches(s.ID, []domain.Bench{b})
		if err != nil {
			t.Fatal(err)
		}
		for j, r := range run.Readings {
			r.ID = fmt.Sprintf("%s-%d", label, j)
			if _, _, err := db.AppendReading(s.ID, bs[len(bs)-1].ID, r); err != nil {
				t.Fatal(err)
			}
		}
	}
	d, err := db.ReadSession(s.ID)
	if err != nil {
		t.Fatal(err)
	}
	ex, err := Prepare(d)
	if err != nil {
		t.Fatal(err)
	}
	var js, page bytes.Buffer
	if err := WriteJSON(&js, ex); err != nil {
		t.Fatal(err)
	}
	if err := WriteHTML(&page, ex); err != nil {
		t.Fatal(err)
	}
	var doc struct {
		RoomFindings []struct {
			Code    string   `json:"code"`
			Benches []string `json:"benches"`
		} `json:"room_findings"`
	}
	if err := json.Unmarshal(js.Bytes(), &doc); err != nil {
		t.Fatal(err)
	}
	if len(doc.RoomFindings) != 1 || doc.RoomFindings[0].Code != domain.CodeSharedCause || strings.Join(doc.RoomFindings[0].Benches, ",") != "C1,C2,C3" {
		t.Errorf("JSON room_findings = %+v, want the shared cause at C1, C2, C3", doc.RoomFindings)
	}
	if !strings.Contains(page.String(), "Across the room") || !strings.Contains(page.String(), "C1, C2, C3") {
		t.Errorf("the HTML report does not show the room's finding")
	}
}
