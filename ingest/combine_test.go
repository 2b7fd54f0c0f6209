package ingest_test

import (
	"bytes"
	"errors"
	"slices"
	"strings"
	"testing"

	"longwave/ingest"
	"longwave/ingest/synth"
)

// run writes a synthetic run without annotations of its own and decodes it.
func run(t *testing.T, name string, edit func(*synth.Spec)) *ingest.Recording {
	t.Helper()
	s := synth.Default()
	s.Format = ingest.FormatEDF
	s.Periods = nil
	s.Duration = 20
	edit(&s)
	b, err := synth.Bytes(s)
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	rec, err := ingest.Decode(bytes.NewReader(b), int64(len(b)), name, ingest.Options{})
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	return rec
}

func TestCombine(t *testing.T) {
	closed := run(t, "closed.edf", func(s *synth.Spec) {
		s.Seed = 1
		s.Duration = 30
		s.Prefilter = "HP:0.5Hz LP:70Hz"
		*s = s.WithoutChannels("O2")
	})
	open := run(t, "open.edf", func(s *synth.Spec) {
		s.Seed = 2
		s.Duration = 20
		s.UVPerStep = 0.5
		s.Prefilter = "HP:0.1Hz LP:35Hz"
		s.Channels = append(s.Channels, "Oz")
	})
	closed.Conditions.Cautions = append(closed.Conditions.Cautions, ingest.Caution{Code: "c1", Text: "from the closed run"})
	open.Conditions.Cautions = append(open.Conditions.Cautions, ingest.Caution{Code: "o1", Text: "from the open run"})
	closed.Channel("Fp1").Bad = true
	closedO1 := slices.Clone(closed.Channel("O1").Samples)

	rec, err := ingest.Combine(closed, open)
	if err != nil {
		t.Fatal(err)
	}
	// Channels: the 18 both have, in the closed run's order.
	var labels []string
	for _, ch := range rec.Channels {
		labels = append(labels, ch.Label)
	}
	want := slices.DeleteFunc(slices.Clone(ingest.Standard19[:]), func(l string) bool { return l == "O2" })
	if !slices.Equal(labels, want) {
		t.Errorf("channels %v, want %v", labels, want)
	}
	n1, n2 := 30*250, 20*250
	for _, l := range []string{"Fp1", "O1", "T8"} {
		got := rec.Channel(l).Samples
		if len(got) != n1+n2 ||
			!slices.Equal(got[:n1], closed.Channel(l).Samples) || !slices.Equal(got[n1:], open.Channel(l).Samples) {
			t.Errorf("%s: samples are not the closed run's followed by the open run's", l)
		}
	}
	if !rec.Channel("Fp1").Bad {
		t.Error("Fp1 marked bad in the closed run is not bad in the combination")
	}
	if !slices.Equal(closed.Channel("O1").Samples, closedO1) || len(closed.Channels) != 18 {
		t.Error("Combine modified its input")
	}
	wantSeg := []ingest.Segment{{Onset: 0, First: 0, Count: n1}, {Onset: 30, First: n1, Count: n2}}
	if !slices.Equal(rec.Segments, wantSeg) {
		t.Errorf("segments %v, want %v", rec.Segments, wantSeg)
	}
	wantPer := []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 30}, {State: ingest.EyesOpen, Start: 30, End: 50}}
	if !slices.Equal(rec.Periods, wantPer) {
		t.Errorf("periods %v, want %v", rec.Periods, wantPer)
	}
	c := rec.Conditions
	if c.Format != ingest.FormatCombined || c.PeriodSource != ingest.FromRuns {
		t.Errorf("format %q, period source %q", c.Format, c.PeriodSource)
	}
	if c.SampleRate != 250 || c.Duration != 50 {
		t.Errorf("rate %v Hz, duration %v s; want 250 Hz, 50 s (both runs)", c.SampleRate, c.Duration)
	}
	if c.UVPerStep != 0.5 || c.Bits != 16 {
		t.Errorf("resolution %v µV/step, %d bits; want the coarser run's 0.5 µV, 16 bits", c.UVPerStep, c.Bits)
	}
	if !slices.Equal(c.ChannelsMissing, []string{"O2"}) || !slices.Equal(c.BadChannels, []string{"Fp1"}) {
		t.Errorf("missing %v, bad %v; want [O2], [Fp1]", c.ChannelsMissing, c.BadChannels)
	}
	if !c.Filters.HighPass.Known || c.Filters.HighPass.Hz != 0.5 || !c.Filters.LowPass.Known || c.Filters.LowPass.Hz != 35 {
		t.Errorf("filters %+v, want the stricter HP 0.5 Hz and LP 35 Hz", c.Filters)
	}
	codes := map[string]string{}
	for _, k := range c.Cautions {
		codes[k.Code] = k.Text
	}
	for _, code := range []string{"c1", "o1", "run_channels_dropped", "runs_filters_differ"} {
		if _, ok := codes[code]; !ok {
			t.Errorf("caution %q missing from %v", code, c.Cautions)
		}
	}
	if d := codes["run_channels_dropped"]; !strings.Contains(d, "O2") || !strings.Contains(d, "Oz") {
		t.Errorf("dropped-channel caution %q does not name O2 and Oz", d)
	}
}

func TestCombineRefuses(t *testing.T) {
	at250 := run(t, "a.edf", func(s *synth.Spec) {})
	at500 := run(t, "b.edf", func(s *synth.Spec) { s.SampleRate = 500 })
	frontal := run(t, "c.edf", func(s *synth.Spec) { s.Channels = []string{"Fp1", "Fp2"} })
	posterior := run(t, "d.edf", func(s *synth.Spec) { s.Channels = []string{"O1", "O2"} })
	tests := []struct {
		name         string
		closed, open *ingest.Recording
		wantText     []string
	}{
		{"different rates", at250, at500, []string{"250 Hz", "500 Hz", "a.edf", "b.edf"}},
		{"no common channel", frontal, posterior, []string{"no channel in common"}},
		{"missing run", at250, nil, []string{"missing"}},
	}
	for _, tt := range tests {
		_, err := ingest.Combine(tt.closed, tt.open)
		if !errors.Is(err, ingest.ErrRunsDiffer) {
			t.Errorf("%s: error %v, want ErrRunsDiffer", tt.name, err)
			continue
		}
		for _, w := range tt.wantText {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%s: error %q does not say %q", tt.name, err, w)
			}
		}
	}
}
