package metrics

import (
	"math"
	"sort"

	"longwave/ingest"
)

// epoch is one fixed-length stretch of analysis: Length samples of the
// analysed channels starting at sample First, all inside one segment and one
// eye-state period.
type epoch struct {
	State ingest.EyeState
	First int     // index of the first sample (EEG rate)
	Start float64 // recording time of the first sample, s
	// Reject is the artefact rule that rejected the epoch, "" when clean.
	Reject string
}

// timeTolerance absorbs float rounding when period edges computed from
// sample counts are compared with annotation times (seconds).
const timeTolerance = 1e-9

// normalisePeriods sorts the periods, clips them to [0, total), drops empty
// ones and joins touching periods of the same state. A recording without
// periods is one period of unknown state (the convention of package ingest).
func normalisePeriods(in []ingest.Period, total float64) []ingest.Period {
	if len(in) == 0 {
		return []ingest.Period{{State: ingest.EyesUnknown, Start: 0, End: total}}
	}
	ps := append([]ingest.Period(nil), in...)
	sort.SliceStable(ps, func(i, j int) bool { return ps[i].Start < ps[j].Start })
	out := ps[:0]
	for _, p := range ps {
		p.Start = math.Max(p.Start, 0)
		p.End = math.Min(p.End, total)
		if p.End-p.Start <= timeTolerance {
			continue
		}
		if n := len(out); n > 0 && out[n-1].State == p.State && p.Start-out[n-1].End <= timeTolerance {
			out[n-1].End = math.Max(out[n-1].End, p.End)
			continue
		}
		out = append(out, p)
	}
	return out
}

// segmentsOf returns the recording's segments clipped to n samples; a
// recording without segments is one continuous segment from time 0.
func segmentsOf(rec *ingest.Recording, n int) []ingest.Segment {
	if len(rec.Segments) == 0 {
		return []ingest.Segment{{Onset: 0, First: 0, Count: n}}
	}
	out := make([]ingest.Segment, 0, len(rec.Segments))
	for _, g := range rec.Segments {
		if g.First < 0 || g.First >= n || g.Count <= 0 {
			continue
		}
		if g.First+g.Count > n {
			g.Count = n - g.First
		}
		out = append(out, g)
	}
	return out
}

// epochGrid lays non-overlapping epochs of length samples over every
// intersection of an eye-state period with a segment. Each intersection
// starts with skip seconds left out: an intersection always begins at a
// change of state or at a segment start (DESIGN.md: "the first 2 s after
// each change of state are skipped"; a segment start, such as the join of
// two runs, is treated the same way). Epochs are ordered by sample index.
func epochGrid(periods []ingest.Period, segs []ingest.Segment, fs float64, length int, skip float64) []epoch {
	var out []epoch
	for _, g := range segs {
		segStart := g.Onset
		segEnd := g.Onset + float64(g.Count)/fs
		for _, p := range periods {
			a := math.Max(p.Start, segStart)
			b := math.Min(p.End, segEnd)
			if b-a <= timeTolerance {
				continue
			}
			a += skip
			i := g.First + int(math.Ceil((a-segStart)*fs-1e-6))
			for ; i+length <= g.First+g.Count; i += length {
				end := segStart + float64(i+length-g.First)/fs
				if end > b+timeTolerance {
					break
				}
				out = append(out, epoch{State: p.State, First: i, Start: segStart + float64(i-g.First)/fs})
			}
		}
	}
	sort.SliceStable(out, func(i, j int) bool { return out[i].First < out[j].First })
	return out
}

// run is a stretch of consecutive clean epochs of one state: samples
// [First, First+Count).
type run struct {
	State ingest.EyeState
	First int
	Count int
	Start float64
}

// cleanRuns joins clean epochs that follow each other without a gap (same
// state, next epoch starting at the sample after the last one ends).
func cleanRuns(eps []epoch, length int) []run {
	var out []run
	for _, e := range eps {
		if e.Reject != "" {
			continue
		}
		if n := len(out); n > 0 && out[n-1].State == e.State && out[n-1].First+out[n-1].Count == e.First {
			out[n-1].Count += length
			continue
		}
		out = append(out, run{State: e.State, First: e.First, Count: length, Start: e.Start})
	}
	return out
}
