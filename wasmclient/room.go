package wasmclient

import (
	"fmt"
	"sort"
	"strconv"
	"time"

	"connectrpc.com/connect"
	"github.com/maxence-charriere/go-app/v9/pkg/app"

	pb "example.com/fluxroom/proto/fluxroompb"
)

// Reconnect backoff after the stream ends: doubles from the first value up
// to the cap, and resets once an event arrives.
const (
	backoffFirst = 250 * time.Millisecond
	backoffMax   = 5 * time.Second
)

// Room is the instructor's view of the whole room: one tile per bench in its
// room position, fed live by the room stream.
type Room struct {
	app.Compo

	session  *pb.Session
	benches  map[uint64]*pb.BenchState
	findings []*pb.RoomFinding
	lastSeq  uint64
	// link is the state of the stream in words: "connecting", "live", or why
	// it is reconnecting.
	link string
	now  time.Time
}

// OnMount starts the room stream and the clock that ages the tiles. Both
// stop when the component's context ends.
func (r *Room) OnMount(ctx app.Context) {
	r.benches = map[uint64]*pb.BenchState{}
	r.link = "connecting"
	r.now = time.Now()
	base := app.Window().URL()
	base.Path, base.RawQuery, base.Fragment = "", "", ""
	var sessionID uint64
	if s := app.Window().URL().Query().Get("session"); s != "" {
		sessionID, _ = strconv.ParseUint(s, 10, 64)
	}
	client := newAPI(base.String())
	ctx.Async(func() { r.watch(ctx, client, sessionID) })
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
		wait := backoff
		ctx.Dispatch(func(app.Context) {
			r.link = fmt.Sprintf("reconnecting in %.1f s (%s)", wait.Seconds(), connect.CodeOf(err))
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
		list, err := c.listSessions.CallUnary(ctx, connect.NewRequest(&pb.ListSessionsRequest{}))
		if err != nil {
			return err
		}
		if len(list.Msg.Sessions) == 0 {
			return connect.NewError(connect.CodeNotFound, fmt.Errorf("no session yet"))
		}
		sessionID = list.Msg.Sessions[0].SessionId
	}
	stream, err := c.watchRoom.CallServerStream(ctx, connect.NewRequest(&pb.WatchRoomRequest{SessionId: sessionID}))
	if err != nil {
		return err
	}
	defer stream.Close()
	var want uint64 = 1
	for stream.Receive() {
		ev := stream.Msg()
		if ev.Sequence != want {
			return connect.NewError(connect.CodeDataLoss, fmt.Errorf("event %d after %d", ev.Sequence, want-1))
		}
		want++
		gotEvent()
		// Component state changes only on the UI goroutine.
		ctx.Dispatch(func(app.Context) { r.apply(ev) })
	}
	return stream.Err()
}

// apply folds one stream event into the room.
func (r *Room) apply(ev *pb.WatchRoomResponse) {
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
	case *pb.WatchRoomResponse_Bench:
		r.benches[e.Bench.Bench.BenchId] = e.Bench
	case *pb.WatchRoomResponse_Findings:
		r.findings = e.Findings.Findings
	}
}

// Render draws the header and the room grid.
func (r *Room) Render() app.UI {
	title, code := "fluxroom", ""
	if r.session != nil {
		title, code = r.session.Title, r.session.JoinCode
	}
	tiles, rows, cols := r.tiles()
	return app.Main().Class("room").Body(
		app.Header().Class("room-head").Body(
			app.H1().Text(title),
			app.If(code != "", app.Div().Class("join").Body(
				app.Span().Class("join-label").Text("join code"),
				app.Span().Class("join-code").ID("join-code").Text(code),
			)),
			app.Div().Class("link").ID("link").Attr("data-link", r.link).Text(r.link),
		),
		r.renderUnsafe(),
		app.Div().Class("grid").ID("room-grid").
			Style("grid-template-columns", fmt.Sprintf("repeat(%d, minmax(11rem, 1fr))", cols)).
			Style("grid-template-rows", fmt.Sprintf("repeat(%d, auto)", rows)).
			Body(app.Range(tiles).Slice(func(i int) app.UI { return tiles[i] })),
		app.If(len(r.findings) > 0, app.Section().Class("findings").ID("findings").Body(
			app.H2().Text("Across the room"),
			app.Ul().Body(app.Range(r.findings).Slice(func(i int) app.UI {
				f := r.findings[i]
				return app.Li().Attr("data-code", f.Code).Text(f.Message)
			})),
		)),
		app.Footer().Class("room-foot").Text("Cautions: beam tubes run at hundreds of volts; coils and straight-wire set-ups get hot at high current; strong magnets pinch and affect pacemakers. Follow your institution's safety rules and the equipment maker's limits."),
	)
}

// tiles builds one Tile value per bench, in room order.
func (r *Room) tiles() (out []*Tile, rows, cols int) {
	rows, cols = 1, 1
	for _, st := range r.benches {
		b := st.GetBench()
		t := &Tile{
			BenchID:  b.GetBenchId(),
			Label:    b.GetLabel(),
			Row:      int(b.GetRow()),
			Column:   int(b.GetColumn()),
			Verdict:  verdictClass(st.GetVerdict()),
			Words:    st.GetVerdictLabel(),
			Reason:   st.GetReason(),
			Readings: int(st.GetReadingCount()),
			Age:      age(r.now, st),
		}
		rows, cols = max(rows, t.Row+1), max(cols, t.Column+1)
		out = append(out, t)
	}
	sort.Slice(out, func(i, j int) bool {
		if out[i].Row != out[j].Row {
			return out[i].Row < out[j].Row
		}
		return out[i].Column < out[j].Column
	})
	return out, rows, cols
}

// renderUnsafe is the banner that names every unsafe bench with its
// caution, above the grid where it cannot be missed.
func (r *Room) renderUnsafe() app.UI {
	var items []app.UI
	for _, t := range r.sortedStates() {
		if t.GetVerdict() == pb.Verdict_VERDICT_UNSAFE {
			items = append(items, app.Li().Attr("data-bench", t.GetBench().GetLabel()).Body(
				app.Strong().Text(t.GetBench().GetLabel()+": "),
				app.Span().Text(t.GetReason()+" "+t.GetCaution()),
			))
		}
	}
	if len(items) == 0 {
		return app.Div().ID("unsafe-none").Hidden(true)
	}
	return app.Section().Class("unsafe-banner").ID("unsafe-banner").Aria("live", "assertive").Body(
		app.H2().Text("⚠ Unsafe setting"),
		app.Ul().Body(items...),
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
