package domain

import (
	"encoding/binary"
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
	converted  map[string]memoReading
	fp         fingerprint
}

type memoReading struct {
	values map[string]Measurement
	ok     bool
}

// convert is e.convertReading of a stored reading, remembered by its ID.
func (m *Memo) convert(e *Experiment, r Reading) (map[string]Measurement, bool) {
	if m == nil {
		v, err := e.convertReading("values", r.Values)
		return v, err == nil
	}
	if m.experiment != e.ID || m.converted == nil {
		*m = Memo{experiment: e.ID, converted: map[string]memoReading{}}
	}
	if c, ok := m.converted[r.ID]; ok {
		return c.values, c.ok
	}
	v, err := e.convertReading("values", r.Values)
	m.converted[r.ID] = memoReading{values: v, ok: err == nil}
	return v, err == nil
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
		q, ok := rd.Values[s.Name]
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
