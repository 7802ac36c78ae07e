package readingscsv

import (
	"encoding/csv"
	"fmt"
	"io"
	"sort"
	"strconv"
	"time"

	"example.com/fluxroom/domain"
)

// Metadata columns of the readings CSV; Read skips them and leaves out rows
// marked superseded.
const (
	ColSequence   = "sequence"
	ColReadingID  = "reading id"
	ColReceivedAt = "received at"
	ColSupersedes = "supersedes"
	ColSuperseded = "superseded"
)

// Write writes every reading of the benches, in their order, superseded
// ones marked: bench, experiment, metadata, then one "name [unit]" column per
// constant and value as typed. Read reads such a file back, leaving out the
// metadata and the superseded rows.
func Write(w io.Writer, benches []domain.Bench, readings map[uint64][]domain.Reading) error {
	type col struct{ name, unit string }
	seen := map[col]bool{}
	for _, b := range benches {
		for k, q := range b.Constants {
			seen[col{k, q.Unit}] = true
		}
		for _, r := range readings[b.ID] {
			for _, nq := range r.Values {
				seen[col{nq.Name, nq.Unit}] = true
			}
		}
	}
	cols := make([]col, 0, len(seen))
	for c := range seen {
		cols = append(cols, c)
	}
	sort.Slice(cols, func(i, j int) bool {
		if cols[i].name != cols[j].name {
			return cols[i].name < cols[j].name
		}
		return cols[i].unit < cols[j].unit
	})
	header := []string{"bench", "experiment", ColSequence, ColReadingID, ColReceivedAt, ColSupersedes, ColSuperseded}
	for _, c := range cols {
		header = append(header, fmt.Sprintf("%s [%s]", c.name, c.unit))
	}
	cw := csv.NewWriter(w)
	cw.UseCRLF = true // RFC 4180
	cw.Write(header)
	for _, b := range benches {
		gone := domain.Superseded(readings[b.ID])
		for _, r := range readings[b.ID] {
			rec := []string{b.Label, b.Experiment, strconv.FormatUint(r.Sequence, 10), r.ID, r.ReceivedAt.UTC().Format(time.RFC3339Nano),
				r.Supersedes, map[bool]string{true: "yes", false: "no"}[gone[r.ID]]}
			for _, c := range cols {
				cell := ""
				if q, ok := r.Values.Get(c.name); ok && q.Unit == c.unit {
					cell = strconv.FormatFloat(q.Value, 'g', -1, 64)
				} else if q, ok := b.Constants[c.name]; ok && q.Unit == c.unit {
					cell = strconv.FormatFloat(q.Value, 'g', -1, 64)
				}
				rec = append(rec, cell)
			}
			if err := cw.Write(rec); err != nil {
				return err
			}
		}
	}
	cw.Flush()
	return cw.Error()
}
