package ingest

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"math"
	"strings"
)

// ErrRunsDiffer is wrapped by Combine's refusals: two runs that cannot be
// joined into one visit recording.
var ErrRunsDiffer = errors.New("runs cannot be combined")

// Combine joins an eyes-closed and an eyes-open run of one visit into one
// Recording (Format "combined", PeriodSource FromRuns):
//
//   - Channels: those whose 10-10 Label both runs have, in the closed run's
//     order, each the closed run's samples followed by the open run's; the
//     others are dropped with a caution naming them. A channel whose rate
//     differs between the runs is dropped the same way. Metadata come from
//     the run with the coarser step (larger UVPerStep); Bad if either run
//     marks it bad.
//   - Segments: the closed run's, then the open run's shifted by the closed
//     run's end in time (last segment's onset + count/rate) and by its sample
//     count, so two segments for continuous runs.
//   - Periods: {closed, [0, d1)}, {open, [d1, d1+d2)} with d1, d2 the runs'
//     spans in seconds; the runs' own periods are replaced, their
//     recognised annotations kept (the open run's shifted by d1).
//   - Conditions: both cautions kept, each text prefixed with its run;
//     filters the stricter of the two known edges (higher high-pass, lower
//     low-pass; a caution when the runs differ); line frequency, reference
//     and equipment kept when they agree or one is empty, else a caution;
//     start time of day from the closed run; the derived fields (rate,
//     resolution — the coarser of the two —, duration — both summed —,
//     channels found) recomputed by FinishConditions.
//
// It refuses (ErrRunsDiffer) runs of different EEG sampling rates and runs
// with no channel in common. Neither input is modified.
func Combine(closed, open *Recording) (*Recording, error) {
	if closed == nil || open == nil {
		return nil, fmt.Errorf("ingest: combine: %w: a run is missing", ErrRunsDiffer)
	}
	names := closed.Name + " + " + open.Name
	fc, fo := closed.Conditions.SampleRate, open.Conditions.SampleRate
	if fc <= 0 || fo <= 0 {
		return nil, fmt.Errorf("ingest: combine %s: %w: a run has no EEG sampling rate", names, ErrRunsDiffer)
	}
	if fc != fo {
		return nil, fmt.Errorf("ingest: combine %s: %w: eyes-closed run at %g Hz, eyes-open run at %g Hz (different sampling rates)",
			names, ErrRunsDiffer, fc, fo)
	}
	fs := fc
	n1, d1 := runExtent(closed, fs)
	_, d2 := runExtent(open, fs)

	rec := &Recording{Name: names, SHA256: joinedDigest(closed.SHA256, open.SHA256)}
	var dropped []string
	for i := range closed.Channels {
		a := &closed.Channels[i]
		b := open.Channel(a.Label)
		if b == nil || a.SampleRate != b.SampleRate {
			dropped = append(dropped, a.Label)
			continue
		}
		ch := *a
		if b.UVPerStep > a.UVPerStep {
			ch = *b
			ch.Original = a.Original
		}
		ch.Bad = a.Bad || b.Bad
		ch.Samples = make([]float32, 0, len(a.Samples)+len(b.Samples))
		ch.Samples = append(append(ch.Samples, a.Samples...), b.Samples...)
		rec.Channels = append(rec.Channels, ch)
	}
	for i := range open.Channels {
		if closed.Channel(open.Channels[i].Label) == nil {
			dropped = append(dropped, open.Channels[i].Label)
		}
	}
	if len(rec.Channels) == 0 {
		return nil, fmt.Errorf("ingest: combine %s: %w: no channel in common", names, ErrRunsDiffer)
	}

	rec.Segments = append(rec.Segments, segmentsOf(closed, fs)...)
	for _, s := range segmentsOf(open, fs) {
		rec.Segments = append(rec.Segments, Segment{Onset: s.Onset + d1, First: s.First + n1, Count: s.Count})
	}
	rec.Periods = []Period{{State: EyesClosed, Start: 0, End: d1}, {State: EyesOpen, Start: d1, End: d1 + d2}}
	rec.Annotations = append(rec.Annotations, closed.Annotations...)
	for _, a := range open.Annotations {
		a.Onset += d1
		rec.Annotations = append(rec.Annotations, a)
	}

	cc, co := &closed.Conditions, &open.Conditions
	c := &rec.Conditions
	c.Format = FormatCombined
	c.PeriodSource = FromRuns
	c.StartTimeOfDay = cc.StartTimeOfDay
	for _, k := range cc.Cautions {
		c.Cautions = append(c.Cautions, Caution{Code: k.Code, Text: "eyes-closed run: " + k.Text})
	}
	for _, k := range co.Cautions {
		c.Cautions = append(c.Cautions, Caution{Code: k.Code, Text: "eyes-open run: " + k.Text})
	}
	if len(dropped) > 0 {
		c.Cautions = append(c.Cautions, Caution{Code: "run_channels_dropped",
			Text: fmt.Sprintf("channels not in both runs (or at different rates) left out: %s", strings.Join(dropped, ", "))})
	}
	c.Filters = stricterFilters(cc.Filters, co.Filters)
	if cc.Filters != co.Filters {
		c.Cautions = append(c.Cautions, Caution{Code: "runs_filters_differ",
			Text: fmt.Sprintf("hardware filters differ between the runs (closed %q, open %q); the stricter edges are kept", cc.Filters.Text, co.Filters.Text)})
	}
	var note string
	if c.LineFrequency, note = agree("line frequency", fmt.Sprint(cc.LineFrequency), fmt.Sprint(co.LineFrequency), cc.LineFrequency, co.LineFrequency); note != "" {
		c.Cautions = append(c.Cautions, Caution{Code: "runs_line_frequency_differ", Text: note})
	}
	if c.Reference, note = agreeText("reference", cc.Reference, co.Reference); note != "" {
		c.Cautions = append(c.Cautions, Caution{Code: "runs_reference_differ", Text: note})
	}
	if c.Equipment, note = agreeText("equipment", cc.Equipment, co.Equipment); note != "" {
		c.Cautions = append(c.Cautions, Caution{Code: "runs_equipment_differ", Text: note})
	}
	FinishConditions(rec)
	return rec, nil
}

// runExtent returns a run's EEG sample count (the longest channel at the
// EEG rate) and its span in seconds of recording time: the end of its last
// segment, or samples/rate when it has no segments.
func runExtent(r *Recording, fs float64) (samples int, seconds float64) {
	for i := range r.Channels {
		if ch := &r.Channels[i]; ch.SampleRate == fs {
			samples = max(samples, len(ch.Samples))
		}
	}
	seconds = float64(samples) / fs
	if n := len(r.Segments); n > 0 {
		last := r.Segments[n-1]
		seconds = math.Max(seconds, last.Onset+float64(last.Count)/fs)
	}
	return samples, seconds
}

// segmentsOf returns r's segments, or one segment over all its samples.
func segmentsOf(r *Recording, fs float64) []Segment {
	if len(r.Segments) > 0 {
		return r.Segments
	}
	n, _ := runExtent(r, fs)
	return []Segment{{Onset: 0, First: 0, Count: n}}
}

// stricterFilters keeps, edge by edge, the known value that removes more of
// the signal: the higher high-pass, the lower low-pass; a notch when either
// run has one (the closed run's when both do). An edge known in neither run
// stays unknown.
func stricterFilters(a, b Filters) Filters {
	out := Filters{Text: a.Text}
	if a.Text != b.Text {
		out.Text = "closed run: " + a.Text + "; open run: " + b.Text
	}
	pick := func(x, y Frequency, higher bool) Frequency {
		switch {
		case !x.Known:
			return y
		case !y.Known:
			return x
		case higher == (y.Hz > x.Hz):
			return y
		}
		return x
	}
	out.HighPass = pick(a.HighPass, b.HighPass, true)
	out.LowPass = pick(a.LowPass, b.LowPass, false)
	out.Notch = a.Notch
	if !a.Notch.Known {
		out.Notch = b.Notch
	}
	return out
}

// agree returns the runs' common value (or the one that is set); when both
// are set and differ, the closed run's value and a note.
func agree(what, ta, tb string, a, b float64) (float64, string) {
	switch {
	case a == b || b == 0:
		return a, ""
	case a == 0:
		return b, ""
	}
	return a, fmt.Sprintf("%s differs between the runs (closed %s, open %s); the closed run's is kept", what, ta, tb)
}

func agreeText(what, a, b string) (string, string) {
	switch {
	case a == b || b == "":
		return a, ""
	case a == "":
		return b, ""
	}
	return a, fmt.Sprintf("%s differs between the runs (closed %q, open %q); the closed run's is kept", what, a, b)
}

// joinedDigest is the SHA-256 of the two runs' digest texts in order
// (closed, open), "" when either is unknown.
func joinedDigest(closed, open string) string {
	if closed == "" || open == "" {
		return ""
	}
	sum := sha256.Sum256([]byte(closed + open))
	return hex.EncodeToString(sum[:])
}
