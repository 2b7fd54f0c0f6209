package metrics

import (
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"longwave/ingest"
	"longwave/ingest/synth"
)

// traceSpec is a short recording with the 19 positions and two ear
// electrodes (EEG channels outside the 19).
func traceSpec() synth.Spec {
	s := synth.Default()
	s.Duration = 120
	s.Channels = append(append([]string(nil), ingest.Standard19[:]...), "A1", "A2")
	s.Periods = []ingest.Period{
		{State: ingest.EyesClosed, Start: 0, End: 60},
		{State: ingest.EyesOpen, Start: 60, End: 120},
	}
	return s
}

func mustTraceSource(tb testing.TB, spec synth.Spec) (*TraceSource, *Result, *ingest.Recording) {
	tb.Helper()
	rec := mustRecording(tb, spec, ingest.Options{})
	recorded := mustRecording(tb, spec, ingest.Options{})
	res := mustCompute(tb, mustRecording(tb, spec, ingest.Options{}))
	ts, err := NewTraceSource(rec, V1())
	if err != nil {
		tb.Fatalf("NewTraceSource: %v", err)
	}
	return ts, res, recorded
}

// TestTraceSourceIsTheAnalysis checks that the filtered average page is
// Compute's own signal: its posterior rows equal Compute's display excerpt
// sample for sample (the excerpt is a.data after referencing, at the
// analysis rate), and its windows are Compute's Quality.Windows.
func TestTraceSourceIsTheAnalysis(t *testing.T) {
	ts, res, _ := mustTraceSource(t, traceSpec())
	if !slices.Equal(ts.Windows, res.Quality.Windows) {
		t.Errorf("trace source windows differ from Compute's: %d vs %d", len(ts.Windows), len(res.Quality.Windows))
	}
	if len(res.Display.Traces) == 0 {
		t.Fatal("Compute made no display trace")
	}
	for _, tr := range res.Display.Traces {
		seconds := float64(len(tr.Samples)) / tr.Rate
		page, err := ts.Page(tr.Start, seconds, MontageAverage, true, 1<<20)
		if err != nil {
			t.Fatal(err)
		}
		if page.Rate != tr.Rate {
			t.Fatalf("page rate %g, display rate %g (the 125 Hz analysis rate is above 100 Hz: no decimation)", page.Rate, tr.Rate)
		}
		var row *PageChannel
		for i := range page.Channels {
			if page.Channels[i].Label == tr.Channel {
				row = &page.Channels[i]
			}
		}
		if row == nil {
			t.Fatalf("page has no row %s", tr.Channel)
		}
		if !slices.Equal(row.Samples, tr.Samples) {
			t.Errorf("%s %s: page samples differ from Compute's excerpt", tr.State, tr.Channel)
		}
	}
	page, _ := ts.Page(0, 10, MontageAverage, true, 1<<20)
	var labels []string
	for _, ch := range page.Channels {
		labels = append(labels, ch.Label)
	}
	want := append(append([]string(nil), ingest.Standard19[:]...), "A1", "A2")
	if !slices.Equal(labels, want) {
		t.Errorf("average rows %v, want the 19 in order then A1 A2", labels)
	}
	if !page.Channels[19].Bad || page.Channels[0].Bad {
		t.Errorf("A1 must be outside the reference (Bad), Fp1 inside: %v %v", page.Channels[19].Bad, page.Channels[0].Bad)
	}
}

// TestTracePageMontages checks the montages against their definitions on
// the recorded signal: the recorded average row is the recorded channel
// minus the mean of the good 19 at each sample, with its page mean removed
// (computed here independently in float64 from a second decode of the
// file); a bipolar row is the difference of its two channels.
func TestTracePageMontages(t *testing.T) {
	ts, _, recorded := mustTraceSource(t, traceSpec())
	const from, seconds = 20.0, 10.0
	fs := recorded.Conditions.SampleRate
	i0, n := int(from*fs), int(seconds*fs)
	mean := make([]float64, n)
	for _, name := range ingest.Standard19 {
		for i := range mean {
			mean[i] += float64(recorded.Channel(name).Samples[i0+i]) / 19
		}
	}
	want := func(label string) []float64 {
		x := make([]float64, n)
		m := 0.0
		for i := range x {
			x[i] = float64(recorded.Channel(label).Samples[i0+i]) - mean[i]
			m += x[i] / float64(n)
		}
		for i := range x {
			x[i] -= m
		}
		return x
	}
	raw, err := ts.Page(from, seconds, MontageAverage, false, 1<<20)
	if err != nil {
		t.Fatal(err)
	}
	// float32 samples of tens of µV: 1e-3 µV is far below a display pixel
	// and above float32 rounding of the sums.
	const tol = 1e-3
	for _, ch := range raw.Channels {
		w := want(ch.Label)
		for i, v := range ch.Samples {
			if math.Abs(float64(v)-w[i]) > tol {
				t.Fatalf("recorded average %s[%d] = %g, want %g", ch.Label, i, v, w[i])
			}
		}
	}
	for _, filtered := range []bool{false, true} {
		avg, _ := ts.Page(from, seconds, MontageAverage, filtered, 1<<20)
		bip, err := ts.Page(from, seconds, MontageBipolar, filtered, 1<<20)
		if err != nil {
			t.Fatal(err)
		}
		if len(bip.Channels) != len(BipolarPairs) {
			t.Fatalf("bipolar page has %d rows, want %d", len(bip.Channels), len(BipolarPairs))
		}
		rows := map[string][]float32{}
		for _, ch := range avg.Channels {
			rows[ch.Label] = ch.Samples
		}
		for k, ch := range bip.Channels {
			p := BipolarPairs[k]
			if ch.Label != p[0]+"–"+p[1] {
				t.Errorf("bipolar row %d is %q", k, ch.Label)
			}
			x, y := rows[p[0]], rows[p[1]]
			for i, v := range ch.Samples {
				// As recorded, both rows had their page means removed: so has their difference.
				if math.Abs(float64(v)-float64(x[i]-y[i])) > tol {
					t.Fatalf("filtered=%v %s[%d] = %g, want %g", filtered, ch.Label, i, v, x[i]-y[i])
				}
			}
		}
	}
}

// TestTracePageReduction checks the envelope reduction: a page longer than
// maxPoints keeps each bin's extremes, so a one-sample spike survives.
func TestTracePageReduction(t *testing.T) {
	for _, tc := range []struct {
		name string
		in   []float32
		bins int
		want []float32
	}{
		{"pairs unchanged", []float32{1, 2, 4, 3}, 2, []float32{1, 2, 4, 3}},
		{"order kept", []float32{5, 1, 0, 9, 2, 7}, 2, []float32{5, 0, 9, 2}},
		{"spike kept", []float32{0, 0, 0, 80, 0, 0, 0, 0}, 2, []float32{0, 80, 0, 0}},
		{"empty bin", []float32{float32(math.NaN()), float32(math.NaN()), 1, 2}, 2, []float32{float32(math.NaN()), float32(math.NaN()), 1, 2}},
	} {
		got := envelope(tc.in, tc.bins)
		same := len(got) == len(tc.want)
		for i := 0; same && i < len(got); i++ {
			same = got[i] == tc.want[i] || math.IsNaN(float64(got[i])) && math.IsNaN(float64(tc.want[i]))
		}
		if !same {
			t.Errorf("%s: envelope(%v, %d) = %v, want %v", tc.name, tc.in, tc.bins, got, tc.want)
		}
	}
	ts, _, _ := mustTraceSource(t, traceSpec())
	page, err := ts.Page(0, 30, MontageAverage, false, 1000)
	if err != nil {
		t.Fatal(err)
	}
	for _, ch := range page.Channels {
		if len(ch.Samples) != 1000 {
			t.Fatalf("%s: %d points, want 1000", ch.Label, len(ch.Samples))
		}
	}
	if page.Rate != 1000.0/30 {
		t.Errorf("reduced rate %g, want %g points per second", page.Rate, 1000.0/30)
	}
}

// TestTracePageGap checks that a gap between two segments (EDF+D) and the
// time past the end read as NaN, and the data after the gap sits at its
// onset.
func TestTracePageGap(t *testing.T) {
	spec := traceSpec()
	rec := mustRecording(t, spec, ingest.Options{})
	fs := rec.Conditions.SampleRate
	half := int(60 * fs)
	total := len(rec.Channels[0].Samples)
	// Second block starts 5 s after the end of the first.
	rec.Segments = []ingest.Segment{{Onset: 0, First: 0, Count: half}, {Onset: 65, First: half, Count: total - half}}
	rec.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 60}, {State: ingest.EyesOpen, Start: 65, End: 125}}
	ts, err := NewTraceSource(rec, V1())
	if err != nil {
		t.Fatal(err)
	}
	if ts.Duration != 125 {
		t.Errorf("duration %g, want 125 s (gap included)", ts.Duration)
	}
	for _, filtered := range []bool{false, true} {
		page, err := ts.Page(58, 10, MontageAverage, filtered, 1<<20)
		if err != nil {
			t.Fatal(err)
		}
		x := page.Channels[17].Samples // O1
		at := func(sec float64) float32 { return x[int(math.Round((sec-58)*page.Rate))] }
		if math.IsNaN(float64(at(59))) || !math.IsNaN(float64(at(62))) || math.IsNaN(float64(at(66))) {
			t.Errorf("filtered=%v: at 59 s %g, 62 s %g (want NaN), 66 s %g", filtered, at(59), at(62), at(66))
		}
	}
	page, _ := ts.Page(120, 10, MontageBipolar, true, 1<<20)
	if v := page.Channels[0].Samples[len(page.Channels[0].Samples)-1]; !math.IsNaN(float64(v)) {
		t.Errorf("past the end: %g, want NaN", v)
	}
}

func TestTracePageErrors(t *testing.T) {
	ts, _, _ := mustTraceSource(t, traceSpec())
	for _, tc := range []struct {
		from, seconds float64
		montage       string
	}{
		{-1, 10, MontageAverage},
		{120, 10, MontageAverage},
		{math.NaN(), 10, MontageAverage},
		{0, 0, MontageAverage},
		{0, math.Inf(1), MontageAverage},
		{0, 10, "transverse"},
	} {
		if _, err := ts.Page(tc.from, tc.seconds, tc.montage, true, 100); !errors.Is(err, ErrTracePage) {
			t.Errorf("Page(%g, %g, %q): error %v, want ErrTracePage", tc.from, tc.seconds, tc.montage, err)
		}
	}
}

// BenchmarkTracePage pages through the yardstick recording (30 min, 21
// channels, 500 Hz): 10 s pages, each montage and kind in turn.
func BenchmarkTracePage(b *testing.B) {
	ts, err := NewTraceSource(decodeBench(b, benchFile(b, 30)), V1())
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		from := float64((i * 10) % 1790)
		if _, err := ts.Page(from, 10, []string{MontageAverage, MontageBipolar}[i%2], i%4 < 2, 2000); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkNewTraceSource is the one-off cost of a visit's first page.
func BenchmarkNewTraceSource(b *testing.B) {
	file := benchFile(b, 30)
	for i := 0; i < b.N; i++ {
		b.StopTimer()
		rec := decodeBench(b, file)
		b.StartTimer()
		if _, err := NewTraceSource(rec, V1()); err != nil {
			b.Fatal(err)
		}
	}
}

// mneGolden is the part of testdata/ingest/mne/<file>.json (made by
// testdata/ingest/mne/make_golden.py with MNE-Python's EDF reader) this
// test reads: per channel, values at a few sample indices and the sum
// over the whole recording, in µV.
type mneGolden struct {
	NTimes   int     `json:"n_times"`
	SFreq    float64 `json:"sfreq"`
	Channels []struct {
		Name    string    `json:"name"`
		Indices []int     `json:"indices"`
		Values  []float64 `json:"values"`
		Sum     float64   `json:"sum"`
	} `json:"channels"`
}

// TestTracePageAgainstMNE checks the recorded pages of a real clinical
// recording (../shared/data/mne-testing-data/MB0400FU.EDF: the 19
// positions and two ear electrodes at 200 Hz) against MNE-Python's reading
// of the same file: over a page holding the whole recording, the
// longitudinal bipolar row a–b at sample i is a[i] − b[i] minus the mean of
// a − b, and the common-average row of c is c[i] − mean of the good 19 at
// i, minus its own mean, all computed here from MNE's values and sums.
func TestTracePageAgainstMNE(t *testing.T) {
	path := filepath.Join(sharedData(t, "mne-testing-data"), "MB0400FU.EDF")
	raw, err := os.ReadFile(filepath.Join(moduleRoot(t), "testdata", "ingest", "mne", "MB0400FU.EDF.json"))
	if err != nil {
		t.Fatal(err)
	}
	var g mneGolden
	if err := json.Unmarshal(raw, &g); err != nil {
		t.Fatal(err)
	}
	rec, err := ingest.ReadFile(path, ingest.Options{})
	if err != nil {
		t.Fatal(err)
	}
	ts, err := NewTraceSource(rec, V1())
	if err != nil {
		t.Fatal(err)
	}
	byLabel := map[string]int{}
	for i, ch := range g.Channels {
		if name, _, kind, ok := ingest.NormalizeLabel(ch.Name, ""); ok && kind == ingest.KindEEG {
			byLabel[name] = i
		}
	}
	n := float64(g.NTimes)
	seconds := n / g.SFreq
	// float32 samples of up to a few hundred µV carry about 3e-5 µV of
	// rounding each; sums over 5,800 samples and MNE's float64 leave far
	// less than this display tolerance.
	const tol = 0.01
	bip, err := ts.Page(0, seconds, MontageBipolar, false, 1<<30)
	if err != nil {
		t.Fatal(err)
	}
	if len(bip.Channels) != len(BipolarPairs) {
		t.Fatalf("%d bipolar rows, want %d", len(bip.Channels), len(BipolarPairs))
	}
	for k, row := range bip.Channels {
		a, b := g.Channels[byLabel[BipolarPairs[k][0]]], g.Channels[byLabel[BipolarPairs[k][1]]]
		mean := (a.Sum - b.Sum) / n
		for j, i := range a.Indices {
			want := a.Values[j] - b.Values[j] - mean
			if got := float64(row.Samples[i]); math.Abs(got-want) > tol {
				t.Errorf("%s[%d] = %.4f µV, MNE gives %.4f", row.Label, i, got, want)
			}
		}
	}
	avg, err := ts.Page(0, seconds, MontageAverage, false, 1<<30)
	if err != nil {
		t.Fatal(err)
	}
	var good []int // golden indices of the channels in the average
	for _, row := range avg.Channels {
		if !row.Bad {
			good = append(good, byLabel[row.Label])
		}
	}
	if len(good) < 15 {
		t.Fatalf("only %d channels in the average", len(good))
	}
	sumGood := 0.0
	for _, c := range good {
		sumGood += g.Channels[c].Sum
	}
	for _, row := range avg.Channels {
		c := g.Channels[byLabel[row.Label]]
		mean := (c.Sum - sumGood/float64(len(good))) / n
		for j, i := range c.Indices {
			ref := 0.0
			for _, gc := range good {
				ref += g.Channels[gc].Values[j] / float64(len(good))
			}
			want := c.Values[j] - ref - mean
			if got := float64(row.Samples[i]); math.Abs(got-want) > tol {
				t.Errorf("average %s[%d] = %.4f µV, MNE gives %.4f", row.Label, i, got, want)
			}
		}
	}
	var labels []string
	for _, row := range avg.Channels {
		labels = append(labels, row.Label)
	}
	if !slices.Contains(labels, "A1") || !slices.Contains(labels, "A2") || len(labels) != 21 {
		t.Errorf("average rows %q, want the 19 and the two ear electrodes", labels)
	}
}
