package domain

import (
	"encoding/binary"
	"maps"
	"math"
	"strconv"
)

// Memo keeps what judging a bench worked out from each reading, for the
// next judging of the same bench: each reading is converted to SI once,
// not again after every later reading, and the bench's fingerprint grows by
// the new readings only. Stored readings never change (a correction is a
// new reading), so an entry stays right; a bench's experiment can change,
// and then the memo starts over. The zero value is ready to use; one Memo
// serves one bench, from one goroutine at a time.
type Memo struct {
	experiment string
	// converted lines up with the readings judged last time: entry i is
	// reading i while its ID matches. Readings are appended, so each
	// costs a comparison of IDs (the same string, equal at once) in a
	// contiguous slice, not a lookup in a map spread over the heap.
	converted []memoReading
	fp        fingerprint
	// scratch is the judging's list of the readings that count, kept for
	// the next judging: nothing judged keeps it.
	scratch []siReading
	// The bench's constants as last converted, and what they converted
	// to (never nil once converted): a bench's constants change rarely, and
	// its judging after every reading reads the result only.
	constIn  map[string]Quantity
	constOut map[string]Measurement
	constErr error
}

// forExperiment makes the memo e's, starting over if it held another
// experiment's work.
func (m *Memo) forExperiment(e *Experiment) {
	if m.experiment != e.ID {
		*m = Memo{experiment: e.ID}
	}
}

// constants is e.convertConstants(c), remembered while the bench's
// constants stay as they were. The result is shared: read it only.
func (m *Memo) constants(e *Experiment, c map[string]Quantity) (map[string]Measurement, error) {
	if m == nil {
		return e.convertConstants(c)
	}
	m.forExperiment(e)
	if m.constOut != nil && maps.Equal(m.constIn, c) {
		return m.constOut, m.constErr
	}
	out, err := e.convertConstants(c)
	m.constIn, m.constOut, m.constErr = maps.Clone(c), out, err
	return out, err
}

// readings is an empty list for up to n converted readings: the memo's,
// reused, or a new one without a memo.
func (m *Memo) readings(n int) []siReading {
	if m == nil {
		return make([]siReading, 0, n)
	}
	if cap(m.scratch) < n {
		m.scratch = make([]siReading, 0, n+n/4)
	}
	return m.scratch[:0]
}

type memoReading struct {
	id     string
	values siValues
	ok     bool
}

// convert is e.convertReading of r, the i-th of a bench's readings, in SI
// and in the experiment's order; it is remembered by its place and ID.
func (m *Memo) convert(e *Experiment, i int, r Reading) (siValues, bool) {
	if m == nil {
		v, err := e.convertReading("values", r.Values)
		return v, err == nil
	}
	m.forExperiment(e)
	if i < len(m.converted) && m.converted[i].id == r.ID {
		return m.converted[i].values, m.converted[i].ok
	}
	// A reading new to the memo, or one that moved (a reading committed
	// earlier was judged later): the entries from here on are redone.
	m.converted = m.converted[:min(i, len(m.converted))]
	v, err := e.convertReading("values", r.Values)
	c := memoReading{id: r.ID, values: v, ok: err == nil}
	m.converted = append(m.converted, c)
	return c.values, c.ok
}

// fingerprint is a 64-bit FNV-1a hash of every value as typed, in the
// experiment's order [pub: Fowler–Noll–Vo hash, FNV-1a, 64-bit offset basis
// and prime as in Go's hash/fnv], kept with how many readings it covers and
// the last one's ID, so appending readings extends it.
type fingerprint struct {
	h      uint64
	n      int
	lastID string
}

const (
	fnvOffset64 = 14695981039346656037
	fnvPrime64  = 1099511628211
)

func (f *fingerprint) write(b []byte) {
	for _, c := range b {
		f.h ^= uint64(c)
		f.h *= fnvPrime64
	}
}

func (f *fingerprint) add(e *Experiment, rd Reading) {
	var buf [8]byte
	for _, s := range e.Values {
		q, ok := rd.Values.Get(s.Name)
		if !ok {
			f.write([]byte{0})
			continue
		}
		binary.LittleEndian.PutUint64(buf[:], math.Float64bits(q.Value))
		f.write(buf[:])
		f.write([]byte(q.Unit))
	}
	f.write([]byte{'|'})
	f.n++
	f.lastID = rd.ID
}

// fingerprintOf is the readings' fingerprint, extending the memo's when the
// readings extend the ones it covers.
func (m *Memo) fingerprintOf(e *Experiment, readings []Reading) string {
	var f fingerprint
	if m != nil && m.experiment == e.ID && m.fp.n > 0 && m.fp.n <= len(readings) && readings[m.fp.n-1].ID == m.fp.lastID {
		f = m.fp
	} else {
		f = fingerprint{h: fnvOffset64}
	}
	for _, rd := range readings[f.n:] {
		f.add(e, rd)
	}
	if m != nil && m.experiment == e.ID {
		m.fp = f
	}
	return strconv.FormatUint(f.h, 16) + "/" + strconv.Itoa(len(readings))
}
