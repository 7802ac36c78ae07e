// Package readingscsv reads and writes the readings CSV, the one file format
// for readings taken outside a session or exported from one (README.md,
// "Readings CSV"): `fluxroom analyze` and `fluxroom submit` read it, the
// readings export writes it, and a written file reads back.
package readingscsv

import (
	"crypto/sha256"
	"encoding/csv"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"sort"
	"strconv"
	"strings"

	"example.com/fluxroom/domain"
)

// The readings CSV (documented in README.md, "Readings CSV"):
//
//	bench,experiment,current [A],force [N],turns [1],segment_length [cm]
//	A1,coil_force,0.0,0.003,100,4.0
//
// One row is one reading. Columns named after a reading value carry that
// value; columns named after a bench constant carry the constant, which
// must be the same on every row of the bench (empty cells take the default).
// Lines starting with # are comments.

// Error is a bad cell or row, by 1-based line and column.
type Error struct {
	Line    int    `json:"line"`
	Column  int    `json:"column"`
	Header  string `json:"field"`
	Message string `json:"message"`
}

func (e Error) Error() string {
	if e.Column == 0 {
		return fmt.Sprintf("line %d: %s", e.Line, e.Message)
	}
	return fmt.Sprintf("line %d, column %d (%s): %s", e.Line, e.Column, e.Header, e.Message)
}

// Bench is one bench's constants and readings from a CSV file.
type Bench struct {
	Label    string
	Bench    domain.Bench
	Readings []domain.Reading
	// Lines are the source lines of the readings, and Keys their stable
	// identity (for idempotent submission).
	Lines []int
	Keys  []string
	// constLine remembers where each constant was first set.
	constLine map[string]int
}

type csvColumn struct {
	header, name, unit string
}

// Read parses a readings file. It returns every bench with its good rows
// and an error per bad cell; a bad row is left out whole.
func Read(r io.Reader) ([]*Bench, []Error, error) {
	cr := csv.NewReader(r)
	cr.Comment = '#'
	cr.FieldsPerRecord = -1
	header, err := cr.Read()
	if err != nil {
		return nil, nil, fmt.Errorf("readingscsv: read header: %w", err)
	}
	line, _ := cr.FieldPos(0)
	cols := make([]csvColumn, len(header))
	benchCol, expCol, supersededCol := -1, -1, -1
	for i, h := range header {
		h = strings.TrimSpace(strings.TrimPrefix(h, "\ufeff"))
		switch strings.ToLower(h) {
		case "bench":
			benchCol = i
			continue
		case "experiment":
			expCol = i
			continue
		case ColSuperseded:
			supersededCol = i
			continue
		case ColSequence, ColReadingID, ColReceivedAt, ColSupersedes, "group members":
			continue // metadata of an exported file
		}
		name, unit, ok := strings.Cut(h, "[")
		if !ok || !strings.HasSuffix(unit, "]") {
			return nil, nil, Error{Line: line, Column: i + 1, Header: h, Message: `a column is "bench", "experiment" or "name [unit]", for example "current [A]"`}
		}
		cols[i] = csvColumn{header: h, name: strings.TrimSpace(name), unit: strings.TrimSpace(strings.TrimSuffix(unit, "]"))}
	}
	if expCol < 0 {
		return nil, nil, Error{Line: line, Message: `the header needs an "experiment" column`}
	}
	headerLine := line
	hasColumn := map[string]bool{}
	for _, c := range cols {
		hasColumn[c.name] = true
	}
	// missing names a value column an experiment needs and the header
	// lacks, once for the file instead of once a row.
	missing := map[string]bool{}
	byLabel := map[string]*Bench{}
	var order []string
	var errs []Error
	seen := map[string]int{}
	rows := 0
	for {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		line, _ = cr.FieldPos(0)
		if err != nil {
			var pe *csv.ParseError
			if errors.As(err, &pe) {
				errs = append(errs, Error{Line: pe.Line, Column: pe.Column, Message: pe.Err.Error()})
				continue
			}
			return nil, nil, err
		}
		cell := func(i int) string {
			if i < 0 || i >= len(rec) {
				return ""
			}
			return strings.TrimSpace(rec[i])
		}
		rows++
		if strings.EqualFold(cell(supersededCol), "yes") {
			continue // corrected by a later row; kept in the file for the record
		}
		label := cell(benchCol)
		if label == "" {
			label = "bench"
		}
		exp, ok := domain.LookupExperiment(cell(expCol))
		if !ok {
			errs = append(errs, Error{Line: line, Column: expCol + 1, Header: "experiment",
				Message: fmt.Sprintf("unknown experiment %q; use one of %s", cell(expCol), strings.Join(domain.ExperimentIDs(), ", "))})
			continue
		}
		isConst, isValue := map[string]bool{}, map[string]bool{}
		for _, s := range exp.Constants {
			isConst[s.Name] = true
		}
		lacks := false
		for _, s := range exp.Values {
			isValue[s.Name] = true
			if !s.Optional && !hasColumn[s.Name] {
				lacks = true
				if key := exp.ID + "/" + s.Name; !missing[key] {
					missing[key] = true
					errs = append(errs, Error{Line: headerLine, Message: fmt.Sprintf("the header has no %s column: %s readings need the %s, for example a column %q",
						s.Name, exp.ID, s.Label, s.Name+" ["+s.Unit+"]")})
				}
			}
		}
		if lacks {
			continue // said once, above
		}
		b := byLabel[label]
		if b == nil {
			b = &Bench{Label: label, Bench: domain.Bench{Label: label, Experiment: exp.ID, Constants: map[string]domain.Quantity{}},
				constLine: map[string]int{}}
			byLabel[label] = b
			order = append(order, label)
		}
		var rowErrs []Error
		if b.Bench.Experiment != exp.ID {
			rowErrs = append(rowErrs, Error{Line: line, Column: expCol + 1, Header: "experiment",
				Message: fmt.Sprintf("bench %s is on %s in earlier rows", label, b.Bench.Experiment)})
		}
		values := map[string]domain.Quantity{}
		consts := map[string]domain.Quantity{}
		for i, c := range cols {
			text := cell(i)
			if c.name == "" || text == "" {
				continue
			}
			v, err := strconv.ParseFloat(text, 64)
			if err != nil {
				rowErrs = append(rowErrs, Error{Line: line, Column: i + 1, Header: c.header, Message: fmt.Sprintf("not a number: %q", text)})
				continue
			}
			q := domain.Quantity{Value: v, Unit: c.unit}
			switch {
			case isValue[c.name]:
				values[c.name] = q
			case isConst[c.name]:
				consts[c.name] = q
			}
			// Columns of other experiments are left alone: a file may mix them.
		}
		for name, q := range consts {
			if old, ok := b.Bench.Constants[name]; ok && old != q {
				rowErrs = append(rowErrs, Error{Line: line, Column: columnOf(cols, name) + 1, Header: cols[columnOf(cols, name)].header,
					Message: fmt.Sprintf("bench %s has %s = %g %s from line %d", label, name, old.Value, old.Unit, b.constLine[name])})
			}
		}
		if len(rowErrs) == 0 {
			if err := domain.ValidateReading("values", domain.Bench{Experiment: exp.ID}, domain.ValuesOf(values)); err != nil {
				rowErrs = append(rowErrs, fieldErrors(err, line, cols)...)
			}
		}
		if len(rowErrs) > 0 {
			errs = append(errs, rowErrs...)
			continue
		}
		for name, q := range consts {
			if _, ok := b.Bench.Constants[name]; !ok {
				b.Bench.Constants[name] = q
				b.constLine[name] = line
			}
		}
		key := rowKey(label, rec)
		seen[key]++
		b.Readings = append(b.Readings, domain.Reading{Values: domain.ValuesOf(values), Sequence: uint64(len(b.Readings) + 1)})
		b.Lines = append(b.Lines, line)
		b.Keys = append(b.Keys, fmt.Sprintf("%s-%d", key, seen[key]))
	}
	if rows == 0 {
		return nil, nil, Error{Line: headerLine, Message: "the file has a header but no readings"}
	}
	out := make([]*Bench, 0, len(order))
	for _, label := range order {
		b := byLabel[label]
		checked, err := domain.ValidateBench("bench "+label, b.Bench)
		if err != nil {
			for _, v := range err.(*domain.ValidationError).Violations {
				errs = append(errs, Error{Line: firstLine(b), Message: v.Field + ": " + v.Reason})
			}
			continue
		}
		b.Bench = checked
		out = append(out, b)
	}
	sort.SliceStable(errs, func(i, j int) bool { return errs[i].Line < errs[j].Line })
	return out, errs, nil
}

func firstLine(b *Bench) int {
	min := 0
	for _, l := range b.constLine {
		if min == 0 || l < min {
			min = l
		}
	}
	return min
}

func columnOf(cols []csvColumn, name string) int {
	for i, c := range cols {
		if c.name == name {
			return i
		}
	}
	return 0
}

// fieldErrors maps a reading's field violations (values["force"].unit) to
// the CSV cells they came from.
func fieldErrors(err error, line int, cols []csvColumn) []Error {
	var ve *domain.ValidationError
	if !errors.As(err, &ve) {
		return []Error{{Line: line, Message: err.Error()}}
	}
	var out []Error
	for _, v := range ve.Violations {
		e := Error{Line: line, Message: v.Reason}
		for i, c := range cols {
			if c.name != "" && strings.Contains(v.Field, `"`+c.name+`"`) {
				e.Column, e.Header = i+1, c.header
				break
			}
		}
		if e.Column == 0 {
			e.Message = v.Field + ": " + v.Reason
		}
		out = append(out, e)
	}
	return out
}

// rowKey is a row's stable identity: its bench and cells, hashed.
func rowKey(label string, rec []string) string {
	h := sha256.New()
	io.WriteString(h, label)
	for _, c := range rec {
		io.WriteString(h, "\x1f"+strings.TrimSpace(c))
	}
	return hex.EncodeToString(h.Sum(nil))[:16]
}
