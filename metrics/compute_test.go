package metrics

import (
	"bytes"
	"encoding/json"
	"errors"
	"math"
	"strings"
	"testing"

	"longwave/ingest"
	"longwave/ingest/synth"
)

// allMarkerKeys are the markers every Result carries, computable or not.
func wantMarkerCount() int {
	return 5 + 2 + 2 + 3 + 4*len(relativeRegions) + 1 + 1 + 1
}

// checkMarkerShape: the full list, a unit on each, a reason exactly when not
// computable, no NaN or infinity anywhere.
func checkMarkerShape(t *testing.T, res *Result) {
	t.Helper()
	if len(res.Markers) != wantMarkerCount() {
		t.Errorf("%d markers, want %d", len(res.Markers), wantMarkerCount())
	}
	seen := map[string]bool{}
	for _, m := range res.Markers {
		if seen[m.Key()] {
			t.Errorf("marker %s twice", m.Key())
		}
		seen[m.Key()] = true
		if m.Unit == "" {
			t.Errorf("%s: no unit", m.Key())
		}
		if m.Computable == (m.Reason != "") {
			t.Errorf("%s: computable %v with reason %q", m.Key(), m.Computable, m.Reason)
		}
		if math.IsNaN(m.Value) || math.IsInf(m.Value, 0) || (!m.Computable && m.Value != 0) {
			t.Errorf("%s: value %v (computable %v)", m.Key(), m.Value, m.Computable)
		}
	}
	if _, err := json.Marshal(res); err != nil {
		t.Errorf("result does not encode as JSON: %v", err)
	}
}

func TestComputeDefaultRecording(t *testing.T) {
	s := synth.Default() // 10 Hz rhythm, 60 % attenuation, 50 Hz line noise
	res := mustCompute(t, mustRecording(t, s, ingest.Options{}))
	checkMarkerShape(t, res)
	if res.SettingsVersion != "1" || res.SettingsHash != V1().Hash() {
		t.Errorf("settings %s %s", res.SettingsVersion, res.SettingsHash)
	}
	q := res.Quality
	if q.LineFrequency != 50 || q.LineFrequencySource != LineFromSpectrum {
		t.Errorf("line %g Hz from %q, want 50 from the spectrum", q.LineFrequency, q.LineFrequencySource)
	}
	if len(q.UsedChannels) != 19 || len(q.BadChannels) != 0 {
		t.Errorf("used %v bad %v", q.UsedChannels, q.BadChannels)
	}
	if q.CleanSeconds[ingest.EyesClosed] < 100 || q.CleanSeconds[ingest.EyesOpen] < 60 {
		t.Errorf("clean seconds %v", q.CleanSeconds)
	}
	if !q.DrowsinessKnown || q.Drowsiness > 0.05 {
		t.Errorf("drowsiness %g (%v), want about 0 for an alert synthetic recording", q.Drowsiness, q.DrowsinessKnown)
	}
	for _, m := range res.Markers {
		if !m.Computable {
			t.Errorf("%s not computable: %s", m.Key(), m.Reason)
		}
	}
	// Display: a posterior spectrum per state over 1–45 Hz with its fit and
	// the peak of the closed state near 10 Hz; 10 s traces of the five
	// posterior channels per state at 125 Hz (250 Hz halved for analysis).
	if len(res.Display.Spectra) != 2 {
		t.Fatalf("%d display spectra, want 2", len(res.Display.Spectra))
	}
	for _, sp := range res.Display.Spectra {
		if sp.Freqs[0] != 1 || sp.Freqs[len(sp.Freqs)-1] != 45 || len(sp.Aperiodic) != len(sp.Freqs) || len(sp.Power) != len(sp.Freqs) {
			t.Errorf("%s spectrum: %g–%g Hz, %d power, %d fit values", sp.State, sp.Freqs[0], sp.Freqs[len(sp.Freqs)-1], len(sp.Power), len(sp.Aperiodic))
		}
		if sp.State == ingest.EyesClosed && math.Abs(sp.PeakHz-10) > 0.1 {
			t.Errorf("closed display peak at %g Hz", sp.PeakHz)
		}
	}
	if len(res.Display.Traces) != 10 {
		t.Errorf("%d traces, want 5 channels × 2 states", len(res.Display.Traces))
	}
	for _, tr := range res.Display.Traces {
		if tr.Rate != 125 || len(tr.Samples) != 1250 {
			t.Errorf("%s %s trace: %g Hz, %d samples; want 125 Hz, 1250", tr.State, tr.Channel, tr.Rate, len(tr.Samples))
		}
	}
}

func TestComputeUnknownState(t *testing.T) {
	s := shortSpec(21)
	s.Format = ingest.FormatEDF // no annotations: the eye state is unknown
	rec := mustRecording(t, s, ingest.Options{})
	res := mustCompute(t, rec)
	checkMarkerShape(t, res)
	pdr := marker(t, res, PDRFrequency, RegionPosterior, ingest.EyesUnknown)
	if !pdr.Computable || math.Abs(pdr.Value-10) > 0.1 {
		t.Errorf("PDR on the unknown state: %+v", pdr)
	}
	re := marker(t, res, AlphaReactivity, RegionPosterior, ingest.EyesOpen)
	if re.Computable || !strings.Contains(re.Reason, "unknown") {
		t.Errorf("reactivity with unknown state: %+v", re)
	}
	if _, ok := res.Marker(PDRFrequency, RegionPosterior, ingest.EyesClosed); ok {
		t.Error("a closed-state PDR was reported for a recording of unknown state")
	}
}

func TestComputeChannelProblems(t *testing.T) {
	s := shortSpec(22).WithoutChannels("O1")
	s.Flat = []string{"T8"}
	s.LineHz = 60
	res := mustCompute(t, mustRecording(t, s, ingest.Options{}))
	checkMarkerShape(t, res)
	left := marker(t, res, PDRLeft, RegionLeftOccipital, ingest.EyesClosed)
	if left.Computable || !strings.Contains(left.Reason, "O1") {
		t.Errorf("left PDR without O1: %+v", left)
	}
	asym := marker(t, res, PDRAsymmetry, RegionPosterior, ingest.EyesClosed)
	if asym.Computable {
		t.Errorf("asymmetry without O1: %+v", asym)
	}
	if pdr := marker(t, res, PDRFrequency, RegionPosterior, ingest.EyesClosed); !pdr.Computable {
		t.Errorf("posterior PDR from O2 P3 P4 Pz: %+v", pdr)
	}
	if got := strings.Join(res.Quality.BadChannels, " "); got != "T8" {
		t.Errorf("bad channels %q, want T8 (flat)", got)
	}
	if res.Quality.LineFrequency != 60 {
		t.Errorf("line %g Hz, want 60", res.Quality.LineFrequency)
	}
}

func TestComputeSidecarLineAndShortData(t *testing.T) {
	s := shortSpec(23)
	s.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 100}, {State: ingest.EyesOpen, Start: 100, End: 115}}
	rec := mustRecording(t, s, ingest.Options{})
	rec.Conditions.LineFrequency = 60 // as a BIDS sidecar would say
	res := mustCompute(t, rec)
	if res.Quality.LineFrequency != 60 || res.Quality.LineFrequencySource != LineFromSidecar {
		t.Errorf("line %g from %q, want the sidecar's 60", res.Quality.LineFrequency, res.Quality.LineFrequencySource)
	}
	re := marker(t, res, AlphaReactivity, RegionPosterior, ingest.EyesOpen)
	if re.Computable || !strings.Contains(re.Reason, "clean eyes-open data") {
		t.Errorf("reactivity with 13 s eyes open: %+v", re)
	}
}

func TestComputeDrowsiness(t *testing.T) {
	s := synth.Default()
	s.Seed = 24
	s.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 300}}
	s.Drowsiness = 0.3
	s.BlinksPerMinute, s.MuscleBurstsPerMinute = 0, 0
	res := mustCompute(t, mustRecording(t, s, ingest.Options{}))
	d := marker(t, res, DrowsinessIndex, RegionPosterior, ingest.EyesClosed)
	// synth drops the rhythm in 30 % of the closed 4 s stretches, on the
	// grid of our epochs; the index should find them.
	const tol = 0.05
	if !d.Computable || math.Abs(d.Value-0.3) > tol {
		t.Errorf("drowsiness index %+v, want 0.3 ± %g", d, tol)
	}
}

func TestComputeErrors(t *testing.T) {
	if _, err := Compute(nil, V1()); !errors.Is(err, ErrNoChannels) {
		t.Errorf("nil recording: %v", err)
	}
	dense := &ingest.Recording{Name: "dense.edf", Channels: []ingest.Channel{
		{Label: "PO7", Kind: ingest.KindEEG, SampleRate: 250, Samples: make([]float32, 5000)},
	}}
	dense.Conditions.SampleRate = 250
	if _, err := Compute(dense, V1()); !errors.Is(err, ErrNoChannels) || !strings.Contains(err.Error(), "dense.edf") {
		t.Errorf("no standard channel: %v", err)
	}
	s := shortSpec(26)
	s.SampleRate = 80
	s.LineHz, s.LineAmplitude = 0, 0
	if _, err := Compute(mustRecording(t, s, ingest.Options{}), V1()); !errors.Is(err, ErrSampleRate) {
		t.Errorf("80 Hz: %v", err)
	}
}

// TestComputeDeterministic: the same file gives byte-identical results,
// whatever the scheduling of the worker pool.
func TestComputeDeterministic(t *testing.T) {
	b, err := synth.Bytes(shortSpec(27))
	if err != nil {
		t.Fatal(err)
	}
	var first []byte
	for i := 0; i < 3; i++ {
		rec, err := ingest.Decode(bytes.NewReader(b), int64(len(b)), "x.edf", ingest.Options{})
		if err != nil {
			t.Fatal(err)
		}
		out, _ := json.Marshal(mustCompute(t, rec))
		if first == nil {
			first = out
		} else if !bytes.Equal(first, out) {
			t.Fatal("Compute gave different results for the same file")
		}
	}
}
