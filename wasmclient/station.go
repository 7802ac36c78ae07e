package wasmclient

import (
	"crypto/rand"
	"encoding/hex"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"time"

	"github.com/maxence-charriere/go-app/v9/pkg/app"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/internal/wire"
	pb "example.com/fluxroom/proto/fluxroompb"
)

// Station is the page a bench's laptop shows: join with the code, then one
// form for the bench's experiment. Readings go into a queue in the browser's
// local storage first and are sent from there, so a reading typed while the
// network or server is down is sent once it is back; its client-made id
// makes a resend of a reading already stored a no-op.
type Station struct {
	app.Compo

	client  *api
	code    string
	label   string
	members string
	joined  *stationJoin
	spec    *pb.ExperimentSpec

	// correcting is the id of the reading the next one corrects.
	correcting string
	inputs     map[string]string
	units      map[string]string
	fieldErrs  map[string]string
	status     string
	queued     int
	state      *pb.BenchState
	readings   []*pb.Reading
	// required is how many readings a complete run needs; plotSVG draws
	// the group's own points (with fit and theory when the session shows
	// them), once per state fetched rather than at every keystroke.
	required int
	plotSVG  string
	wake     chan struct{}
}

// stationJoin is what the station remembers across reloads.
type stationJoin struct {
	SessionID  uint64 `json:"session_id"`
	BenchID    uint64 `json:"bench_id"`
	Label      string `json:"label"`
	Experiment string `json:"experiment"`
	// Token is the station token JoinBench gave this bench.
	Token string `json:"token"`
}

// queuedReading is one reading waiting to be sent.
type queuedReading struct {
	ReadingID string                     `json:"reading_id"`
	SessionID uint64                     `json:"session_id"`
	BenchID   uint64                     `json:"bench_id"`
	Values    map[string]domain.Quantity `json:"values"`
	// Supersedes is the id of the reading this one corrects.
	Supersedes string `json:"supersedes,omitempty"`
}

const (
	storageJoin  = "fluxroom.station.join"
	storageQueue = "fluxroom.station.queue"
)

// OnMount restores a join and starts the sender.
func (s *Station) OnMount(ctx app.Context) {
	s.client = newAPI(baseURL())
	s.inputs, s.units, s.fieldErrs = map[string]string{}, map[string]string{}, map[string]string{}
	s.wake = make(chan struct{}, 1)
	var j stationJoin
	if err := ctx.LocalStorage().Get(storageJoin, &j); err == nil && j.BenchID != 0 {
		s.joined = &j
		s.client = s.client.withToken(j.Token)
		s.loadSpec(ctx)
	}
	if s.joined == nil {
		// The set-up page's QR code opens this page with the code filled in.
		s.code = app.Window().URL().Query().Get("code")
	}
	s.queued = len(loadQueue(ctx))
	ctx.Async(func() { s.sender(ctx) })
}

func loadQueue(ctx app.Context) []queuedReading {
	var q []queuedReading
	ctx.LocalStorage().Get(storageQueue, &q)
	return q
}

func (s *Station) loadSpec(ctx app.Context) {
	c, exp := s.client, s.joined.Experiment
	ctx.Async(func() {
		list, err := unary[pb.ListExperimentsResponse](ctx, c, ProcListExperiments, &pb.ListExperimentsRequest{})
		ctx.Dispatch(func(ctx app.Context) {
			if err != nil {
				s.status = "cannot load the form yet: " + err.Error()
				ctx.After(2*time.Second, func(ctx app.Context) { s.loadSpec(ctx) })
				return
			}
			for _, e := range list.Experiments {
				if e.Id == exp {
					s.spec = e
					for _, v := range e.Values {
						if s.units[v.Name] == "" {
							s.units[v.Name] = v.Unit
						}
					}
				}
			}
		})
	})
	s.refresh(ctx)
}

// sender sends queued readings in order, one at a time, until the page
// closes; it waits after a network failure and tries again.
func (s *Station) sender(ctx app.Context) {
	wait := time.Second
	for ctx.Err() == nil {
		q := loadQueue(ctx)
		if len(q) == 0 {
			select {
			case <-ctx.Done():
				return
			case <-s.wake:
			case <-time.After(5 * time.Second):
				if s.joined != nil {
					s.refreshNow(ctx)
				}
			}
			continue
		}
		item := q[0]
		res, err := unary[pb.SubmitReadingResponse](ctx, s.client, ProcSubmitReading, &pb.SubmitReadingRequest{
			SessionId: item.SessionID, BenchId: item.BenchID, ReadingId: item.ReadingID, Values: wire.QuantitiesToPB(item.Values),
			Supersedes: item.Supersedes})
		switch code := codeOf(err); {
		case err == nil:
			dropQueued(ctx, item.ReadingID)
			wait = time.Second
			ctx.Dispatch(func(app.Context) {
				s.queued = len(loadQueue(ctx))
				s.status = "sent"
				if res.Duplicate {
					s.status = "sent (it was already there)"
				}
			})
			s.refreshNow(ctx)
		case code == codeInvalidArgument || code == codeNotFound || code == codePermission:
			// The server will never take it: show why, keep nothing.
			dropQueued(ctx, item.ReadingID)
			msgs := fieldMessages(err)
			ctx.Dispatch(func(app.Context) {
				s.queued = len(loadQueue(ctx))
				s.fieldErrs = map[string]string{}
				for f, m := range msgs {
					s.fieldErrs[valueName(f)] = m
				}
				s.status = "not stored: " + err.(*rpcError).msg
			})
		default:
			ctx.Dispatch(func(app.Context) {
				s.queued = len(loadQueue(ctx))
				s.status = fmt.Sprintf("offline: %d waiting to send, retrying", s.queued)
			})
			select {
			case <-ctx.Done():
				return
			case <-time.After(wait):
			}
			wait = min(2*wait, 8*time.Second)
		}
	}
}

func dropQueued(ctx app.Context, id string) {
	q := loadQueue(ctx)
	out := q[:0]
	for _, it := range q {
		if it.ReadingID != id {
			out = append(out, it)
		}
	}
	ctx.LocalStorage().Set(storageQueue, out)
}

func (s *Station) refresh(ctx app.Context) {
	ctx.Async(func() { s.refreshNow(ctx) })
}

func (s *Station) refreshNow(ctx app.Context) {
	j := s.joined
	if j == nil {
		return
	}
	res, err := unary[pb.GetBenchStateResponse](ctx, s.client, ProcGetBenchState,
		&pb.GetBenchStateRequest{SessionId: j.SessionID, BenchId: j.BenchID})
	if err != nil {
		return
	}
	ctx.Dispatch(func(app.Context) {
		s.state, s.readings, s.required, s.plotSVG = res.State, res.Readings, int(res.RequiredReadings), ""
		if len(res.Plot.GetPoints()) > 0 {
			s.plotSVG = plotSVG(res.Plot)
		}
	})
}

func (s *Station) join(ctx app.Context, e app.Event) {
	e.PreventDefault()
	code, label, members, c := s.code, s.label, s.members, s.client
	ctx.Async(func() {
		res, err := unary[pb.JoinBenchResponse](ctx, c, ProcJoinBench, &pb.JoinBenchRequest{JoinCode: code, BenchLabel: label, GroupMembers: members})
		ctx.Dispatch(func(ctx app.Context) {
			if err != nil {
				s.fieldErrs = map[string]string{}
				for f, m := range fieldMessages(err) {
					s.fieldErrs[f] = m
				}
				s.status = "could not join: " + err.Error()
				return
			}
			s.joined = &stationJoin{SessionID: res.SessionId, BenchID: res.Bench.BenchId, Label: res.Bench.Label,
				Experiment: res.Bench.Experiment, Token: res.StationToken}
			s.client = s.client.withToken(res.StationToken)
			ctx.LocalStorage().Set(storageJoin, s.joined)
			s.status, s.fieldErrs = "", map[string]string{}
			s.loadSpec(ctx)
		})
	})
}

func (s *Station) leave(ctx app.Context, e app.Event) {
	ctx.LocalStorage().Del(storageJoin)
	s.joined, s.spec, s.state, s.readings = nil, nil, nil, nil
}

// values returns what the form holds, and the fields that are not numbers.
func (s *Station) values() (map[string]domain.Quantity, map[string]string) {
	vals, bad := map[string]domain.Quantity{}, map[string]string{}
	if s.spec == nil {
		return vals, bad
	}
	for _, v := range s.spec.Values {
		text := strings.TrimSpace(s.inputs[v.Name])
		if text == "" {
			continue
		}
		f, err := strconv.ParseFloat(strings.ReplaceAll(text, ",", "."), 64)
		if err != nil {
			bad[v.Name] = fmt.Sprintf("%q is not a number", text)
			continue
		}
		vals[v.Name] = domain.Quantity{Value: f, Unit: s.units[v.Name]}
	}
	return vals, bad
}

// check validates the form with the same rules the server applies: as the
// user types it marks only the fields typed in; on submit (all) it also
// marks the missing ones.
func (s *Station) check(all bool) bool {
	vals, bad := s.values()
	s.fieldErrs = bad
	if s.joined == nil {
		return false
	}
	if err := domain.ValidateReading("values", domain.Bench{Experiment: s.joined.Experiment}, domain.ValuesOf(vals)); err != nil {
		var ve *domain.ValidationError
		if errors.As(err, &ve) {
			for _, v := range ve.Violations {
				n := valueName(v.Field)
				if s.fieldErrs[n] == "" && (all || strings.TrimSpace(s.inputs[n]) != "") {
					s.fieldErrs[n] = v.Reason
				}
			}
		}
	}
	return len(s.fieldErrs) == 0
}

func (s *Station) submit(ctx app.Context, e app.Event) {
	e.PreventDefault()
	if !s.check(true) {
		s.status = "fix the marked fields first"
		return
	}
	vals, _ := s.values()
	id := make([]byte, 8)
	rand.Read(id)
	item := queuedReading{ReadingID: "st-" + hex.EncodeToString(id), SessionID: s.joined.SessionID, BenchID: s.joined.BenchID,
		Values: vals, Supersedes: s.correcting}
	s.correcting = ""
	q := append(loadQueue(ctx), item)
	ctx.LocalStorage().Set(storageQueue, q)
	s.queued = len(q)
	s.status = "queued"
	s.inputs = map[string]string{}
	select {
	case s.wake <- struct{}{}:
	default:
	}
}

// Render draws the join form, or the reading form with the bench's own
// readings.
func (s *Station) Render() app.UI {
	if s.joined == nil {
		return app.Main().Class("station").Attr("data-ready", app.IsClient).Body(
			app.H1().Text("Join your bench"),
			app.Form().ID("join-form").OnSubmit(s.join).Body(
				field("join_code", "join_code", "Join code (on the instructor's screen)", s.fieldErrs["join_code"],
					app.Input().ID("join_code").Value(s.code).AutoComplete(false).
						OnInput(textInto(&s.code))),
				field("bench_label", "bench_label", "Bench label (on the bench)", s.fieldErrs["bench_label"],
					app.Input().ID("bench_label").Value(s.label).
						OnInput(textInto(&s.label))),
				field("group_members", "group_members", "Your names (optional, for the gradebook)", s.fieldErrs["group_members"],
					app.Input().ID("group_members").Value(s.members).MaxLength(200).
						OnInput(textInto(&s.members))),
				app.Button().Type("submit").ID("join").Text("Join"),
			),
			app.P().Class("status").ID("status").Text(s.status),
		)
	}
	var fields []app.UI
	if s.spec != nil {
		for _, v := range s.spec.Values {
			v := v
			label := v.Label
			if v.Optional {
				label += " (optional)"
			}
			var opts []app.UI
			for _, u := range v.Units {
				opts = append(opts, app.Option().Value(u).Text(u).Selected(u == s.units[v.Name]))
			}
			fields = append(fields, field("v-"+v.Name, v.Name, label, s.fieldErrs[v.Name],
				app.Input().ID("v-"+v.Name).Attr("inputmode", "decimal").Value(s.inputs[v.Name]).
					OnInput(func(ctx app.Context, e app.Event) {
						s.inputs[v.Name] = ctx.JSSrc().Get("value").String()
						s.check(false)
					}),
				app.Select().ID("u-"+v.Name).Aria("label", v.Label+" unit").Body(opts...).
					OnChange(func(ctx app.Context, e app.Event) {
						s.units[v.Name] = ctx.JSSrc().Get("value").String()
						s.check(false)
					}),
			))
		}
	}
	title := s.joined.Experiment
	if s.spec != nil {
		title = s.spec.Title
	}
	return app.Main().Class("station").Attr("data-ready", app.IsClient && s.spec != nil).Body(
		app.Header().Class("room-head").Body(
			app.H1().Text(fmt.Sprintf("Bench %s · %s", s.joined.Label, title)),
			app.Button().ID("leave").Text("Leave bench").OnClick(s.leave),
		),
		app.If(s.state != nil && s.state.GetVerdict() == pb.Verdict_VERDICT_UNSAFE,
			app.Section().Class("unsafe-banner").ID("station-unsafe").Body(app.H2().Text("⚠ Unsafe setting"),
				app.P().Class("breach").Text(s.state.GetBreach()),
				app.P().Text(s.state.GetCaution()))),
		app.If(s.state != nil && s.state.GetVerdict() != pb.Verdict_VERDICT_UNSAFE && s.state.GetCaution() != "",
			app.P().Class("caution").ID("station-caution").Text(s.state.GetCaution())),
		s.retakeOffers(),
		app.Form().ID("reading-form").OnSubmit(s.submit).Body(append(fields,
			s.correctionChoice(),
			app.Button().Type("submit").ID("send").Text("Record reading"))...),
		app.P().Class("status").ID("status").Attr("data-queued", strconv.Itoa(s.queued)).Text(s.statusLine()),
		app.If(s.state != nil && s.state.GetReason() != "", app.P().Class("station-verdict").ID("station-verdict").
			Text(s.state.GetVerdictLabel()+": "+s.state.GetReason())),
		app.P().Class("progress").ID("progress").Attr("data-complete", s.complete()).Text(s.progress()),
		app.If(s.plotSVG != "", app.Div().Class("plot-wrap").ID("station-plot").Body(app.Raw(s.plotSVG))),
		app.H2().Text("Your readings"),
		readingsTable(s.readings, rowMarks{retake: retakeIDs(s.state), unsafe: breachIDs(s.state)}),
	)
}

// retakeOffers offers to re-take each reading a diagnosis is about (a
// slipped decimal, a reading apart from the rest): the next reading is then
// its correction, and the old one stays on record, struck through.
func (s *Station) retakeOffers() app.UI {
	var offers []app.UI
	for _, d := range s.state.GetDiagnoses() {
		for i, r := range s.readings {
			if d.GetReadingId() == "" || r.ReadingId != d.GetReadingId() {
				continue
			}
			id, seq := r.ReadingId, i+1
			offers = append(offers, app.Li().Body(
				app.Span().Text(d.GetEvidence()+" "),
				app.Button().Class("retake").Attr("data-reading", id).Text(fmt.Sprintf("Re-take reading #%d", seq)).
					OnClick(func(ctx app.Context, e app.Event) {
						s.correcting = id
						app.Window().GetElementByID("reading-form").Call("scrollIntoView")
					}),
			))
		}
	}
	return app.If(len(offers) > 0, app.Section().Class("retake-offers").ID("retake-offers").Body(
		app.H2().Text("Re-take this point"),
		app.Ul().Body(offers...),
	))
}

// breachIDs are the readings that broke a safety limit of the bench.
func breachIDs(st *pb.BenchState) map[string]bool {
	out := map[string]bool{}
	for _, id := range st.GetBreachReadingIds() {
		out[id] = true
	}
	return out
}

// retakeIDs are the readings a bench's diagnoses ask to re-take.
func retakeIDs(st *pb.BenchState) map[string]bool {
	out := map[string]bool{}
	for _, d := range st.GetDiagnoses() {
		if d.GetReadingId() != "" {
			out[d.GetReadingId()] = true
		}
	}
	return out
}

// complete reports whether the run has the readings a complete run needs.
func (s *Station) complete() bool {
	return s.required > 0 && int(s.state.GetReadingCount()) >= s.required
}

// progress is the run toward completeness, in words.
func (s *Station) progress() string {
	return runProgress(int(s.state.GetReadingCount()), s.required)
}

// runProgress says how far a run is: "5 of 8 readings", or that it is
// complete (corrections count once, as the judging counts them).
func runProgress(counted, required int) string {
	switch {
	case required <= 0:
		return fmt.Sprintf("%d readings", counted)
	case counted >= required:
		return fmt.Sprintf("complete: %d readings, %d needed", counted, required)
	}
	return fmt.Sprintf("%d of %d readings", counted, required)
}

// correctionChoice lets the group mark the next reading as the correction of
// an earlier one, which then stays on record, struck through.
func (s *Station) correctionChoice() app.UI {
	opts := []app.UI{app.Option().Value("").Text("a new reading").Selected(s.correcting == "")}
	for i, r := range s.readings {
		opts = append(opts, app.Option().Value(r.ReadingId).Selected(s.correcting == r.ReadingId).
			Text(fmt.Sprintf("a correction of reading #%d", i+1)))
	}
	return field("v-supersedes", "supersedes", "This is", s.fieldErrs["supersedes"], app.Select().ID("v-supersedes").Body(opts...).
		OnChange(textInto(&s.correcting)))
}

func (s *Station) statusLine() string {
	if s.queued > 0 && !strings.HasPrefix(s.status, "offline") {
		return fmt.Sprintf("%s · %d waiting to send", s.status, s.queued)
	}
	return s.status
}

// textInto keeps an input's or a select's text in *v as it changes.
func textInto(v *string) app.EventHandler {
	return func(ctx app.Context, e app.Event) { *v = ctx.JSSrc().Get("value").String() }
}

// field is a labelled input with its validation message beside it: name
// is the field the server's violations name, id the labelled input's id.
func field(id, name, label, msg string, inputs ...app.UI) app.UI {
	return app.Div().Class("field").Attr("data-field", name).Body(
		app.Label().For(id).Text(label),
		app.Div().Class("inputs").Body(inputs...),
		app.If(msg != "", app.Span().Class("field-error").Attr("role", "alert").Text(msg)),
	)
}
