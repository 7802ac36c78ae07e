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

	BenchID  uint64
	Label    string
	Row      int
	Column   int
	Verdict  string // css class: consistent, check, off, need-data, unsafe, stalled
	Words    string // the verdict in words
	Reason   string
	Readings int
	Age      string
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

// Render draws the tile.
func (t *Tile) Render() app.UI {
	return app.Section().
		Class("tile", "v-"+t.Verdict).
		Attr("data-bench", t.Label).
		Attr("data-verdict", t.Verdict).
		Style("grid-row", strconv.Itoa(t.Row+1)).
		Style("grid-column", strconv.Itoa(t.Column+1)).
		Body(
			app.Div().Class("tile-head").Body(
				app.Span().Class("tile-label").Text(t.Label),
				app.Span().Class("tile-state").Body(
					app.Span().Class("mark").Aria("hidden", "true").Text(marks[t.Verdict]),
					app.Span().Class("words").Text(t.Words),
				),
			),
			app.P().Class("reason").Text(t.Reason),
			app.Div().Class("tile-meta").Text(fmt.Sprintf("%d readings · %s", t.Readings, t.Age)),
		)
}
