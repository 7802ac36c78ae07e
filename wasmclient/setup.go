package wasmclient

import (
	"context"
	"fmt"
	"sort"
	"strconv"
	"strings"

	"github.com/maxence-charriere/go-app/v9/pkg/app"

	pb "example.com/fluxroom/proto/fluxroompb"
)

// Setup is where the instructor prepares a session: its title, the
// tolerance profile, whether stations see their verdicts, and the room as a
// grid of benches with their experiments and equipment constants.
type Setup struct {
	app.Compo

	client   *api
	sessions []*pb.Session
	session  *pb.Session
	specs    map[string]*pb.ExperimentSpec
	specIDs  []string

	// The form: course, title and tolerance as typed.
	course, title, zc, zo, good, acceptable string
	seeVerdicts                             bool

	policy     string
	needKey    bool
	rows, cols int
	cells      map[[2]int]*setupCell
	selected   [2]int
	status     string
	errs       map[string]string
	who        *who
}

// setupCell is one grid position: a bench or nothing.
type setupCell struct {
	benchID    uint64
	label      string
	experiment string
	constants  map[string]string // typed values, in the spec's unit
}

// OnMount loads the experiments, the sessions and, with ?session=N, that
// session's benches.
func (s *Setup) OnMount(ctx app.Context) {
	s.client = newAPI(baseURL()).withToken(storedKey(ctx))
	s.cells, s.errs = map[[2]int]*setupCell{}, map[string]string{}
	s.rows, s.cols = 3, 5
	c := s.client
	var sid uint64
	if v := app.Window().URL().Query().Get("session"); v != "" {
		sid, _ = strconv.ParseUint(v, 10, 64)
	}
	ctx.Async(func() {
		ex, err1 := unary[pb.ListExperimentsResponse](ctx, c, ProcListExperiments, &pb.ListExperimentsRequest{})
		ss, err2 := unary[pb.ListSessionsResponse](ctx, c, ProcListSessions, &pb.ListSessionsRequest{})
		w, _ := fetchWho(ctx, c)
		var snap *pb.RoomSnapshot
		if sid != 0 {
			snap = firstSnapshot(ctx, c, sid)
		}
		ctx.Dispatch(func(app.Context) {
			if codeOf(err2) == codeUnauthenticated {
				s.needKey = true
				return
			}
			if err1 != nil || err2 != nil {
				s.status = fmt.Sprint("cannot reach the server: ", err1, err2)
				return
			}
			s.specs = map[string]*pb.ExperimentSpec{}
			for _, e := range ex.Experiments {
				s.specs[e.Id] = e
				s.specIDs = append(s.specIDs, e.Id)
			}
			s.sessions, s.who = ss.Sessions, w
			if mine := w.instructedCourses(); len(mine) > 0 {
				s.course = mine[0]
			}
			if snap != nil {
				s.load(snap)
			}
		})
	})
}

// firstSnapshot reads one room snapshot and closes the stream.
func firstSnapshot(ctx app.Context, c *api, sid uint64) *pb.RoomSnapshot {
	var snap *pb.RoomSnapshot
	sctx, cancel := context.WithCancel(ctx)
	defer cancel()
	c.watchRoom(sctx, sid, func(ev *pb.WatchRoomResponse) error {
		snap = ev.GetSnapshot()
		cancel()
		return nil
	})
	return snap
}

func (s *Setup) load(snap *pb.RoomSnapshot) {
	s.session = snap.Session
	s.title, s.course = snap.Session.Title, snap.Session.Course
	t := snap.Session.GetTolerance()
	s.zc, s.zo = fmt.Sprint(t.GetZConsistent()), fmt.Sprint(t.GetZOff())
	s.good, s.acceptable = fmt.Sprint(t.GetGoodPercent()), fmt.Sprint(t.GetAcceptablePercent())
	s.seeVerdicts = snap.Session.StationsSeeVerdicts
	s.policy = snap.Session.GradingPolicyJson
	for _, st := range snap.Benches {
		b := st.Bench
		cell := &setupCell{benchID: b.BenchId, label: b.Label, experiment: b.Experiment, constants: map[string]string{}}
		for k, q := range b.Constants {
			cell.constants[k] = strconv.FormatFloat(q.Value, 'g', -1, 64) + " " + q.Unit
		}
		pos := [2]int{int(b.Row), int(b.Column)}
		s.cells[pos] = cell
		s.rows, s.cols = max(s.rows, pos[0]+1), max(s.cols, pos[1]+1)
	}
}

func num(text string) float64 {
	v, _ := strconv.ParseFloat(strings.TrimSpace(text), 64)
	return v
}

func (s *Setup) tolerance() *pb.Tolerance {
	return &pb.Tolerance{ZConsistent: num(s.zc), ZOff: num(s.zo), GoodPercent: num(s.good), AcceptablePercent: num(s.acceptable)}
}

// saveSession creates the session, or updates its title and rules.
func (s *Setup) saveSession(ctx app.Context, e app.Event) {
	e.PreventDefault()
	c, course, title, tol, see := s.client, strings.TrimSpace(s.course), s.title, s.tolerance(), s.seeVerdicts
	existing := s.session
	ctx.Async(func() {
		var sess *pb.Session
		var err error
		if existing == nil {
			var res *pb.CreateSessionResponse
			res, err = unary[pb.CreateSessionResponse](ctx, c, ProcCreateSession, &pb.CreateSessionRequest{Title: title, Course: course, Tolerance: tol, StationsSeeVerdicts: see})
			if err == nil {
				sess = res.Session
			}
		} else {
			var res *pb.UpdateSessionResponse
			res, err = unary[pb.UpdateSessionResponse](ctx, c, ProcUpdateSession,
				&pb.UpdateSessionRequest{SessionId: existing.SessionId, Title: title, Tolerance: tol, StationsSeeVerdicts: see})
			if err == nil {
				sess = res.Session
			}
		}
		ctx.Dispatch(func(app.Context) {
			s.errs = fieldMessages(err)
			if err != nil {
				s.status = "not saved: " + err.Error()
				return
			}
			s.session, s.status = sess, "session saved"
		})
	})
}

// saveBenches sends every bench of the grid in one SetBenches call.
func (s *Setup) saveBenches(ctx app.Context, e app.Event) {
	if s.session == nil {
		s.status = "save the session first"
		return
	}
	var benches []*pb.Bench
	var where []string
	for _, pos := range s.positions() {
		cell := s.cells[pos]
		if cell == nil || cell.experiment == "" {
			continue
		}
		b := &pb.Bench{BenchId: cell.benchID, Label: cell.label, Row: int32(pos[0]), Column: int32(pos[1]),
			Experiment: cell.experiment, Constants: map[string]*pb.Quantity{}}
		for k, text := range cell.constants {
			if strings.TrimSpace(text) == "" {
				continue
			}
			v, unit, _ := strings.Cut(strings.TrimSpace(text), " ")
			f, err := strconv.ParseFloat(v, 64)
			if err != nil {
				s.status = fmt.Sprintf("bench %s, %s: %q is not a number", cell.label, k, v)
				return
			}
			b.Constants[k] = &pb.Quantity{Value: f, Unit: strings.TrimSpace(unit)}
		}
		benches = append(benches, b)
		where = append(where, cell.label)
	}
	c, sid := s.client, s.session.SessionId
	ctx.Async(func() {
		res, err := unary[pb.SetBenchesResponse](ctx, c, ProcSetBenches, &pb.SetBenchesRequest{SessionId: sid, Benches: benches})
		ctx.Dispatch(func(app.Context) {
			s.errs = fieldMessages(err)
			if err != nil {
				s.status = "benches not saved: " + err.Error()
				return
			}
			for _, b := range res.Benches {
				if cell := s.cells[[2]int{int(b.Row), int(b.Column)}]; cell != nil {
					cell.benchID = b.BenchId
				}
			}
			s.status = fmt.Sprintf("%d benches saved: %s", len(res.Benches), strings.Join(where, ", "))
		})
	})
}

func (s *Setup) positions() [][2]int {
	var out [][2]int
	for r := 0; r < s.rows; r++ {
		for c := 0; c < s.cols; c++ {
			out = append(out, [2]int{r, c})
		}
	}
	return out
}

func (s *Setup) cell(pos [2]int) *setupCell {
	c := s.cells[pos]
	if c == nil {
		c = &setupCell{label: fmt.Sprintf("%c%d", 'A'+pos[0], pos[1]+1), constants: map[string]string{}}
		s.cells[pos] = c
	}
	return c
}

// copyConstants copies the selected bench's constants to every bench of
// the same experiment.
func (s *Setup) copyConstants(ctx app.Context, e app.Event) {
	src := s.cell(s.selected)
	n := 0
	for pos, c := range s.cells {
		if pos != s.selected && c.experiment == src.experiment {
			c.constants = map[string]string{}
			for k, v := range src.constants {
				c.constants[k] = v
			}
			n++
		}
	}
	s.status = fmt.Sprintf("constants copied to %d benches; save the benches to keep them", n)
}

// Render draws the page.
func (s *Setup) Render() app.UI {
	code := ""
	if s.session != nil {
		code = s.session.JoinCode
	}
	return app.Main().Class("setup").Body(
		app.Header().Class("room-head").Body(
			app.H1().Text("Set up a session"),
			app.If(code != "", app.Div().Class("join").Body(
				app.Span().Class("join-label").Text("join code"),
				app.Span().Class("join-code").ID("join-code").Text(code))),
			app.If(code != "", app.Figure().Class("join-qr").Body(
				app.Img().ID("join-qr").Src("/join.png?code="+code).Alt("QR code of the station page with join code "+code),
				app.FigCaption().Text(baseURL()+"/station?code="+code),
			)),
			app.If(s.session != nil, app.A().ID("to-room").Href(fmt.Sprintf("/?session=%d", s.sessionID())).Text("Open the room")),
		),
		app.If(s.needKey, &KeyPrompt{}),
		app.Form().ID("session-form").OnSubmit(s.saveSession).Body(
			s.renderCourse(),
			field("title", "title", "Section", s.errs["title"], app.Input().ID("title").Value(s.title).
				OnInput(textInto(&s.title))),
			app.FieldSet().Body(
				app.Legend().Text("Tolerance profile (empty or 0: the defaults 2, 3, 5 %, 10 %)"),
				s.numField("tolerance.z_consistent", "consistent when |z| ≤", &s.zc),
				s.numField("tolerance.z_off", "off when |z| >", &s.zo),
				s.numField("tolerance.good_percent", "or within (%)", &s.good),
				s.numField("tolerance.acceptable_percent", "and beyond (%)", &s.acceptable),
			),
			app.Label().Body(app.Input().Type("checkbox").ID("see-verdicts").Checked(s.seeVerdicts).
				OnChange(func(ctx app.Context, e app.Event) { s.seeVerdicts = ctx.JSSrc().Get("checked").Bool() }),
				app.Text(" stations see their own verdict and hint")),
			app.Button().Type("submit").ID("save-session").Text("Save session"),
		),
		app.If(s.session != nil, s.renderGrid()),
		app.If(s.session != nil, app.Form().ID("policy-form").OnSubmit(s.savePolicy).Body(
			app.H2().Text("Grading policy"),
			app.P().Class("hint").Text("JSON, as documented in the README (Grading policy). Empty uses the default: 10 points per experiment."),
			app.Textarea().ID("policy").Rows(8).Cols(70).Text(s.policy).
				OnInput(textInto(&s.policy)),
			app.Range(policyErrors(s.errs)).Slice(func(i int) app.UI {
				return app.P().Class("field-error").Text(policyErrors(s.errs)[i])
			}),
			app.Button().Type("submit").ID("save-policy").Text("Save policy"),
		)),
		app.P().Class("status").ID("setup-status").Text(s.status),
		app.If(s.who.instructsAny(), &StaffPanel{Who: s.who}),
		app.H2().Text("Sessions"),
		app.Ul().Body(app.Range(s.sessions).Slice(func(i int) app.UI {
			ss := s.sessions[i]
			return app.Li().Body(app.A().Href(fmt.Sprintf("/setup?session=%d", ss.SessionId)).Text(ss.Title + " (" + ss.JoinCode + ")"))
		})),
	)
}

// renderCourse is the session's course: fixed once the session exists;
// for a new one, typed (the administrator's key: empty uses the title) or
// picked from the courses the person instructs.
func (s *Setup) renderCourse() app.UI {
	if s.session != nil {
		return app.P().Class("course").ID("course").Text("Course: " + s.session.Course)
	}
	input, typed := s.who.courseInput("course", &s.course)
	label := "Course"
	if typed {
		label = "Course (empty: the same as the section)"
	}
	return field("course", "course", label, s.errs["course"], input)
}

func (s *Setup) savePolicy(ctx app.Context, e app.Event) {
	e.PreventDefault()
	c, sid, text := s.client, s.session.SessionId, s.policy
	ctx.Async(func() {
		_, err := unary[pb.SetGradingPolicyResponse](ctx, c, ProcSetGradingPolicy, &pb.SetGradingPolicyRequest{SessionId: sid, PolicyJson: text})
		ctx.Dispatch(func(app.Context) {
			s.errs = fieldMessages(err)
			if err != nil {
				s.status = "policy not saved"
				return
			}
			s.status = "policy saved"
		})
	})
}

// policyErrors lists the policy's field errors.
func policyErrors(errs map[string]string) []string {
	var out []string
	for f, m := range errs {
		if strings.HasPrefix(f, "policy_json.") {
			out = append(out, strings.TrimPrefix(f, "policy_json.")+": "+m)
		}
	}
	sort.Strings(out)
	return out
}

func (s *Setup) sessionID() uint64 {
	if s.session == nil {
		return 0
	}
	return s.session.SessionId
}

func (s *Setup) numField(name, label string, v *string) app.UI {
	return field(name, name, label, s.errs[name], app.Input().ID(name).Attr("inputmode", "decimal").Size(5).Value(*v).
		OnInput(textInto(v)))
}

func (s *Setup) renderGrid() app.UI {
	var cells []app.UI
	for _, pos := range s.positions() {
		pos := pos
		c := s.cells[pos]
		exp, label := "", fmt.Sprintf("%c%d", 'A'+pos[0], pos[1]+1)
		if c != nil {
			exp, label = c.experiment, c.label
		}
		opts := []app.UI{app.Option().Value("").Text("— no bench —").Selected(exp == "")}
		for _, id := range s.specIDs {
			opts = append(opts, app.Option().Value(id).Text(s.specs[id].Title).Selected(id == exp))
		}
		cls := "setup-cell"
		if pos == s.selected {
			cls += " selected"
		}
		cells = append(cells, app.Div().Class(cls).Attr("data-pos", fmt.Sprintf("%d,%d", pos[0], pos[1])).Body(
			app.Input().Class("cell-label").Aria("label", "bench label").Value(label).Size(4).
				OnInput(func(ctx app.Context, e app.Event) { s.cell(pos).label = ctx.JSSrc().Get("value").String() }),
			app.Select().Class("cell-exp").Aria("label", "experiment at "+label).Body(opts...).
				OnChange(func(ctx app.Context, e app.Event) {
					s.cell(pos).experiment = ctx.JSSrc().Get("value").String()
					s.selected = pos
				}),
			app.Button().Type("button").Class("cell-edit").Text("constants").
				OnClick(func(ctx app.Context, e app.Event) { s.selected = pos }),
		))
	}
	return app.Section().Class("setup-grid-wrap").Body(
		app.H2().Text("The room"),
		app.Div().Class("grid-size").Body(
			app.Label().Text("rows "), app.Input().ID("rows").Type("number").Min(1).Max(20).Value(s.rows).
				OnChange(func(ctx app.Context, e app.Event) {
					s.rows = max(1, min(20, int(num(ctx.JSSrc().Get("value").String()))))
				}),
			app.Label().Text(" columns "), app.Input().ID("cols").Type("number").Min(1).Max(20).Value(s.cols).
				OnChange(func(ctx app.Context, e app.Event) {
					s.cols = max(1, min(20, int(num(ctx.JSSrc().Get("value").String()))))
				}),
		),
		app.Div().Class("setup-grid").Style("grid-template-columns", fmt.Sprintf("repeat(%d, minmax(9rem, 1fr))", s.cols)).Body(cells...),
		s.renderConstants(),
		app.Button().ID("save-benches").Text("Save benches").OnClick(s.saveBenches),
	)
}

// renderConstants edits the selected bench's constants; empty fields take
// the experiment's default, shown as the placeholder.
func (s *Setup) renderConstants() app.UI {
	c := s.cells[s.selected]
	if c == nil || c.experiment == "" || s.specs[c.experiment] == nil {
		return app.P().Class("hint").Text("Choose an experiment for a bench, then edit its constants here.")
	}
	spec := s.specs[c.experiment]
	var fields []app.UI
	for _, q := range spec.Constants {
		q := q
		errKey := ""
		for k, m := range s.errs {
			if strings.Contains(k, `"`+q.Name+`"`) {
				errKey = m
			}
		}
		fields = append(fields, field("c-"+q.Name, "c-"+q.Name, q.Label+" ("+strings.Join(q.Units, ", ")+")", errKey,
			app.Input().ID("c-"+q.Name).Value(c.constants[q.Name]).
				Placeholder(fmt.Sprintf("%g %s", q.DefaultValue, q.Unit)).
				OnInput(func(ctx app.Context, e app.Event) {
					s.cell(s.selected).constants[q.Name] = ctx.JSSrc().Get("value").String()
				})))
	}
	return app.FieldSet().Class("constants").ID("constants").Body(
		append([]app.UI{app.Legend().Text(fmt.Sprintf("Bench %s · %s (value and unit, e.g. \"4.0 cm\")", c.label, spec.Title))}, append(fields,
			app.Button().Type("button").ID("copy-constants").Text("Copy to every bench of this experiment").OnClick(s.copyConstants))...)...)
}
