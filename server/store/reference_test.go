package store

import (
	"context"
	"reflect"
	"testing"
)

func TestReferenceRangesRoundTrip(t *testing.T) {
	ctx := context.Background()
	s := mustOpen(t)
	f := func(v float64) *float64 { return &v }
	rows := []ReferenceRange{
		{Marker: "pdr_frequency", Region: "posterior", State: "closed", AgeMin: 60, AgeMax: 70, Mean: f(9.6), SD: f(0.8),
			ExpectedChangePerYear: f(-0.02), Population: "invented test population", Method: "peak", Bands: "5-14 Hz",
			Citation: "test row, not a source", Status: "from memory"},
		{Marker: "pdr_frequency", Region: "posterior", State: "closed", AgeMin: 50, AgeMax: 60, Lower: f(8), Upper: f(12),
			Population: "invented", Method: "peak", Bands: "5-14 Hz", Citation: "test row", Status: "checked", Note: "n"},
	}
	if err := s.ReplaceReferenceRanges(ctx, "clinic-test", rows); err != nil {
		t.Fatal(err)
	}
	got, err := s.ReferenceRanges(ctx, "clinic-test")
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 2 {
		t.Fatalf("%d rows, want 2", len(got))
	}
	// Ordered by age band; IDs and set filled in, nil stays nil.
	want := []ReferenceRange{rows[1], rows[0]}
	for i := range got {
		if got[i].ID == 0 || got[i].Set != "clinic-test" {
			t.Errorf("row %d: id %d set %q", i, got[i].ID, got[i].Set)
		}
		got[i].ID, got[i].Set = 0, ""
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("rows = %+v\nwant %+v", got, want)
	}
	// Replacing swaps the whole set and leaves other sets alone.
	lit, _ := s.ReferenceRanges(ctx, "literature")
	if err := s.ReplaceReferenceRanges(ctx, "clinic-test", rows[:1]); err != nil {
		t.Fatal(err)
	}
	if got, _ := s.ReferenceRanges(ctx, "clinic-test"); len(got) != 1 {
		t.Errorf("after replace: %d rows, want 1", len(got))
	}
	if lit2, _ := s.ReferenceRanges(ctx, "literature"); len(lit2) != len(lit) {
		t.Errorf("literature set changed: %d -> %d", len(lit), len(lit2))
	}
	// A row the schema refuses rolls the whole replacement back.
	bad := append([]ReferenceRange{}, rows...)
	bad[1].Status = "guessed"
	if err := s.ReplaceReferenceRanges(ctx, "clinic-test", bad); err == nil {
		t.Error("bad status accepted")
	}
	if got, _ := s.ReferenceRanges(ctx, "clinic-test"); len(got) != 1 {
		t.Errorf("failed replace changed the set: %d rows", len(got))
	}
}
