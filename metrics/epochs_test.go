package metrics

import (
	"reflect"
	"testing"

	"longwave/ingest"
)

func TestEpochGrid(t *testing.T) {
	const fs, length, skip = 100.0, 400, 2.0 // 4 s epochs at 100 Hz
	closed, open := ingest.EyesClosed, ingest.EyesOpen
	type ep struct {
		state ingest.EyeState
		start float64
	}
	cases := []struct {
		name    string
		periods []ingest.Period
		segs    []ingest.Segment
		want    []ep
	}{
		{
			name:    "closed then open, one segment",
			periods: []ingest.Period{{State: closed, Start: 0, End: 20}, {State: open, Start: 20, End: 40}},
			segs:    []ingest.Segment{{Onset: 0, First: 0, Count: 4000}},
			want:    []ep{{closed, 2}, {closed, 6}, {closed, 10}, {closed, 14}, {open, 22}, {open, 26}, {open, 30}, {open, 34}},
		},
		{
			name:    "one period over two segments with a gap: skip after the second segment's start",
			periods: []ingest.Period{{State: closed, Start: 0, End: 50}},
			segs:    []ingest.Segment{{Onset: 0, First: 0, Count: 2000}, {Onset: 30, First: 2000, Count: 2000}},
			want:    []ep{{closed, 2}, {closed, 6}, {closed, 10}, {closed, 14}, {closed, 32}, {closed, 36}, {closed, 40}, {closed, 44}},
		},
		{
			name:    "time outside every period is not analysed",
			periods: []ingest.Period{{State: open, Start: 10, End: 20.5}},
			segs:    []ingest.Segment{{Onset: 0, First: 0, Count: 4000}},
			want:    []ep{{open, 12}, {open, 16}},
		},
		{
			name:    "period shorter than skip plus one epoch",
			periods: []ingest.Period{{State: closed, Start: 0, End: 5.9}},
			segs:    []ingest.Segment{{Onset: 0, First: 0, Count: 4000}},
			want:    nil,
		},
	}
	for _, c := range cases {
		var got []ep
		for _, e := range epochGrid(c.periods, c.segs, fs, length, skip) {
			got = append(got, ep{e.State, e.Start})
			if e.First != int(e.Start*fs+0.5) && c.segs[0].Onset == 0 && len(c.segs) == 1 {
				t.Errorf("%s: epoch at %g s starts at sample %d", c.name, e.Start, e.First)
			}
		}
		if !reflect.DeepEqual(got, c.want) {
			t.Errorf("%s:\n got %v\nwant %v", c.name, got, c.want)
		}
	}
}

func TestNormalisePeriods(t *testing.T) {
	closed, open := ingest.EyesClosed, ingest.EyesOpen
	cases := []struct {
		name string
		in   []ingest.Period
		want []ingest.Period
	}{
		{"none: one unknown period", nil, []ingest.Period{{State: ingest.EyesUnknown, Start: 0, End: 100}}},
		{"sorted, clipped, touching same state joined",
			[]ingest.Period{{State: open, Start: 50, End: 120}, {State: closed, Start: -5, End: 20}, {State: closed, Start: 20, End: 50}},
			[]ingest.Period{{State: closed, Start: 0, End: 50}, {State: open, Start: 50, End: 100}}},
		{"empty after clipping dropped",
			[]ingest.Period{{State: closed, Start: 0, End: 10}, {State: open, Start: 100, End: 130}},
			[]ingest.Period{{State: closed, Start: 0, End: 10}}},
	}
	for _, c := range cases {
		if got := normalisePeriods(c.in, 100); !reflect.DeepEqual(got, c.want) {
			t.Errorf("%s: got %v, want %v", c.name, got, c.want)
		}
	}
}

func TestCleanRuns(t *testing.T) {
	closed, open := ingest.EyesClosed, ingest.EyesOpen
	eps := []epoch{
		{State: closed, First: 0}, {State: closed, First: 10}, {State: closed, First: 20, Reject: RuleAmplitude},
		{State: closed, First: 30}, {State: open, First: 40}, {State: open, First: 50},
	}
	got := cleanRuns(eps, 10)
	want := []run{{State: closed, First: 0, Count: 20}, {State: closed, First: 30, Count: 10}, {State: open, First: 40, Count: 20}}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("got %+v, want %+v", got, want)
	}
}
