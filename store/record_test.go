package store

import (
	"slices"
	"testing"

	"google.golang.org/protobuf/proto"

	"example.com/fluxroom/domain"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/recordpb"
)

// A stored bench's constants and a reading's values were map fields; they
// are lists now, with a map entry's field numbers. The wire's Bench still
// has the map field, with the same field numbers as the record, so it
// stands in for a record written before: each must read the other's bytes.
func TestNamedQuantitiesReadAsTheMapsBefore(t *testing.T) {
	constants := map[string]domain.Quantity{
		"turns":          {Value: 120, Unit: "1"},
		"segment_length": {Value: 4.2, Unit: "cm", Uncertainty: 0.05},
		"gap_field":      {Value: 310, Unit: "mT", Uncertainty: 12},
	}
	bench := domain.Bench{ID: 7, Label: "B3", Row: 1, Column: 2, Experiment: "coil_force", Constants: constants, Members: "Ilse, Tomasz"}

	t.Run("old map bytes read as a list", func(t *testing.T) {
		old := &pb.Bench{BenchId: 7, Label: "B3", Row: 1, Column: 2, Experiment: "coil_force", Members: "Ilse, Tomasz",
			Constants: map[string]*pb.Quantity{}}
		for name, q := range constants {
			old.Constants[name] = &pb.Quantity{Value: q.Value, Unit: q.Unit, Uncertainty: q.Uncertainty}
		}
		b, err := proto.Marshal(old)
		if err != nil {
			t.Fatal(err)
		}
		var rec recordpb.Bench
		if err := proto.Unmarshal(b, &rec); err != nil {
			t.Fatal(err)
		}
		got := benchFromRecord(&rec)
		if !domain.ValuesOf(got.Constants).Equal(domain.ValuesOf(constants)) || got.Label != bench.Label || got.Members != bench.Members {
			t.Errorf("read back %+v, want %+v", got, bench)
		}
	})

	t.Run("new list bytes read as a map", func(t *testing.T) {
		b, err := proto.Marshal(benchRecord(bench))
		if err != nil {
			t.Fatal(err)
		}
		var old pb.Bench
		if err := proto.Unmarshal(b, &old); err != nil {
			t.Fatal(err)
		}
		if len(old.GetConstants()) != len(constants) {
			t.Fatalf("map has %d entries, want %d", len(old.GetConstants()), len(constants))
		}
		for name, q := range constants {
			got := old.GetConstants()[name]
			if got.GetValue() != q.Value || got.GetUnit() != q.Unit || got.GetUncertainty() != q.Uncertainty {
				t.Errorf("%s = %v, want %v", name, got, q)
			}
		}
	})

	t.Run("values come back sorted whatever the order stored", func(t *testing.T) {
		l := []*recordpb.NamedQuantity{
			{Name: "force", Quantity: &recordpb.Quantity{Value: 0.012, Unit: "N"}},
			{Name: "current", Quantity: &recordpb.Quantity{Value: 1.5, Unit: "A", Uncertainty: 0.01}},
		}
		want := domain.Values{
			{Name: "current", Quantity: domain.Quantity{Value: 1.5, Unit: "A", Uncertainty: 0.01}},
			{Name: "force", Quantity: domain.Quantity{Value: 0.012, Unit: "N"}},
		}
		if got := valuesFromRecords(l); !slices.Equal(got, want) {
			t.Errorf("got %v, want %v", got, want)
		}
		if got := valuesFromRecords(namedRecords(want)); !slices.Equal(got, want) {
			t.Errorf("round trip: got %v, want %v", got, want)
		}
	})
}
