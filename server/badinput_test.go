package server

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"example.com/fluxroom/domain"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
)

// TestBadInputCatalogue sends well over a hundred bad requests across every
// RPC that takes input: each must be answered InvalidArgument naming at
// least one field, and the store must hold afterwards exactly what it held
// before.
func TestBadInputCatalogue(t *testing.T) {
	r := startRig(t)
	ctx := context.Background()
	cs, err := r.instructor.CreateSession(ctx, &pb.CreateSessionRequest{Title: "catalogue"})
	if err != nil {
		t.Fatal(err)
	}
	sid := cs.Session.SessionId
	var benches []*pb.Bench
	for i, id := range domain.ExperimentIDs() {
		benches = append(benches, &pb.Bench{Label: fmt.Sprintf("E%d", i), Column: int32(i), Experiment: id})
	}
	sb, err := r.instructor.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: sid, Benches: benches})
	if err != nil {
		t.Fatal(err)
	}
	byExp := map[string]uint64{}
	for _, b := range sb.Benches {
		byExp[b.Experiment] = b.BenchId
	}
	before := snapshotCounts(t, r, sid)

	type bad struct {
		name string
		call func() error
	}
	var cases []bad
	add := func(name string, call func() error) { cases = append(cases, bad{name, call}) }

	// Readings: every value of every experiment, spoiled one way at a time.
	good := func(e *domain.Experiment) map[string]*pb.Quantity {
		m := map[string]*pb.Quantity{}
		for _, s := range e.Values {
			if !s.Optional {
				v := 1.0
				if s.Name == "anode_voltage" {
					v = 150
				}
				if s.Name == "beam_diameter" {
					v = 7
				}
				if s.Name == "distance" {
					v = 3
				}
				m[s.Name] = &pb.Quantity{Value: v, Unit: s.Unit}
			}
		}
		return m
	}
	n := 0
	for _, id := range domain.ExperimentIDs() {
		e, _ := domain.LookupExperiment(id)
		for _, s := range e.Values {
			spoil := map[string]func(*pb.Quantity) *pb.Quantity{
				"NaN":                  func(q *pb.Quantity) *pb.Quantity { return &pb.Quantity{Value: math.NaN(), Unit: q.Unit} },
				"+Inf":                 func(q *pb.Quantity) *pb.Quantity { return &pb.Quantity{Value: math.Inf(1), Unit: q.Unit} },
				"no unit":              func(q *pb.Quantity) *pb.Quantity { return &pb.Quantity{Value: 1} },
				"unknown unit":         func(q *pb.Quantity) *pb.Quantity { return &pb.Quantity{Value: 1, Unit: "furlong"} },
				"negative uncertainty": func(q *pb.Quantity) *pb.Quantity { return &pb.Quantity{Value: 1, Unit: q.Unit, Uncertainty: -1} },
				"wrong dimension": func(q *pb.Quantity) *pb.Quantity {
					return &pb.Quantity{Value: 1, Unit: map[bool]string{true: "kg", false: "C/kg"}[s.Dim != domain.Mass]}
				},
			}
			if !math.IsNaN(s.Max) {
				spoil["beyond what the set-up can give"] = func(q *pb.Quantity) *pb.Quantity {
					return &pb.Quantity{Value: s.Max * 1e3, Unit: siSymbol[s.Dim]}
				}
			}
			for how, f := range spoil {
				e, s, how, f := e, s, how, f
				add(fmt.Sprintf("%s.%s %s", e.ID, s.Name, how), func() error {
					v := good(e)
					v[s.Name] = f(&pb.Quantity{Unit: s.Unit})
					n++
					_, err := submit2(ctx, r, sid, byExp[e.ID], fmt.Sprintf("bad-%d", n), v)
					return err
				})
			}
			if !s.Optional {
				add(fmt.Sprintf("%s.%s missing", e.ID, s.Name), func() error {
					v := good(e)
					delete(v, s.Name)
					n++
					_, err := submit2(ctx, r, sid, byExp[e.ID], fmt.Sprintf("bad-%d", n), v)
					return err
				})
			}
		}
		add(e.ID+" extra value", func() error {
			v := good(e)
			v["colour"] = &pb.Quantity{Value: 1, Unit: "1"}
			_, err := submit2(ctx, r, sid, byExp[e.ID], "bad-extra", v)
			return err
		})
		// Constants: spoiled on a new bench.
		for _, s := range e.Constants {
			e, s := e, s
			for how, q := range map[string]*pb.Quantity{
				"NaN":           {Value: math.NaN(), Unit: s.Unit},
				"unknown unit":  {Value: 1, Unit: "parsec"},
				"below minimum": {Value: -1e9, Unit: s.Unit},
			} {
				how, q := how, q
				add(fmt.Sprintf("%s constant %s %s", e.ID, s.Name, how), func() error {
					_, err := r.instructor.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: sid, Benches: []*pb.Bench{
						{Label: "NEW", Row: 5, Experiment: e.ID, Constants: map[string]*pb.Quantity{s.Name: q}}}})
					return err
				})
			}
		}
	}
	coil := byExp["coil_force"]
	okValues := map[string]*pb.Quantity{"current": {Value: 1, Unit: "A"}, "force": {Value: 0.48, Unit: "N"}}
	for _, id := range []string{"", strings.Repeat("x", 65), "has space", "ünï", "a/b"} {
		id := id
		add(fmt.Sprintf("reading id %q", id), func() error { _, err := submit2(ctx, r, sid, coil, id, okValues); return err })
	}
	add("unknown bench", func() error { _, err := submit2(ctx, r, sid, 9999, "x1", okValues); return err })
	add("no session", func() error { _, err := submit2(ctx, r, 0, coil, "x2", okValues); return err })
	add("supersedes an unknown reading", func() error {
		_, err := r.station.SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: sid, BenchId: coil, ReadingId: "x3", Supersedes: "ghost", Values: okValues})
		return err
	})
	for name, b := range map[string]*pb.Bench{
		"empty label":          {Label: "", Experiment: "coil_force"},
		"label too long":       {Label: strings.Repeat("L", 40), Experiment: "coil_force"},
		"label with a slash":   {Label: "A/1", Experiment: "coil_force"},
		"row out of the room":  {Label: "R1", Row: 50, Experiment: "coil_force"},
		"negative column":      {Label: "R2", Column: -1, Experiment: "coil_force"},
		"unknown experiment":   {Label: "R3", Experiment: "levitation"},
		"label already used":   {Label: "E0", Row: 3, Experiment: "coil_force"},
		"unknown constant":     {Label: "R4", Experiment: "coil_force", Constants: map[string]*pb.Quantity{"colour": {Value: 1, Unit: "1"}}},
		"members on two lines": {Label: "R5", Experiment: "coil_force", Members: "a\nb"},
		"unknown bench id":     {BenchId: 777, Label: "R6", Experiment: "coil_force"},
	} {
		b := b
		add("bench: "+name, func() error {
			_, err := r.instructor.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: sid, Benches: []*pb.Bench{b}})
			return err
		})
	}
	add("benches of an unknown session", func() error {
		_, err := r.instructor.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: 4242, Benches: []*pb.Bench{{Label: "Z", Experiment: "coil_force"}}})
		return err
	})
	add("two new benches, one label", func() error {
		_, err := r.instructor.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: sid, Benches: []*pb.Bench{
			{Label: "D1", Row: 7, Experiment: "coil_force"}, {Label: "D1", Row: 8, Experiment: "coil_force"}}})
		return err
	})
	for name, title := range map[string]string{"empty title": "", "blank title": "   ", "title too long": strings.Repeat("t", 81), "title with a line break": "PHY\n142"} {
		title := title
		add("session: "+name, func() error {
			_, err := r.instructor.CreateSession(ctx, &pb.CreateSessionRequest{Title: title})
			return err
		})
	}
	for name, tol := range map[string]*pb.Tolerance{
		"negative z": {ZConsistent: -1}, "NaN percent": {GoodPercent: math.NaN()}, "z_off below z_consistent": {ZConsistent: 3, ZOff: 1},
		"acceptable below good": {GoodPercent: 20, AcceptablePercent: 5}, "absurd z": {ZConsistent: 1e9},
	} {
		tol := tol
		add("tolerance: "+name, func() error {
			_, err := r.instructor.CreateSession(ctx, &pb.CreateSessionRequest{Title: "x", Tolerance: tol})
			return err
		})
		add("tolerance update: "+name, func() error {
			_, err := r.instructor.UpdateSession(ctx, &pb.UpdateSessionRequest{SessionId: sid, Tolerance: tol})
			return err
		})
	}
	for name, req := range map[string]*pb.JoinBenchRequest{
		"no code": {BenchLabel: "E0"}, "wrong code": {JoinCode: "ZZZZZZ", BenchLabel: "E0"},
		"unknown bench":        {JoinCode: cs.Session.JoinCode, BenchLabel: "Q9"},
		"members on two lines": {JoinCode: cs.Session.JoinCode, BenchLabel: "E0", GroupMembers: "a\nb"},
		"members too long":     {JoinCode: cs.Session.JoinCode, BenchLabel: "E0", GroupMembers: strings.Repeat("m", 300)},
	} {
		req := req
		add("join: "+name, func() error { _, err := r.station.JoinBench(ctx, req); return err })
	}
	for name, req := range map[string]*pb.SetGroupMembersRequest{
		"members of an unknown bench": {SessionId: sid, BenchId: 31337, Members: "Ines"},
		"members on two lines":        {SessionId: sid, BenchId: coil, Members: "Ines\nOren"},
		"members too long":            {SessionId: sid, BenchId: coil, Members: strings.Repeat("m", 201)},
	} {
		req := req
		add("set "+name, func() error { _, err := r.instructor.SetGroupMembers(ctx, req); return err })
	}
	for name, req := range map[string]*pb.AddNoteRequest{
		"empty note": {SessionId: sid, BenchId: coil}, "note too long": {SessionId: sid, BenchId: coil, Text: strings.Repeat("n", 1001)},
		"note on an unknown bench": {SessionId: sid, BenchId: 31337, Text: "x"},
	} {
		req := req
		add(name, func() error { _, err := r.instructor.AddNote(ctx, req); return err })
	}
	for name, req := range map[string]*pb.OverrideGradeRequest{
		"override NaN": {SessionId: sid, BenchId: coil, Points: math.NaN(), Reason: "r"}, "override negative": {SessionId: sid, BenchId: coil, Points: -1, Reason: "r"},
		"override above max": {SessionId: sid, BenchId: coil, Points: 11, Reason: "r"}, "override without reason": {SessionId: sid, BenchId: coil, Points: 5},
		"override of an unknown bench": {SessionId: sid, BenchId: 44444, Points: 5, Reason: "r"},
	} {
		req := req
		add(name, func() error { _, err := r.instructor.OverrideGrade(ctx, req); return err })
	}
	for _, f := range []pb.ExportFormat{0, 99} {
		f := f
		add(fmt.Sprintf("export format %d", f), func() error {
			_, err := r.instructor.Export(ctx, &pb.ExportRequest{SessionId: sid, Format: f})
			return err
		})
	}
	for name, js := range map[string]string{
		"policy not JSON": "{", "policy unknown field": `{"bonus": 3}`, "policy wrong type": `{"points": {"precision": true}}`,
		"policy negative": `{"unsafe_deduction": -1}`, "policy bands reversed": `{"precision": {"full_at_or_below_percent": 20, "zero_from_percent": 10}}`,
		"policy unknown experiment": `{"required_readings": {"gyroscope": 3}}`, "policy two values": `{} {}`,
	} {
		js := js
		add(name, func() error {
			_, err := r.instructor.SetGradingPolicy(ctx, &pb.SetGradingPolicyRequest{SessionId: sid, PolicyJson: js})
			return err
		})
	}
	// Staff accounts and a session's course.
	staff := rpcpb.NewStaffServiceClient(r.conn)
	for name, req := range map[string]*pb.AddStaffRequest{
		"no name":                 {Roles: []*pb.CourseRole{{Course: "PHY 1", Role: pb.StaffRole_STAFF_ROLE_ASSISTANT}}},
		"name on two lines":       {Name: "Ann\nBo", Roles: []*pb.CourseRole{{Course: "PHY 1", Role: pb.StaffRole_STAFF_ROLE_ASSISTANT}}},
		"name of 81 characters":   {Name: strings.Repeat("n", 81), Roles: []*pb.CourseRole{{Course: "PHY 1", Role: pb.StaffRole_STAFF_ROLE_ASSISTANT}}},
		"no role":                 {Name: "Ann Bo"},
		"no course":               {Name: "Ann Bo", Roles: []*pb.CourseRole{{Role: pb.StaffRole_STAFF_ROLE_ASSISTANT}}},
		"unspecified role":        {Name: "Ann Bo", Roles: []*pb.CourseRole{{Course: "PHY 1"}}},
		"a role outside the enum": {Name: "Ann Bo", Roles: []*pb.CourseRole{{Course: "PHY 1", Role: 7}}},
		"one course twice":        {Name: "Ann Bo", Roles: []*pb.CourseRole{{Course: "PHY 1", Role: pb.StaffRole_STAFF_ROLE_ASSISTANT}, {Course: "PHY 1", Role: pb.StaffRole_STAFF_ROLE_INSTRUCTOR}}},
		"course with a tab":       {Name: "Ann Bo", Roles: []*pb.CourseRole{{Course: "PHY\t1", Role: pb.StaffRole_STAFF_ROLE_ASSISTANT}}},
	} {
		add("staff: "+name, func() error { _, err := staff.AddStaff(ctx, req); return err })
	}
	add("revoke an unknown account", func() error {
		_, err := staff.RevokeStaff(ctx, &pb.RevokeStaffRequest{StaffId: 99})
		return err
	})
	add("remove a role from an unknown account", func() error {
		_, err := staff.RevokeStaff(ctx, &pb.RevokeStaffRequest{StaffId: 99, Course: "PHY 1"})
		return err
	})
	add("rotate an unknown account", func() error {
		_, err := staff.RotateStaffKey(ctx, &pb.RotateStaffKeyRequest{StaffId: 99})
		return err
	})
	add("session: course of 81 characters", func() error {
		_, err := r.instructor.CreateSession(ctx, &pb.CreateSessionRequest{Title: "t", Course: strings.Repeat("c", 81)})
		return err
	})
	add("watch an unknown session", func() error {
		s, err := r.instructor.WatchRoom(ctx, &pb.WatchRoomRequest{SessionId: 5555})
		if err != nil {
			return err
		}
		_, err = s.Recv()
		return err
	})
	add("detail of an unknown bench", func() error {
		_, err := r.instructor.GetBenchDetail(ctx, &pb.GetBenchDetailRequest{SessionId: sid, BenchId: 8888})
		return err
	})

	rejected := 0
	for _, c := range cases {
		err := c.call()
		if status.Code(err) != codes.InvalidArgument {
			t.Errorf("%s: %v, want InvalidArgument", c.name, err)
			continue
		}
		if len(fieldsOf(t, err)) == 0 {
			t.Errorf("%s: no field named", c.name)
			continue
		}
		rejected++
	}
	after := snapshotCounts(t, r, sid)
	if after != before {
		t.Errorf("the store changed: before %+v, after %+v", before, after)
	}
	t.Logf("bad inputs tried %d, rejected with a field error %d; store unchanged: %v", len(cases), rejected, after == before)
	if len(cases) < 100 {
		t.Errorf("only %d bad inputs in the catalogue, want at least 100", len(cases))
	}
}

// siSymbol is the unit of factor 1 of each dimension.
var siSymbol = map[domain.Dimension]string{domain.Length: "m", domain.Current: "A", domain.Force: "N", domain.MagneticField: "T",
	domain.Voltage: "V", domain.Dimensionless: "1", domain.ChargeToMassRatio: "C/kg", domain.ForcePerCurrent: "N/A", domain.Mass: "kg"}

func submit2(ctx context.Context, r *rig, sid, bid uint64, id string, v map[string]*pb.Quantity) (*pb.SubmitReadingResponse, error) {
	return r.station.SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: sid, BenchId: bid, ReadingId: id, Values: v})
}

type counts struct{ sessions, benches, readings, notes, staff int }

func snapshotCounts(t *testing.T, r *rig, sid uint64) counts {
	t.Helper()
	ss, _ := r.db.Sessions()
	d, err := r.db.ReadSession(sid)
	if err != nil {
		t.Fatal(err)
	}
	all, _ := r.db.StaffAccounts()
	c := counts{sessions: len(ss), benches: len(d.Benches), notes: len(d.Notes), staff: len(all)}
	for _, rs := range d.Readings {
		c.readings += len(rs)
	}
	return c
}

// FuzzSubmitReading feeds arbitrary values, units and ids to the
// submission path (behind the network and the credentials): it must never
// panic, every failure must be a field error or a status, and a failed
// submission must store nothing.
func FuzzSubmitReading(f *testing.F) {
	f.Add(1.0, "A", 0.48, "N", "id-1", "")
	f.Add(math.NaN(), "", math.Inf(-1), "µT", "", "ghost")
	f.Add(-1e308, "mA", 5e-324, "kN", strings.Repeat("z", 70), "id-1")
	f.Fuzz(func(t *testing.T, c float64, cu string, force float64, fu, id, sup string) {
		r := fuzzRig(t)
		ctx := context.Background()
		before := len(r.readings(t))
		_, err := stationService{s: r.srv}.SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: r.sid, BenchId: r.bid, ReadingId: id,
			Supersedes: sup, Values: map[string]*pb.Quantity{"current": {Value: c, Unit: cu}, "force": {Value: force, Unit: fu}}})
		if err == nil {
			return
		}
		var ve *domain.ValidationError
		if _, ok := status.FromError(err); !ok && !errors.As(err, &ve) {
			t.Fatalf("error %v is neither a field error nor a status", err)
		}
		if after := len(r.readings(t)); after != before {
			t.Fatalf("a failed submission stored %d readings", after-before)
		}
	})
}

// FuzzSetBenches: arbitrary labels, positions, experiments and constants
// never panic; a rejected request changes no bench.
func FuzzSetBenches(f *testing.F) {
	f.Add("A1", int32(0), int32(0), "coil_force", "turns", 100.0, "1", "")
	f.Add("", int32(-1), int32(99), "levitation", "gap_field", math.NaN(), "G", "x\ny")
	f.Add("Z9", int32(3), int32(3), "e_over_m", "coil_radius", 1e308, "cm", strings.Repeat("m", 300))
	f.Fuzz(func(t *testing.T, label string, row, col int32, exp, name string, v float64, unit, members string) {
		r := fuzzRig(t)
		ctx := context.Background()
		before, _ := r.db.Benches(r.sid)
		_, err := instructorService{s: r.srv}.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: r.sid, Benches: []*pb.Bench{
			{Label: label, Row: row, Column: col, Experiment: exp, Members: members, Constants: map[string]*pb.Quantity{name: {Value: v, Unit: unit}}}}})
		if err == nil {
			return
		}
		var ve *domain.ValidationError
		if _, ok := status.FromError(err); !ok && !errors.As(err, &ve) {
			t.Fatalf("error %v is neither a field error nor a status", err)
		}
		if after, _ := r.db.Benches(r.sid); len(after) != len(before) {
			t.Fatalf("a rejected SetBenches changed the benches: %d → %d", len(before), len(after))
		}
	})
}

// FuzzJoinAndSession: join requests and session titles and tolerances.
func FuzzJoinAndSession(f *testing.F) {
	f.Add("FUZZED", "F1", "Ada", "PHY 142", 2.0, 3.0)
	f.Add("", "", "\x00", "", math.NaN(), -1.0)
	f.Fuzz(func(t *testing.T, code, label, members, title string, zc, zo float64) {
		r := fuzzRig(t)
		ctx := context.Background()
		_, err := stationService{s: r.srv}.JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: code, BenchLabel: label, GroupMembers: members})
		checkFuzzErr(t, err)
		before, _ := r.db.Sessions()
		_, err = instructorService{s: r.srv}.CreateSession(ctx, &pb.CreateSessionRequest{Title: title, Tolerance: &pb.Tolerance{ZConsistent: zc, ZOff: zo}})
		checkFuzzErr(t, err)
		if after, _ := r.db.Sessions(); err != nil && len(after) != len(before) {
			t.Fatalf("a rejected CreateSession stored a session")
		}
	})
}

func checkFuzzErr(t *testing.T, err error) {
	if err == nil {
		return
	}
	var ve *domain.ValidationError
	if _, ok := status.FromError(err); !ok && !errors.As(err, &ve) {
		t.Fatalf("error %v is neither a field error nor a status", err)
	}
}
