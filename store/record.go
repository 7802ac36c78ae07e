package store

import (
	"time"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/proto/recordpb"
)

// Conversions between domain types and stored records. Times are stored as
// Unix nanoseconds in UTC.

func unixNano(t time.Time) int64 {
	if t.IsZero() {
		return 0
	}
	return t.UnixNano()
}

func fromUnixNano(n int64) time.Time {
	if n == 0 {
		return time.Time{}
	}
	return time.Unix(0, n).UTC()
}

// namedRecords is a list of named quantities as records, in one allocation
// for the records and one for their quantities: a reading's values are
// written at every append.
func namedRecords(v domain.Values) []*recordpb.NamedQuantity {
	named := make([]recordpb.NamedQuantity, len(v))
	qs := make([]recordpb.Quantity, len(v))
	out := make([]*recordpb.NamedQuantity, len(v))
	for i, nq := range v {
		qs[i].Value, qs[i].Unit, qs[i].Uncertainty = nq.Value, nq.Unit, nq.Uncertainty
		named[i].Name, named[i].Quantity = nq.Name, &qs[i]
		out[i] = &named[i]
	}
	return out
}

// valuesFromRecords reads a list written by namedRecords, or a map field of
// an older file (whose entries come in any order), sorted by name.
func valuesFromRecords(l []*recordpb.NamedQuantity) domain.Values {
	v := make(domain.Values, len(l))
	sorted := true
	for i, nq := range l {
		v[i] = domain.NamedQuantity{Name: nq.GetName(), Quantity: domain.QuantityOf(nq.GetQuantity())}
		sorted = sorted && (i == 0 || v[i-1].Name < v[i].Name)
	}
	if !sorted {
		domain.SortValues(v)
	}
	return v
}

// constantsFromRecords reads a bench's constants, as namedRecords wrote
// them or as an older file's map field.
func constantsFromRecords(l []*recordpb.NamedQuantity) map[string]domain.Quantity {
	m := make(map[string]domain.Quantity, len(l))
	for _, nq := range l {
		m[nq.GetName()] = domain.QuantityOf(nq.GetQuantity())
	}
	return m
}

func sessionRecord(s domain.Session) *recordpb.Session {
	t := s.Tolerance
	return &recordpb.Session{SessionId: s.ID, Title: s.Title, JoinCode: s.JoinCode, CreatedUnixNano: unixNano(s.CreatedAt),
		Tolerance:           &recordpb.Tolerance{ZConsistent: t.ZConsistent, ZOff: t.ZOff, GoodPercent: t.GoodPercent, AcceptablePercent: t.AcceptablePercent},
		StationsSeeVerdicts: s.StationsSeeVerdicts, GradingPolicyJson: s.GradingPolicy, Closed: s.Closed, Course: s.Course}
}

func sessionFromRecord(r *recordpb.Session) domain.Session {
	t := r.GetTolerance()
	return domain.Session{ID: r.GetSessionId(), Title: r.GetTitle(), JoinCode: r.GetJoinCode(), CreatedAt: fromUnixNano(r.GetCreatedUnixNano()),
		Tolerance:           domain.Tolerance{ZConsistent: t.GetZConsistent(), ZOff: t.GetZOff(), GoodPercent: t.GetGoodPercent(), AcceptablePercent: t.GetAcceptablePercent()},
		StationsSeeVerdicts: r.GetStationsSeeVerdicts(), GradingPolicy: r.GetGradingPolicyJson(), Closed: r.GetClosed(), Course: r.GetCourse()}
}

func eventRecord(n domain.Note) *recordpb.Event {
	return &recordpb.Event{BenchId: n.BenchID, Kind: n.Kind, Text: n.Text, Author: n.Author, AtUnixNano: unixNano(n.At),
		Points: n.Points, PreviousPoints: n.PreviousPoints, StaffId: n.StaffID}
}

func noteFromRecord(r *recordpb.Event) domain.Note {
	return domain.Note{BenchID: r.GetBenchId(), Kind: r.GetKind(), Text: r.GetText(), Author: r.GetAuthor(), At: fromUnixNano(r.GetAtUnixNano()),
		Points: r.GetPoints(), PreviousPoints: r.GetPreviousPoints(), StaffID: r.GetStaffId()}
}

func benchRecord(b domain.Bench) *recordpb.Bench {
	return &recordpb.Bench{BenchId: b.ID, Label: b.Label, Row: int32(b.Row), Column: int32(b.Column),
		Experiment: b.Experiment, Constants: namedRecords(domain.ValuesOf(b.Constants)), Members: b.Members}
}

func benchFromRecord(r *recordpb.Bench) domain.Bench {
	return domain.Bench{ID: r.GetBenchId(), Label: r.GetLabel(), Row: int(r.GetRow()), Column: int(r.GetColumn()),
		Experiment: r.GetExperiment(), Constants: constantsFromRecords(r.GetConstants()), Members: r.GetMembers()}
}

func readingRecord(r domain.Reading) *recordpb.Reading {
	return &recordpb.Reading{ReadingId: r.ID, Values: namedRecords(r.Values),
		ReceivedUnixNano: unixNano(r.ReceivedAt), Sequence: r.Sequence, Supersedes: r.Supersedes}
}

func readingFromRecord(r *recordpb.Reading) domain.Reading {
	return domain.Reading{ID: r.GetReadingId(), Values: valuesFromRecords(r.GetValues()),
		ReceivedAt: fromUnixNano(r.GetReceivedUnixNano()), Sequence: r.GetSequence(), Supersedes: r.GetSupersedes()}
}

func staffRecord(s domain.Staff, keyHash []byte) *recordpb.Staff {
	roles := make(map[string]string, len(s.Roles))
	for c, r := range s.Roles {
		roles[c] = string(r)
	}
	return &recordpb.Staff{StaffId: s.ID, Name: s.Name, KeySha256: keyHash, Roles: roles, Revoked: s.Revoked,
		CreatedUnixNano: unixNano(s.CreatedAt)}
}

func staffFromRecord(r *recordpb.Staff) domain.Staff {
	roles := make(map[string]domain.Role, len(r.GetRoles()))
	for c, role := range r.GetRoles() {
		roles[c] = domain.Role(role)
	}
	return domain.Staff{ID: r.GetStaffId(), Name: r.GetName(), Roles: roles, Revoked: r.GetRevoked(),
		CreatedAt: fromUnixNano(r.GetCreatedUnixNano())}
}
