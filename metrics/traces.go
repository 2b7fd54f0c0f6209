package metrics

import (
	"errors"
	"fmt"
	"math"
	"slices"

	"longwave/ingest"
)

// Montages of the trace viewer.
const (
	// MontageAverage shows every EEG channel against the common average of
	// the good channels of the 19 positions (the analysis' own reference).
	MontageAverage = "average"
	// MontageBipolar shows the longitudinal bipolar chains of BipolarPairs.
	MontageBipolar = "bipolar"
)

// BipolarPairs are the derivations of the longitudinal bipolar montage of
// the 10-20 system, in 10-10 names, chain by chain from left to right: left
// temporal, left parasagittal, midline, right parasagittal, right temporal
// (common practice: the anterior-to-posterior chains every EEG laboratory
// reads; the chains and the order of electrodes within a chain as in ACNS
// Guideline 3 (2016), the order of the chains ours). Each pair is shown as
// the first channel minus the second.
var BipolarPairs = [][2]string{
	{"Fp1", "F7"}, {"F7", "T7"}, {"T7", "P7"}, {"P7", "O1"},
	{"Fp1", "F3"}, {"F3", "C3"}, {"C3", "P3"}, {"P3", "O1"},
	{"Fz", "Cz"}, {"Cz", "Pz"},
	{"Fp2", "F4"}, {"F4", "C4"}, {"C4", "P4"}, {"P4", "O2"},
	{"Fp2", "F8"}, {"F8", "T8"}, {"T8", "P8"}, {"P8", "O2"},
}

// ErrTracePage: a page request the source cannot answer (unknown montage,
// a time range outside the recording).
var ErrTracePage = errors.New("metrics: trace page")

// TraceSource is one recording prepared for paging through its EEG: every
// EEG channel at the EEG rate both as recorded and as analysed. "As
// analysed" is exactly Compute's signal for the channels of the 19
// positions (low-pass, decimation to the analysis rate, high-pass and notch
// segment by segment, zero-phase, then the common average of the good
// channels, re-referenced when a channel fails the artefact rules on its
// own); other EEG channels at the EEG rate (A1, Oz, …) get the same filters
// and the same reference but never join the average. The source is built
// once (NewTraceSource) and then read by many Page calls; it is safe for
// concurrent use after construction.
type TraceSource struct {
	labels []string // the 19 positions present, in Standard19 order, then the others
	good   []bool   // in the reference (the 19 only)
	raw    [][]float32
	fil    [][]float32
	rawFs  float64
	filFs  float64
	segsIn []ingest.Segment
	segs   []ingest.Segment
	// Periods are the eye-state periods the analysis used (sorted,
	// clipped, joined; one "unknown" period when the recording has none).
	Periods []ingest.Period
	// Windows are the analysis windows with the artefact rules' decision
	// on each, as Compute makes them.
	Windows []Window
	// Duration is the recording time covered, s (gaps of EDF+D included).
	Duration float64
}

// NewTraceSource analyses rec under s as Compute does and keeps both the
// recorded and the analysed EEG for paging. Like Compute it works in the
// samples of rec's EEG channels (their contents are overwritten); the
// recorded samples it keeps are its own copy. Memory: 4 bytes per recorded
// sample plus 4 per analysed sample, for every EEG channel at the EEG rate.
func NewTraceSource(rec *ingest.Recording, s Settings) (*TraceSource, error) {
	if rec == nil {
		return nil, fmt.Errorf("%w: no recording", ErrNoChannels)
	}
	a, err := prepare(rec, s)
	if err != nil {
		return nil, err
	}
	// The other EEG channels at the EEG rate and at least the analysed length.
	var extra []*ingest.Channel
	for i := range rec.Channels {
		ch := &rec.Channels[i]
		if ch.Kind != ingest.KindEEG || slices.Contains(s.Channels, ch.Label) || slices.Contains(a.names, ch.Label) ||
			math.Abs(ch.SampleRate-a.fsIn) > 1e-9*a.fsIn || len(ch.Samples) < a.nIn {
			continue
		}
		extra = append(extra, ch)
	}
	t := &TraceSource{rawFs: a.fsIn, filFs: a.fs, segsIn: a.segsIn, segs: a.segs}
	for c := range a.data {
		t.raw = append(t.raw, slices.Clone(a.data[c]))
	}
	for _, ch := range extra {
		t.raw = append(t.raw, slices.Clone(ch.Samples[:a.nIn]))
	}
	if err := a.filter(rec); err != nil {
		return nil, err
	}
	a.markBadChannels()
	// The extra channels are filtered like the others and join a.data with
	// good = false before the first common average: they are referenced
	// with the rest (and again if epochs re-references) but never enter the
	// average, so the analysis of the 19 is Compute's.
	lenFast, lenSlow := a.workLens()
	work, work2 := make([]float64, lenFast), make([]float64, lenSlow)
	for _, ch := range extra {
		a.data = append(a.data, a.filterOne(ch.Samples[:a.nIn], work, work2))
		a.names = append(a.names, ch.Label)
		a.good = append(a.good, false)
	}
	commonAverage(a.data, a.good, a.n, a.workers)
	a.epochs(rec)
	t.labels, t.good, t.fil = a.names, a.good, a.data
	t.Periods = a.periods
	for _, e := range a.eps {
		t.Windows = append(t.Windows, Window{Start: e.Start, End: e.Start + float64(a.length)/a.fs,
			State: e.State, Kept: e.Reject == "", Reason: e.Reject})
	}
	for _, g := range a.segsIn {
		t.Duration = math.Max(t.Duration, g.Onset+float64(g.Count)/a.fsIn)
	}
	return t, nil
}

// Labels are the EEG channels of the average montage, in row order.
func (t *TraceSource) Labels() []string { return slices.Clone(t.labels) }

// Bytes is the memory the source holds in samples.
func (t *TraceSource) Bytes() int64 {
	var n int64
	for c := range t.raw {
		n += 4 * int64(len(t.raw[c])+len(t.fil[c]))
	}
	return n
}

// TracePage is one page of traces: Seconds of recording time from From, at
// Rate points per second, one row per channel or derivation. A sample is
// NaN where the recording has no data (a gap of an EDF+D file, past the
// end).
type TracePage struct {
	From, Seconds float64
	Rate          float64
	Montage       string
	Filtered      bool
	Channels      []PageChannel
}

// PageChannel is one row of a page: its label ("O1", or "Fp1–F7" for a
// derivation), whether the analysis left it (or one of its pair) out of the
// reference, and its samples in µV.
type PageChannel struct {
	Label   string
	Bad     bool
	Samples []float32
}

// Page returns the traces of [from, from+seconds) in montage, filtered (as
// analysed) or as recorded, with at most maxPoints points per row.
//
// As recorded, each row has its mean over the page removed (electrode
// offsets of tens of millivolts would otherwise hide the trace; display
// only). The bipolar rows of either kind are the difference of the two
// channels (the common reference cancels). Rows longer than maxPoints are
// reduced to the minimum and maximum of each of maxPoints/2 equal bins, in
// the order they occur, so a spike survives the reduction (an envelope
// reduction, common practice for drawing long signals; a bin of two samples
// gives them back unchanged); Rate is then the number of points per second
// after reduction.
func (t *TraceSource) Page(from, seconds float64, montage string, filtered bool, maxPoints int) (TracePage, error) {
	if !(seconds > 0) || math.IsInf(seconds, 0) || !(from >= 0) || from >= t.Duration || math.IsInf(from, 0) {
		return TracePage{}, fmt.Errorf("%w: %g s from %g s lies outside the recording (0 to %g s)", ErrTracePage, seconds, from, t.Duration)
	}
	if montage != MontageAverage && montage != MontageBipolar {
		return TracePage{}, fmt.Errorf("%w: unknown montage %q", ErrTracePage, montage)
	}
	maxPoints = max(maxPoints, 2)
	data, fs, segs := t.raw, t.rawFs, t.segsIn
	if filtered {
		data, fs, segs = t.fil, t.filFs, t.segs
	}
	n := int(math.Round(seconds * fs))
	rows := make([][]float32, len(data))
	cut := func(c int) []float32 {
		if rows[c] == nil {
			rows[c] = window(data[c], segs, fs, from, n)
		}
		return rows[c]
	}
	page := TracePage{From: from, Seconds: seconds, Rate: fs, Montage: montage, Filtered: filtered}
	switch montage {
	case MontageAverage:
		if !filtered {
			// The recorded channels against the average of the good 19.
			var mean []float64
			k := 0
			for c, ok := range t.good {
				if !ok {
					continue
				}
				if mean == nil {
					mean = make([]float64, n)
				}
				for i, v := range cut(c) {
					mean[i] += float64(v)
				}
				k++
			}
			for c := range data {
				row := slices.Clone(cut(c))
				for i := range row {
					if k > 0 {
						row[i] = float32(float64(row[i]) - mean[i]/float64(k))
					}
				}
				page.Channels = append(page.Channels, PageChannel{Label: t.labels[c], Bad: !t.good[c], Samples: row})
			}
		} else {
			for c := range data {
				page.Channels = append(page.Channels, PageChannel{Label: t.labels[c], Bad: !t.good[c], Samples: cut(c)})
			}
		}
	case MontageBipolar:
		for _, p := range BipolarPairs {
			i, j := slices.Index(t.labels, p[0]), slices.Index(t.labels, p[1])
			if i < 0 || j < 0 {
				continue
			}
			x, y := cut(i), cut(j)
			row := make([]float32, n)
			for k := range row {
				row[k] = x[k] - y[k]
			}
			page.Channels = append(page.Channels, PageChannel{Label: p[0] + "–" + p[1], Bad: !t.good[i] || !t.good[j], Samples: row})
		}
	}
	if !filtered {
		for _, ch := range page.Channels {
			removeMean(ch.Samples)
		}
	}
	if n > maxPoints {
		bins := maxPoints / 2
		for c := range page.Channels {
			page.Channels[c].Samples = envelope(page.Channels[c].Samples, bins)
		}
		page.Rate = float64(2*bins) / seconds
	}
	return page, nil
}

// window copies n samples of x (at fs, laid out in segs) from recording
// time from, NaN where no segment holds data.
func window(x []float32, segs []ingest.Segment, fs, from float64, n int) []float32 {
	out := make([]float32, n)
	for i := range out {
		out[i] = float32(math.NaN())
	}
	for _, g := range segs {
		// Output index i is time from + i/fs; segment sample k is time Onset + k/fs.
		off := int(math.Round((g.Onset - from) * fs)) // output index of the segment's sample 0
		lo, hi := max(0, off), min(n, off+g.Count)
		if lo >= hi {
			continue
		}
		copy(out[lo:hi], x[g.First+lo-off:g.First+hi-off])
	}
	return out
}

// removeMean subtracts the mean of the finite samples.
func removeMean(x []float32) {
	var sum float64
	k := 0
	for _, v := range x {
		if !math.IsNaN(float64(v)) {
			sum += float64(v)
			k++
		}
	}
	if k == 0 {
		return
	}
	m := sum / float64(k)
	for i, v := range x {
		x[i] = float32(float64(v) - m)
	}
}

// envelope reduces x to 2·bins points: the minimum and the maximum of each
// of bins equal parts of x, in the order they occur (NaN when a part holds
// no finite sample).
func envelope(x []float32, bins int) []float32 {
	out := make([]float32, 0, 2*bins)
	for b := 0; b < bins; b++ {
		lo, hi := b*len(x)/bins, (b+1)*len(x)/bins
		iMin, iMax := -1, -1
		for i := lo; i < hi; i++ {
			v := x[i]
			if math.IsNaN(float64(v)) {
				continue
			}
			if iMin < 0 || v < x[iMin] {
				iMin = i
			}
			if iMax < 0 || v > x[iMax] {
				iMax = i
			}
		}
		switch {
		case iMin < 0:
			nan := float32(math.NaN())
			out = append(out, nan, nan)
		case iMin <= iMax:
			out = append(out, x[iMin], x[iMax])
		default:
			out = append(out, x[iMax], x[iMin])
		}
	}
	return out
}
