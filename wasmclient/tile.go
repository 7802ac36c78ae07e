package wasmclient

import (
	"fmt"
	"strconv"

	"github.com/maxence-charriere/go-app/v9/pkg/app"
)

// Tile is one bench in the room grid. Its fields are plain values so that
// go-app re-renders a tile only when what it shows has changed.
type Tile struct {
	app.Compo

	BenchID uint64
	Label   string
	Row     int
	Column  int
	Verdict string // css class: consistent, check, off, need-data, unsafe, stalled
	Words   string // the verdict in words
	// Headline is the cause in at most four words; Reason, all of it, is
	// the tile's tooltip and spoken label, and the detail's first line.
	Headline     string
	Reason       string
	Experiment   string
	Readings     int
	Age          string
	Acknowledged bool
	// Activity is "stalled" or "done" when the group stopped while the room
	// moves on; a second marker beside the verdict, never in its place.
	Activity string
	// Free drops the room position (the "needs attention first" order).
	Free bool
}

// marks gives every verdict a shape of its own, so state never rests on
// colour alone.
var marks = map[string]string{
	"consistent": "✓",
	"check":      "▲",
	"off":        "✕",
	"need-data":  "◌",
	"unsafe":     "⚠",
	"stalled":    "‖",
}

// activityWords are the second marker's: a shape and a word each.
var activityWords = map[string]string{"stalled": "‖ stalled", "done": "■ done"}

// Render draws the tile. It is a focusable button-like region: Enter or a
// click opens the bench's detail.
func (t *Tile) Render() app.UI {
	spoken := "bench " + t.Label + ", " + t.Words
	if t.Activity != "" {
		spoken += ", " + t.Activity
	}
	s := app.Section().
		Class("tile", "v-"+t.Verdict).
		Attr("data-bench", t.Label).
		Attr("data-verdict", t.Verdict).
		Attr("role", "button").
		TabIndex(0).
		Aria("label", spoken+": "+t.Reason).
		OnClick(t.open).
		OnKeyDown(func(ctx app.Context, e app.Event) {
			if k := e.Get("key").String(); k == "Enter" || k == " " {
				t.open(ctx, e)
			}
		})
	if !t.Free {
		s = s.Style("grid-row", strconv.Itoa(t.Row+1)).Style("grid-column", strconv.Itoa(t.Column+1))
	}
	meta := fmt.Sprintf("%d readings · %s", t.Readings, t.Age)
	if t.Verdict == "unsafe" && t.Acknowledged {
		meta += " · alert acknowledged"
	}
	return s.Attr("data-activity", t.Activity).Body(
		app.Div().Class("tile-head").Body(
			app.Span().Class("tile-label").Text(t.Label),
			app.Span().Class("tile-state").Body(
				app.Span().Class("mark").Aria("hidden", "true").Text(marks[t.Verdict]),
				app.Span().Class("words").Text(t.Words),
			),
			app.If(t.Activity != "", app.Span().Class("activity", "a-"+t.Activity).Text(activityWords[t.Activity])),
		),
		app.P().Class("reason").Title(t.Reason).Text(t.Headline),
		app.Div().Class("tile-meta").Text(meta),
	)
}

func (t *Tile) open(ctx app.Context, e app.Event) {
	ctx.NewActionWithValue(actionOpenBench, t.BenchID)
}
