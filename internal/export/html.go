package export

import (
	"fmt"
	"html/template"
	"io"
	"strings"
	"time"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/internal/svgplot"
)

// reportPage is the printable report: one page per group, with the plot,
// the result against theory, the grade and plain-words feedback. It needs
// nothing from outside the file, so it prints to PDF from any browser.
var reportPage = template.Must(template.New("report").Funcs(template.FuncMap{
	"plot":    func(p *domain.Plot) template.HTML { return template.HTML(svgplot.Bench(p)) },
	"value":   func(v, u float64, unit string) string { return domain.FormatMeasurement(v, u, unit) },
	"pts":     pts,
	"pct":     func(v float64) string { return fmt.Sprintf("%+.1f %%", v) },
	"benches": func(s Session, ids []uint64) string { return strings.Join(benchLabels(s.Labels, ids), ", ") },
	"when":    func(t time.Time) string { return t.UTC().Format("2006-01-02 15:04") },
	"audit":   auditLine,
}).Parse(`<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>{{.Session.Title}} — group reports</title>
<style>
body { font-family: system-ui, sans-serif; color: #1d2430; margin: 2rem; }
.group { page-break-after: always; break-after: page; max-width: 46rem; }
h1 { font-size: 1.3rem; } h2 { font-size: 1.15rem; margin-bottom: .2rem; }
.meta { color: #5b6472; }
table { border-collapse: collapse; margin: .5rem 0; } td, th { border-bottom: 1px solid #d8d3c4; padding: .2rem .5rem; text-align: left; }
.plot { width: 100%; max-width: 34rem; height: auto; }
.plot .axis { stroke: #1d2430; } .plot .tick, .plot .axis-label { font-size: 11px; fill: #5b6472; }
.plot .band { fill: rgba(31,122,109,.15); } .plot .theory { stroke: #1f7a6d; stroke-width: 2; fill: none; }
.plot .fit { stroke: #1d2430; stroke-dasharray: 6 4; fill: none; } .plot .eb { stroke: #1d2430; } .plot .pt, .plot .legend-pt { fill: #1d2430; }
.safety { font-size: .85rem; color: #5b6472; }
.room { page-break-after: always; break-after: page; max-width: 46rem; }
</style></head><body>
{{if or .Findings .Notes}}<section class="room">
<h1>{{.Session.Title}}</h1>
{{if .Findings}}<h2>Across the room (for the instructor)</h2>
<ul>{{range .Findings}}<li><strong>{{benches $ .BenchIDs}}</strong> ({{.Experiment}}): {{.Message}} <code>{{.Code}}</code></li>{{end}}</ul>
{{end}}{{if .Notes}}<h2>Audit log (for the instructor)</h2>
<table class="audit"><tr><th>when (UTC)</th><th>who</th><th>bench</th><th>what</th></tr>
{{range .Notes}}<tr><td>{{when .At}}</td><td>{{.Author}}</td><td>{{index $.Labels .BenchID}}</td><td>{{audit .}}</td></tr>
{{end}}</table>
{{end}}</section>
{{end}}{{range .Rows}}<section class="group">
<h1>{{$.Session.Title}}</h1>
<h2>Bench {{.Bench.Label}} · {{.Assessment.ExperimentTitle}}</h2>
<p class="meta">{{if .Bench.Members}}Group: {{.Bench.Members}} · {{end}}{{.Assessment.ReadingCount}} readings · verdict: {{.Assessment.Verdict.Label}}</p>
{{if .Assessment.Plot}}{{plot .Assessment.Plot}}{{end}}
{{if .Assessment.ResultUnit}}<table>
<tr><th>{{.Assessment.ResultName}}</th><td>{{value .Assessment.Measured.Value .Assessment.Measured.Uncertainty .Assessment.ResultUnit}}</td></tr>
<tr><th>theory</th><td>{{value .Assessment.Predicted.Value .Assessment.Predicted.Uncertainty .Assessment.ResultUnit}}</td></tr>
<tr><th>difference</th><td>{{pct .Assessment.PercentDiff}} (z = {{printf "%+.1f" .Assessment.Z}})</td></tr>
</table>{{end}}
<h3>Feedback</h3><ul>{{range .Grade.Feedback}}<li>{{.}}</li>{{end}}</ul>
<h3>Points</h3><table>
<tr><td>completeness</td><td>{{pts .Grade.Completeness}}</td></tr>
<tr><td>accuracy</td><td>{{pts .Grade.Accuracy}}</td></tr>
<tr><td>precision</td><td>{{pts .Grade.Precision}}</td></tr>
<tr><td>data quality</td><td>{{pts .Grade.Quality}}</td></tr>
{{if .Grade.Deductions}}<tr><td>safety deduction</td><td>−{{pts .Grade.Deductions}}</td></tr>{{end}}
<tr><th>total</th><th>{{pts .Grade.Final}} of {{pts .Grade.Max}}</th></tr>
{{with .Grade.Override}}<tr><td colspan="2">Adjusted from {{pts .Previous}} to {{pts .Points}} points by {{.Author}} on {{when .At}}: {{.Reason}}</td></tr>{{end}}
</table>
<p class="safety">Lab work with high voltages, large currents, hot coils and strong magnets follows local codes, your institution's safety rules and the equipment maker's limits.</p>
</section>
{{end}}</body></html>
`))

// auditLine says what an audit log entry did, in words.
func auditLine(n domain.Note) string {
	switch n.Kind {
	case domain.NoteKindGradeOverride:
		return fmt.Sprintf("grade changed from %s to %s points: %s", pts(n.PreviousPoints), pts(n.Points), n.Text)
	case domain.NoteKindNote:
		return "note: " + n.Text
	}
	return n.Text
}

// WriteHTML writes the printable per-group report.
func WriteHTML(w io.Writer, s Session) error {
	return reportPage.Execute(w, s)
}
