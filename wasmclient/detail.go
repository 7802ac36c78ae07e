package wasmclient

import (
	"fmt"
	"sort"
	"strconv"
	"strings"

	"github.com/maxence-charriere/go-app/v9/pkg/app"
	"google.golang.org/protobuf/proto"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/internal/svgplot"
	pb "example.com/fluxroom/proto/fluxroompb"
)

// renderDetail is the open bench: verdict and reason, the plot, diagnoses
// with evidence and alternatives, the uncertainty budget, the readings
// (corrections struck through) and the notes.
func (r *Room) renderDetail() app.UI {
	st := r.benches[r.open]
	closeBtn := app.Button().ID("detail-close").Class("close").Text("Close").
		OnClick(func(ctx app.Context, e app.Event) { ctx.NewAction(actionCloseBench) })
	if r.detailErr != "" {
		return app.Aside().Class("detail").ID("detail").Body(closeBtn, app.P().Text("Could not load the bench: "+r.detailErr))
	}
	d := r.detail
	if d == nil || st == nil {
		return app.Aside().Class("detail").ID("detail").Body(closeBtn, app.P().Text("Loading…"))
	}
	gone := map[string]bool{}
	for _, id := range d.Superseded {
		gone[id] = true
	}
	marked := rowMarks{gone: gone, retake: retakeIDs(st), unsafe: breachIDs(st)}
	return app.Aside().Class("detail", "v-"+verdictClass(st.GetVerdict())).ID("detail").Attr("data-bench", st.GetBench().GetLabel()).
		Aria("label", "bench detail").
		Body(
			app.Header().Class("detail-head").Body(
				app.H2().Text(fmt.Sprintf("%s · %s", st.GetBench().GetLabel(), st.GetExperimentTitle())),
				app.Span().Class("tile-state").Body(
					app.Span().Class("mark").Text(marks[verdictClass(st.GetVerdict())]),
					app.Span().Text(st.GetVerdictLabel()),
				),
				closeBtn,
			),
			app.P().Class("detail-reason").Text(st.GetReason()),
			app.If(st.GetCaution() != "", app.P().Class("caution").Text(st.GetCaution())),
			app.Div().Class("plot-wrap").ID("detail-plot").Body(app.Raw(r.detailPlot)),
			app.Div().Class("detail-cols").Body(
				app.Section().Body(
					app.H3().Text("Likely causes"),
					app.If(len(st.GetDiagnoses()) == 0, app.P().Text("None found.")),
					app.Ul().Class("diagnoses").Body(app.Range(st.GetDiagnoses()).Slice(func(i int) app.UI {
						dg := st.GetDiagnoses()[i]
						return app.Li().Attr("data-code", dg.Code).Attr("data-reading", dg.ReadingId).Body(
							app.Strong().Text(dg.Cause),
							app.Div().Class("evidence").Text("Evidence ("+dg.Level+"): "+dg.Evidence),
							app.Div().Class("action").Text("Suggest: "+dg.Action),
							app.If(len(dg.Alternatives) > 0, app.Div().Class("alternatives").Text("Also possible: "+strings.Join(dg.Alternatives, ", "))),
							app.Code().Text(dg.Code),
						)
					})),
					app.H3().Text("Uncertainty budget"),
					app.Table().Class("budget").Body(
						app.Tr().Body(app.Th().Text("input"), app.Th().Text("rel. u"), app.Th().Text("share")),
						app.Range(st.GetBudget()).Slice(func(i int) app.UI {
							bi := st.GetBudget()[i]
							return app.Tr().Body(app.Td().Text(bi.Input), app.Td().Text(fmt.Sprintf("%.2g %%", 100*bi.RelativeUncertainty)),
								app.Td().Text(fmt.Sprintf("%.0f %%", 100*bi.Share)))
						}),
					),
					app.Range(st.GetNotes()).Slice(func(i int) app.UI { return app.P().Class("note-line").Text(st.GetNotes()[i]) }),
				),
				app.Section().Body(
					app.H3().Text("Readings"),
					readingsTable(d.Readings, marked),
					app.H3().Text("Notes"),
					app.Ul().Class("notes").Body(app.Range(d.Notes).Slice(func(i int) app.UI {
						n := d.Notes[i]
						when := ""
						if n.At != nil {
							when = n.At.AsTime().Local().Format("15:04")
						}
						return app.Li().Text(fmt.Sprintf("%s %s (%s): %s", when, n.Author, n.Kind, n.Text))
					})),
					&MembersForm{SessionID: r.sessionID(), BenchID: r.open, Members: st.GetBench().GetMembers()},
					&NoteForm{SessionID: r.sessionID(), BenchID: r.open},
					// Grades are the course instructors' (the server refuses
					// anyone else); an assistant is not shown the form.
					app.If(r.who.instructs(r.session.GetCourse()), &OverrideForm{SessionID: r.sessionID(), BenchID: r.open}),
				),
			),
		)
}

func (r *Room) sessionID() uint64 {
	if r.session == nil {
		return 0
	}
	return r.session.SessionId
}

// plotSVG draws a wire plot, in the one element app.Raw takes.
func plotSVG(p *pb.Plot) string {
	return `<div>` + svgplot.Bench(plotFromPB(p)) + `</div>`
}

// plotFromPB converts the wire plot for svgplot.
func plotFromPB(p *pb.Plot) *domain.Plot {
	if p == nil {
		return nil
	}
	line := func(l []*pb.PlotPoint) []domain.XY {
		out := make([]domain.XY, len(l))
		for i, v := range l {
			out[i] = domain.XY{X: v.X, Y: v.Y}
		}
		return out
	}
	out := &domain.Plot{XLabel: p.XLabel, YLabel: p.YLabel, Theory: line(p.Theory), Fit: line(p.Fit),
		BandLow: line(p.BandLow), BandHigh: line(p.BandHigh)}
	for _, v := range p.Points {
		out.Points = append(out.Points, domain.PlotPoint{X: v.X, Y: v.Y, UY: v.YUncertainty, ReadingID: v.ReadingId})
	}
	return out
}

// rowMarks say which readings a table marks, by id: corrected by a later
// reading (struck through, never hidden), asked to be re-taken by a
// diagnosis, past a safety limit.
type rowMarks struct{ gone, retake, unsafe map[string]bool }

// readingsTable lists the readings in arrival order, marked.
func readingsTable(rs []*pb.Reading, m rowMarks) app.UI {
	names := map[string]bool{}
	for _, rd := range rs {
		for k := range rd.Values {
			names[k] = true
		}
	}
	cols := make([]string, 0, len(names))
	for k := range names {
		cols = append(cols, k)
	}
	sort.Strings(cols)
	head := []app.UI{app.Th().Text("#")}
	for _, c := range cols {
		head = append(head, app.Th().Text(strings.ReplaceAll(c, "_", " ")))
	}
	head = append(head, app.Th().Text("id"))
	rows := []app.UI{app.Tr().Body(head...)}
	for i, rd := range rs {
		// Readings are numbered on their bench, as diagnoses name them.
		cells := []app.UI{app.Td().Text(strconv.Itoa(i + 1))}
		for _, c := range cols {
			text := ""
			if q, ok := rd.Values[c]; ok {
				text = fmt.Sprintf("%.6g %s", q.Value, q.Unit)
			}
			cells = append(cells, app.Td().Text(text))
		}
		id := rd.ReadingId
		if rd.Supersedes != "" {
			id += " (corrects " + rd.Supersedes + ")"
		}
		cells = append(cells, app.Td().Text(id))
		tr := app.Tr().Attr("data-reading", rd.ReadingId).Body(cells...)
		switch {
		case m.unsafe[rd.ReadingId]:
			tr = tr.Class("unsafe-reading").Title("past a safety limit of the bench")
		case m.gone[rd.ReadingId]:
			tr = tr.Class("superseded").Title("corrected by a later reading")
		case m.retake[rd.ReadingId]:
			tr = tr.Class("retake").Title("re-take this point")
		}
		rows = append(rows, tr)
	}
	return app.Table().Class("readings").ID("readings").Body(rows...)
}

// MembersForm shows the group's names and lets staff correct or complete
// them (SetGroupMembers); the gradebook's members column comes from them.
type MembersForm struct {
	app.Compo
	SessionID, BenchID uint64
	Members            string // as the room last showed them

	editing      bool
	text, status string
}

// Render draws the names, or the form that edits them.
func (f *MembersForm) Render() app.UI {
	if !f.editing {
		shown := f.Members
		if shown == "" {
			shown = "no names yet"
		}
		return app.P().Class("members").ID("members").Body(
			app.Strong().Text("Group: "), app.Span().ID("members-text").Text(shown), app.Text(" "),
			app.Button().ID("members-edit").Text("Edit").OnClick(func(ctx app.Context, e app.Event) {
				f.editing, f.text, f.status = true, f.Members, ""
			}),
		)
	}
	return app.Form().Class("members-form").ID("members-form").OnSubmit(f.submit).Body(
		app.Label().For("members-input").Text("Group members"),
		app.Input().ID("members-input").Type("text").Value(f.text).MaxLength(200).
			OnInput(textInto(&f.text)),
		app.Button().Type("submit").Text("Save names"),
		app.If(f.status != "", app.Span().Class("status").Text(f.status)),
	)
}

func (f *MembersForm) submit(ctx app.Context, e app.Event) {
	e.PreventDefault()
	text := f.text
	save(ctx, ProcSetGroupMembers, &pb.SetGroupMembersRequest{SessionId: f.SessionID, BenchId: f.BenchID, Members: text},
		func(_ *pb.SetGroupMembersResponse, err error) {
			if err != nil {
				f.status = saveFailed(err, "members")
				return
			}
			f.editing, f.Members, f.status = false, text, ""
		})
}

// save sends a bench form's call with the page's key off the UI goroutine,
// and hands its answer to done on it.
func save[T any, PT interface {
	*T
	proto.Message
}](ctx app.Context, proc string, req proto.Message, done func(*T, error)) {
	c := newAPI(baseURL()).withToken(storedKey(ctx))
	ctx.Async(func() {
		res, err := unary[T, PT](ctx, c, proc, req)
		ctx.Dispatch(func(app.Context) { done(res, err) })
	})
}

// saveFailed is what a form says when a save failed: the message about its
// field, or the error.
func saveFailed(err error, field string) string {
	if m := fieldMessages(err)[field]; m != "" {
		return m
	}
	return err.Error()
}

// NoteForm adds a timestamped note to a bench.
type NoteForm struct {
	app.Compo
	SessionID, BenchID uint64

	text, status string
}

// Render draws the form.
func (f *NoteForm) Render() app.UI {
	return app.Form().Class("note-form").OnSubmit(f.submit).Body(
		app.Label().For("note-text").Text("Add a note"),
		app.Input().ID("note-text").Type("text").Value(f.text).MaxLength(1000).
			OnInput(textInto(&f.text)),
		app.Button().Type("submit").Text("Save note"),
		app.If(f.status != "", app.Span().Class("status").Text(f.status)),
	)
}

func (f *NoteForm) submit(ctx app.Context, e app.Event) {
	e.PreventDefault()
	save(ctx, ProcAddNote, &pb.AddNoteRequest{SessionId: f.SessionID, BenchId: f.BenchID, Text: f.text},
		func(_ *pb.AddNoteResponse, err error) {
			if err != nil {
				f.status = saveFailed(err, "text")
				return
			}
			f.text, f.status = "", "saved"
		})
}

// baseURL is the origin that served the page.
func baseURL() string {
	u := app.Window().URL()
	u.Path, u.RawQuery, u.Fragment = "", "", ""
	return u.String()
}

// OverrideForm sets a group's points with a reason; the change is kept in
// the audit log with who, when and the points before.
type OverrideForm struct {
	app.Compo
	SessionID, BenchID uint64

	points, reason, status string
}

// Render draws the form.
func (f *OverrideForm) Render() app.UI {
	return app.Form().Class("override-form").OnSubmit(f.submit).Body(
		app.H3().Text("Override the grade"),
		app.Input().ID("override-points").Attr("inputmode", "decimal").Size(5).Placeholder("points").Value(f.points).
			OnInput(textInto(&f.points)),
		app.Input().ID("override-reason").Placeholder("reason (kept in the audit log)").Value(f.reason).
			OnInput(textInto(&f.reason)),
		app.Button().Type("submit").Text("Set points"),
		app.If(f.status != "", app.Span().Class("status").Text(f.status)),
	)
}

func (f *OverrideForm) submit(ctx app.Context, e app.Event) {
	e.PreventDefault()
	p, err := strconv.ParseFloat(strings.TrimSpace(f.points), 64)
	if err != nil {
		f.status = "points must be a number"
		return
	}
	save(ctx, ProcOverrideGrade, &pb.OverrideGradeRequest{SessionId: f.SessionID, BenchId: f.BenchID, Points: p, Reason: f.reason},
		func(res *pb.OverrideGradeResponse, err error) {
			if err != nil {
				msgs := fieldMessages(err)
				f.status = strings.TrimSpace(msgs["points"] + " " + msgs["reason"])
				if f.status == "" {
					f.status = err.Error()
				}
				return
			}
			f.status = fmt.Sprintf("set to %g (was %g)", res.Note.Points, res.Note.PreviousPoints)
			f.points, f.reason = "", ""
		})
}
