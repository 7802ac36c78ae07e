package wasmclient

import (
	"fmt"
	"sort"
	"strconv"
	"time"

	"github.com/maxence-charriere/go-app/v9/pkg/app"

	"example.com/fluxroom/internal/svgplot"
	pb "example.com/fluxroom/proto/fluxroompb"
)

// Reconnect backoff after the stream ends: doubles from the first value up
// to the cap, and resets once an event arrives.
const (
	backoffFirst = 250 * time.Millisecond
	backoffMax   = 5 * time.Second
)

// Actions the room's children post to it.
const (
	actionOpenBench  = "fluxroom.open-bench"
	actionCloseBench = "fluxroom.close-bench"
)

// Room is the instructor's view of the whole room: one tile per bench in its
// room position, fed live by the one room stream of this tab.
type Room struct {
	app.Compo

	client   *api
	session  *pb.Session
	benches  map[uint64]*pb.BenchState
	findings []*pb.RoomFinding
	lastSeq  uint64
	// link is the state of the stream in words: "connecting", "live", or why
	// it is reconnecting.
	link string
	now  time.Time

	needKey        bool
	attentionFirst bool
	largeType      bool
	// open is the bench whose detail is shown, 0 for none.
	open   uint64
	detail *pb.BenchDetail
	// detailPlot is the detail's plot as SVG, drawn once per fetch rather
	// than at every update of the room.
	detailPlot string
	// detailErr says why the detail could not be loaded.
	detailErr string

	// who holds this browser's key; sessions are the ones it may watch,
	// for the picker.
	who      *who
	sessions []*pb.Session
}

// OnMount starts the room stream and the clock that ages the tiles. Both
// stop when the component's context ends.
func (r *Room) OnMount(ctx app.Context) {
	r.benches = map[uint64]*pb.BenchState{}
	r.link = "connecting"
	r.now = time.Now()
	u := app.Window().URL()
	var sessionID uint64
	if s := u.Query().Get("session"); s != "" {
		sessionID, _ = strconv.ParseUint(s, 10, 64)
	}
	r.largeType = u.Query().Get("large") == "1"
	ctx.LocalStorage().Get("fluxroom.largeType", &r.largeType)
	setRootFontSize(r.largeType)
	base := *u
	base.Path, base.RawQuery, base.Fragment = "", "", ""
	r.client = newAPI(base.String()).withToken(storedKey(ctx))
	ctx.Handle(actionOpenBench, func(ctx app.Context, a app.Action) {
		if id, ok := a.Value.(uint64); ok {
			r.openBench(ctx, id)
		}
	})
	ctx.Handle(actionCloseBench, func(ctx app.Context, a app.Action) {
		label := r.benches[r.open].GetBench().GetLabel()
		r.open, r.detail, r.detailPlot = 0, nil, ""
		// Back to the tile the detail was opened from, for the keyboard.
		ctx.Defer(func(app.Context) { focusTile(label) })
	})
	client := r.client
	ctx.Async(func() { r.watch(ctx, client, sessionID) })
	ctx.Async(func() {
		w, err1 := fetchWho(ctx, client)
		list, err2 := unary[pb.ListSessionsResponse](ctx, client, ProcListSessions, &pb.ListSessionsRequest{})
		ctx.Dispatch(func(app.Context) {
			if err1 == nil {
				r.who = w
			}
			if err2 == nil {
				r.sessions = list.Sessions
			}
		})
	})
	ctx.Async(func() {
		t := time.NewTicker(time.Second)
		defer t.Stop()
		for {
			select {
			case <-ctx.Done():
				return
			case now := <-t.C:
				ctx.Dispatch(func(app.Context) { r.now = now })
			}
		}
	})
}

// watch keeps one room stream open, reconnecting with backoff. Every
// (re)connection starts with a snapshot, so nothing is missed while away.
func (r *Room) watch(ctx app.Context, c *api, sessionID uint64) {
	backoff := backoffFirst
	for ctx.Err() == nil {
		err := r.streamOnce(ctx, c, sessionID, func() { backoff = backoffFirst })
		if ctx.Err() != nil {
			return
		}
		if codeOf(err) == codeUnauthenticated {
			ctx.Dispatch(func(app.Context) { r.needKey = true; r.link = "needs a staff key" })
			return
		}
		wait := backoff
		ctx.Dispatch(func(app.Context) {
			r.link = fmt.Sprintf("reconnecting in %.1f s (%s)", wait.Seconds(), codeName(codeOf(err)))
		})
		select {
		case <-ctx.Done():
			return
		case <-time.After(wait):
		}
		backoff = min(2*backoff, backoffMax)
	}
}

func (r *Room) streamOnce(ctx app.Context, c *api, sessionID uint64, gotEvent func()) error {
	if sessionID == 0 {
		list, err := unary[pb.ListSessionsResponse](ctx, c, ProcListSessions, &pb.ListSessionsRequest{})
		if err != nil {
			return err
		}
		if len(list.Sessions) == 0 {
			return &rpcError{code: codeNotFound, msg: "no session yet"}
		}
		sessionID = list.Sessions[0].SessionId
	}
	var want uint64 = 1
	return c.watchRoom(ctx, sessionID, func(ev *pb.WatchRoomResponse) error {
		if ev.Sequence != want {
			return &rpcError{code: codeDataLoss, msg: fmt.Sprintf("event %d after %d", ev.Sequence, want-1)}
		}
		want++
		gotEvent()
		// Component state changes only on the UI goroutine.
		ctx.Dispatch(func(ctx app.Context) {
			start := time.Now()
			r.apply(ctx, ev)
			ctx.Defer(func(app.Context) { recordRender(time.Since(start)) })
		})
		return nil
	})
}

// setRootFontSize scales the whole page for a projector: 22 px instead of
// 16 px at the root, which every rem-based size follows.
func setRootFontSize(large bool) {
	size := "16px"
	if large {
		size = "22px"
	}
	app.Window().Get("document").Get("documentElement").Get("style").Set("fontSize", size)
}

// recordRender keeps how long applying and rendering an event took, for the
// in-browser render benchmark (window.fluxroomRenderMs).
func recordRender(d time.Duration) {
	w := app.Window()
	arr := w.Get("fluxroomRenderMs")
	if !arr.Truthy() {
		arr = app.Window().Get("Array").New()
		w.Set("fluxroomRenderMs", arr)
	}
	arr.Call("push", float64(d.Microseconds())/1000)
}

// apply folds one stream event into the room.
func (r *Room) apply(ctx app.Context, ev *pb.WatchRoomResponse) {
	r.lastSeq = ev.Sequence
	r.link = "live"
	switch e := ev.Event.(type) {
	case *pb.WatchRoomResponse_Snapshot:
		r.session = e.Snapshot.Session
		r.findings = e.Snapshot.Findings
		r.benches = make(map[uint64]*pb.BenchState, len(e.Snapshot.Benches))
		for _, b := range e.Snapshot.Benches {
			r.benches[b.Bench.BenchId] = b
		}
	case *pb.WatchRoomResponse_Changes:
		for _, b := range e.Changes.Benches {
			r.benches[b.Bench.BenchId] = b
			if b.Bench.BenchId == r.open {
				r.openBench(ctx, r.open) // refresh the open detail
			}
		}
		if f := e.Changes.Findings; f != nil {
			r.findings = f.Findings
		}
	}
}

// openBench shows a bench's detail, fetched off the UI goroutine.
func (r *Room) openBench(ctx app.Context, id uint64) {
	r.open = id
	if r.session == nil {
		return
	}
	sid, c := r.session.SessionId, r.client
	ctx.Async(func() {
		d, err := unary[pb.GetBenchDetailResponse](ctx, c, ProcGetBenchDetail,
			&pb.GetBenchDetailRequest{SessionId: sid, BenchId: id})
		ctx.Dispatch(func(app.Context) {
			if r.open != id {
				return
			}
			if err != nil {
				r.detailErr = err.Error()
				return
			}
			r.detail, r.detailPlot, r.detailErr = d.Detail, plotSVG(d.Detail.GetPlot()), ""
		})
	})
}

func (r *Room) acknowledge(ctx app.Context, id uint64) {
	if r.session == nil {
		return
	}
	sid, c := r.session.SessionId, r.client
	ctx.Async(func() {
		unary[pb.AcknowledgeAlertResponse](ctx, c, ProcAcknowledgeAlert,
			&pb.AcknowledgeAlertRequest{SessionId: sid, BenchId: id})
	})
}

// renderPicker lists the sessions this key may watch, newest first, to
// switch rooms; with one session there is nothing to pick.
func (r *Room) renderPicker() app.UI {
	if len(r.sessions) < 2 {
		return app.Span()
	}
	return app.Label().Class("picker").Body(
		app.Span().Text("Room: "),
		app.Select().ID("session-pick").OnChange(func(ctx app.Context, e app.Event) {
			// A full load: the room's stream and state start afresh.
			app.Window().Get("location").Set("href", "/?session="+ctx.JSSrc().Get("value").String())
		}).Body(app.Range(r.sessions).Slice(func(i int) app.UI {
			s := r.sessions[i]
			label := s.Title
			if s.Course != "" && s.Course != s.Title {
				label = s.Course + " · " + s.Title
			}
			return app.Option().Value(strconv.FormatUint(s.SessionId, 10)).Selected(s.SessionId == r.sessionID()).Text(label)
		})),
	)
}

// Render draws the header, the unsafe banner, the room grid, the findings
// and, when a bench is open, its detail.
func (r *Room) Render() app.UI {
	title, code := "fluxroom", ""
	if r.session != nil {
		title, code = r.session.Title, r.session.JoinCode
	}
	tiles, rows, cols := r.tiles()
	mainClass := "room"
	if r.largeType {
		mainClass += " large"
	}
	order := "room order"
	if r.attentionFirst {
		order = "needs attention first"
	}
	grid := app.Div().Class("grid").ID("room-grid").Attr("data-order", order)
	if r.attentionFirst {
		grid = grid.Class("by-attention")
	} else {
		grid = grid.Style("grid-template-columns", fmt.Sprintf("repeat(%d, minmax(11rem, 1fr))", cols)).
			Style("grid-template-rows", fmt.Sprintf("repeat(%d, auto)", rows))
	}
	return app.Main().Class(mainClass).OnKeyDown(func(ctx app.Context, e app.Event) {
		// Esc closes the open detail wherever the focus is in the room.
		if e.Get("key").String() == "Escape" && r.open != 0 {
			ctx.NewAction(actionCloseBench)
		}
	}).Body(
		app.Header().Class("room-head").Body(
			app.H1().Text(title),
			app.If(code != "", app.Div().Class("join").Body(
				app.Span().Class("join-label").Text("join code"),
				app.Span().Class("join-code").ID("join-code").Text(code),
			)),
			app.Nav().Class("controls").Body(
				app.Button().ID("toggle-order").Aria("pressed", strconv.FormatBool(r.attentionFirst)).
					Text("Order: "+order).OnClick(func(ctx app.Context, e app.Event) { r.attentionFirst = !r.attentionFirst }),
				app.Button().ID("toggle-large").Aria("pressed", strconv.FormatBool(r.largeType)).
					Text("Large type").OnClick(func(ctx app.Context, e app.Event) {
					r.largeType = !r.largeType
					ctx.LocalStorage().Set("fluxroom.largeType", r.largeType)
					setRootFontSize(r.largeType)
				}),
				app.If(r.who.instructsAny(), app.A().ID("to-setup").Href(fmt.Sprintf("/setup?session=%d", r.sessionID())).Text("Set up")),
				r.renderPicker(),
				app.Span().Class("exports").Body(
					app.Span().Text("Export:"),
					exportButton(r, "gradebook", pb.ExportFormat_EXPORT_FORMAT_GRADEBOOK_CSV),
					exportButton(r, "readings", pb.ExportFormat_EXPORT_FORMAT_READINGS_CSV),
					exportButton(r, "JSON", pb.ExportFormat_EXPORT_FORMAT_JSON),
					exportButton(r, "report", pb.ExportFormat_EXPORT_FORMAT_HTML),
				),
				app.A().Href("/station").Text("Station page"),
			),
			app.Div().Class("link").ID("link").Attr("data-link", r.link).Text(r.link),
			whoBar(r.who),
		),
		app.If(r.needKey, &KeyPrompt{}),
		r.renderUnsafe(),
		grid.Body(app.Range(tiles).Slice(func(i int) app.UI { return tiles[i] })),
		r.renderFindings(),
		app.If(r.open != 0, r.renderDetail()),
		app.Footer().Class("room-foot").Text("Cautions: beam tubes run at hundreds of volts; coils and straight-wire set-ups get hot at high current; strong magnets pinch and affect pacemakers. Follow local codes, your institution's safety rules and the equipment maker's limits."),
	)
}

// exportButton downloads one export of the session.
func exportButton(r *Room, label string, f pb.ExportFormat) app.UI {
	return app.Button().Class("export").Attr("data-format", f.String()).Text(label).
		OnClick(func(ctx app.Context, e app.Event) {
			sid, c := r.sessionID(), r.client
			ctx.Async(func() {
				res, err := unary[pb.ExportResponse](ctx, c, ProcExport, &pb.ExportRequest{SessionId: sid, Format: f})
				if err != nil {
					ctx.Dispatch(func(app.Context) { r.link = "export failed: " + err.Error() })
					return
				}
				download(res.Filename, res.ContentType, res.Content)
			})
		})
}

// attentionRank orders tiles for the "needs attention first" view:
// unsafe, off, check, then a group that stalled (whatever its verdict
// below check), need data, consistent.
var attentionRank = map[string]int{"unsafe": 0, "off": 1, "check": 2, "stalled": 3, "need-data": 4, "consistent": 5}

// attention is a tile's place in that order: its verdict's, or stalled's
// when the group stopped before a complete run and its verdict asks less.
func attention(t *Tile) int {
	r := attentionRank[t.Verdict]
	if t.Activity == "stalled" {
		r = min(r, attentionRank["stalled"])
	}
	return r
}

// tiles builds one Tile value per bench, in room order or by attention.
func (r *Room) tiles() (out []*Tile, rows, cols int) {
	rows, cols = 1, 1
	for _, st := range r.benches {
		b := st.GetBench()
		t := &Tile{
			BenchID:      b.GetBenchId(),
			Label:        b.GetLabel(),
			Row:          int(b.GetRow()),
			Column:       int(b.GetColumn()),
			Verdict:      verdictClass(st.GetVerdict()),
			Words:        st.GetVerdictLabel(),
			Reason:       st.GetReason(),
			Headline:     headlineOf(st),
			Experiment:   st.GetExperimentTitle(),
			Readings:     int(st.GetReadingCount()),
			Age:          age(r.now, st),
			Acknowledged: st.GetAlertAcknowledged(),
			Activity:     st.GetActivity(),
			Free:         r.attentionFirst,
		}
		rows, cols = max(rows, t.Row+1), max(cols, t.Column+1)
		out = append(out, t)
	}
	sort.Slice(out, func(i, j int) bool {
		if r.attentionFirst {
			if a, b := attention(out[i]), attention(out[j]); a != b {
				return a < b
			}
		}
		if out[i].Row != out[j].Row {
			return out[i].Row < out[j].Row
		}
		return out[i].Column < out[j].Column
	})
	return out, rows, cols
}

// renderUnsafe is the banner that names every unsafe bench with its
// caution, above the grid where it cannot be missed. It stays until the
// instructor acknowledges each alert.
func (r *Room) renderUnsafe() app.UI {
	var items []app.UI
	for _, t := range r.sortedStates() {
		if t.GetVerdict() != pb.Verdict_VERDICT_UNSAFE || t.GetAlertAcknowledged() {
			continue
		}
		id := t.GetBench().GetBenchId()
		items = append(items, app.Li().Attr("data-bench", t.GetBench().GetLabel()).Body(
			app.P().Class("breach").Body(app.Strong().Text("Bench "+t.GetBench().GetLabel()+": "), app.Text(t.GetBreach())),
			app.P().Class("caution-text").Text(t.GetCaution()),
			app.Button().Class("ack").Text("Acknowledge").OnClick(func(ctx app.Context, e app.Event) { r.acknowledge(ctx, id) }),
		))
	}
	if len(items) == 0 {
		return app.Div().ID("unsafe-none").Hidden(true)
	}
	return app.Section().Class("unsafe-banner").ID("unsafe-banner").Aria("live", "assertive").Body(
		app.H2().Text("⚠ Unsafe setting"),
		app.Ul().Body(items...),
	)
}

// renderFindings shows, per experiment, the groups' results as dots against
// the theory value, and the room-level findings.
func (r *Room) renderFindings() app.UI {
	byExp := map[string][]svgplot.Dot{}
	titles := map[string]string{}
	for _, st := range r.benches {
		if st.GetPredicted() == nil || st.GetPredicted().GetValue() == 0 {
			continue
		}
		exp := st.GetBench().GetExperiment()
		titles[exp] = st.GetExperimentTitle()
		byExp[exp] = append(byExp[exp], svgplot.Dot{Label: st.GetBench().GetLabel(),
			Ratio: st.GetMeasured().GetValue() / st.GetPredicted().GetValue(), Verdict: verdictClass(st.GetVerdict())})
	}
	exps := make([]string, 0, len(byExp))
	for e := range byExp {
		exps = append(exps, e)
	}
	sort.Strings(exps)
	if len(exps) == 0 && len(r.findings) == 0 {
		return app.Div().Hidden(true)
	}
	return app.Section().Class("findings").ID("findings").Body(
		app.H2().Text("Across the room"),
		app.If(len(exps) > 0, app.P().Class("dotplot-legend").Body(
			app.Text("Each group's result ÷ theory: "),
			app.Span().Class("dot-key k-consistent").Text("● consistent"),
			app.Span().Class("dot-key k-check").Text("● check"),
			app.Span().Class("dot-key k-off").Text("● off"),
			app.Span().Class("dot-key k-unsafe").Text("● unsafe"),
		)),
		app.Range(exps).Slice(func(i int) app.UI {
			return app.Div().Class("dotplot").Attr("data-experiment", exps[i]).Body(
				app.Span().Class("dotplot-label").Text(titles[exps[i]]),
				app.Raw(svgplot.Dots(byExp[exps[i]])),
			)
		}),
		app.Ul().Body(app.Range(r.findings).Slice(func(i int) app.UI {
			f := r.findings[i]
			return app.Li().Attr("data-code", f.Code).Text(f.Message)
		})),
	)
}

func (r *Room) sortedStates() []*pb.BenchState {
	out := make([]*pb.BenchState, 0, len(r.benches))
	for _, st := range r.benches {
		out = append(out, st)
	}
	sort.Slice(out, func(i, j int) bool {
		a, b := out[i].GetBench(), out[j].GetBench()
		if a.GetRow() != b.GetRow() {
			return a.GetRow() < b.GetRow()
		}
		return a.GetColumn() < b.GetColumn()
	})
	return out
}

func verdictClass(v pb.Verdict) string {
	switch v {
	case pb.Verdict_VERDICT_UNSAFE:
		return "unsafe"
	case pb.Verdict_VERDICT_STALLED:
		return "stalled"
	case pb.Verdict_VERDICT_CONSISTENT:
		return "consistent"
	case pb.Verdict_VERDICT_CHECK:
		return "check"
	case pb.Verdict_VERDICT_OFF:
		return "off"
	}
	return "need-data"
}

func age(now time.Time, st *pb.BenchState) string {
	if st.GetLastReadingAt() == nil {
		return "no reading yet"
	}
	d := now.Sub(st.GetLastReadingAt().AsTime())
	switch {
	case d < 5*time.Second:
		return "just now"
	case d < time.Minute:
		return fmt.Sprintf("%d s ago", int(d.Seconds()))
	case d < time.Hour:
		return fmt.Sprintf("%d min ago", int(d.Minutes()))
	}
	return fmt.Sprintf("%d h ago", int(d.Hours()))
}

// focusTile gives the keyboard focus to a bench's tile.
func focusTile(label string) {
	if label == "" {
		return
	}
	if el := app.Window().Get("document").Call("querySelector", fmt.Sprintf("section.tile[data-bench=%q]", label)); el.Truthy() {
		el.Call("focus")
	}
}

// headlineOf is a bench's tile text: its headline, or for a server that
// sends none, its reason.
func headlineOf(st *pb.BenchState) string {
	if h := st.GetHeadline(); h != "" {
		return h
	}
	return st.GetReason()
}
