package synth

import (
	"bytes"
	"errors"
	"math"
	"slices"
	"testing"

	"longwave/ingest"
)

// blinkSpec is a 60-s recording with many large blinks and no muscle.
func blinkSpec(seed uint64) Spec {
	s := Default()
	s.Seed = seed
	s.Duration = 60
	s.BlinksPerMinute = 30
	s.BlinkMinUV, s.BlinkMaxUV = 150, 450
	s.MuscleBurstsPerMinute = 0
	return s
}

// difference returns a − b in µV for one channel of two renderings of the
// same layout.
func difference(a, b *Rendering, ch string) []float64 {
	ia, ib := slices.Index(a.Channels, ch), slices.Index(b.Channels, ch)
	out := make([]float64, len(a.Digital[ia]))
	for i := range out {
		out[i] = a.Gain * float64(a.Digital[ia][i]-b.Digital[ib][i])
	}
	return out
}

// renderBoth renders s, and s changed by drop (an artefact switched off).
func renderBoth(t *testing.T, s Spec, drop func(*Spec)) (with, without *Rendering) {
	t.Helper()
	with, err := Render(s)
	if err != nil {
		t.Fatal(err)
	}
	drop(&s)
	without, err = Render(s)
	if err != nil {
		t.Fatal(err)
	}
	return with, without
}

// differenceNorm is the Euclidean norm of one channel's difference, µV.
func differenceNorm(a, b *Rendering, ch string) float64 {
	e := 0.0
	for _, v := range difference(a, b, ch) {
		e += v * v
	}
	return math.Sqrt(e)
}

// bumps splits x into its runs of non-zero samples, as [start, end) pairs.
func bumps(x []float64) [][2]int {
	var out [][2]int
	for i := 0; i < len(x); {
		if x[i] == 0 {
			i++
			continue
		}
		j := i
		for j < len(x) && x[j] != 0 {
			j++
		}
		out = append(out, [2]int{i, j})
		i = j
	}
	return out
}

// TestBlinksAreAdditive checks the promise of Spec.BlinksPerMinute: the
// recording without blinks is the recording with them minus the blink
// waveform, sample for sample, and the file of the same seed with blinks
// off is the same file every time. The blinks seen in the difference have
// the spec's amplitude range at Fp1/Fp2, 0.2–0.4 s length, one sign, and
// the model's falling weights towards the back of the head.
func TestBlinksAreAdditive(t *testing.T) {
	s := blinkSpec(7)
	withBlinks, without := renderBoth(t, s, func(s *Spec) { s.BlinksPerMinute = 0 })
	off := s
	off.BlinksPerMinute = 0
	// Off with other amplitude fields is still the same blink-free file.
	off2 := off
	off2.BlinkMinUV, off2.BlinkMaxUV = 0, 0
	a, err := Bytes(off)
	if err != nil {
		t.Fatal(err)
	}
	b, err := Bytes(off2)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(a, b) {
		t.Error("blink-free files of one seed differ with the blink amplitude fields")
	}

	fp1 := difference(withBlinks, without, "Fp1")
	// The drawn blinks: the spec's ranges, and together exactly the
	// difference at Fp1 (to the quantisation of the two files).
	events := blinkEvents(len(fp1), s.SampleRate, s, newRand(s.Seed, streamBlinks))
	if len(events) < 15 || len(events) > 50 {
		t.Errorf("%d blinks in 60 s at 30 a minute (Poisson, mean 30)", len(events))
	}
	train := make([]float64, len(fp1))
	for _, b := range events {
		if sec := float64(b.length) / s.SampleRate; sec < blinkMinSeconds-1/s.SampleRate || sec > blinkMaxSeconds {
			t.Errorf("blink at sample %d lasts %.3f s, want 0.2–0.4 s", b.start, sec)
		}
		if b.peak < s.BlinkMinUV || b.peak > s.BlinkMaxUV {
			t.Errorf("blink at sample %d peaks at %.1f µV, want %v–%v", b.start, b.peak, s.BlinkMinUV, s.BlinkMaxUV)
		}
		for j := 0; j < b.length && b.start+j < len(train); j++ {
			train[b.start+j] += b.peak * 0.5 * (1 - math.Cos(2*math.Pi*float64(j)/float64(b.length)))
		}
	}
	for i := range fp1 {
		if math.Abs(fp1[i]-train[i]) > withBlinks.Gain {
			t.Fatalf("Fp1 with − without blinks at sample %d: %.2f µV, blink train %.2f µV", i, fp1[i], train[i])
		}
		if fp1[i] < -withBlinks.Gain {
			t.Fatalf("blink difference %.2f µV at sample %d: blinks are positive", fp1[i], i)
		}
	}
	// Outside blinks the two files are identical; the weights fall from the
	// front to the back.
	for _, ch := range s.Channels {
		d := difference(withBlinks, without, ch)
		for i, v := range d {
			if v != 0 && fp1[i] == 0 {
				t.Fatalf("%s differs at sample %d, outside every blink", ch, i)
			}
		}
	}
	ref := differenceNorm(withBlinks, without, "Fp1")
	for _, w := range []struct {
		ch     string
		weight float64
	}{{"Fp2", 1}, {"F7", 0.5}, {"Fz", 0.45}, {"Cz", 0.12}, {"Pz", 0.05}, {"O1", 0.03}} {
		// Quantisation adds at most half a step per sample to each side.
		if got := differenceNorm(withBlinks, without, w.ch) / ref; math.Abs(got-w.weight) > 0.01 {
			t.Errorf("%s blink size %.3f of Fp1's, want %.2f", w.ch, got, w.weight)
		}
	}
}

// TestMuscleBursts checks the muscle fields: bursts add only where they
// are, strongest at T7/T8, with their power above 20 Hz and their RMS in the
// spec's range; switching them off leaves the rest of the file as it was.
func TestMuscleBursts(t *testing.T) {
	s := Default()
	s.Duration = 60
	s.BlinksPerMinute = 0
	s.MuscleBurstsPerMinute = 12
	s.MuscleMinUV, s.MuscleMaxUV = 20, 40
	s.MuscleMinSeconds, s.MuscleMaxSeconds = 1, 2
	with, without := renderBoth(t, s, func(s *Spec) { s.MuscleBurstsPerMinute = 0 })
	t7 := difference(with, without, "T7")
	runs := bumps(t7)
	if len(runs) < 4 {
		t.Fatalf("%d muscle bursts at T7 in 60 s at 12 a minute", len(runs))
	}
	for _, r := range runs {
		// Bursts are ≥ 1 s long; a zero crossing that lands on a quantum
		// may split one, so check only the longest runs' sizes.
		if float64(r[1]-r[0])/s.SampleRate < 0.5 {
			continue
		}
		if sec := float64(r[1]-r[0]) / s.SampleRate; sec > 2*s.MuscleMaxSeconds+0.01 {
			t.Errorf("burst run of %.2f s: longer than two bursts", sec)
		}
	}
	// The band: almost all of the burst power above 20 Hz.
	bands := periodogramBandPower(t7, s.SampleRate, [][2]float64{{0.5, 18}, {20, 80}})
	if share := bands[1] / (bands[0] + bands[1]); share < 0.95 {
		t.Errorf("muscle power share above 20 Hz %.3f, want ≥ 0.95", share)
	}
	// RMS over the bursts: the Hann envelope's mean square is 3/8 of the
	// peak's, so the burst RMS lies within [√(3/8)·20, 40] µV give or take
	// the randomness of a short noise draw.
	var e float64
	var n int
	for _, r := range runs {
		for _, v := range t7[r[0]:r[1]] {
			e += v * v
			n++
		}
	}
	if rms := math.Sqrt(e / float64(n)); rms < 0.8*math.Sqrt(3.0/8)*s.MuscleMinUV || rms > 1.2*s.MuscleMaxUV {
		t.Errorf("muscle RMS at T7 %.1f µV over the bursts, spec %v–%v µV at the peak", rms, s.MuscleMinUV, s.MuscleMaxUV)
	}
	// Weights: F7 0.7, O1 0.2 of T7.
	for _, w := range []struct {
		ch     string
		weight float64
	}{{"T8", 1}, {"F7", 0.7}, {"O1", 0.2}, {"Pz", 0.1}} {
		if got := differenceNorm(with, without, w.ch) / differenceNorm(with, without, "T7"); math.Abs(got-w.weight) > 0.02 {
			t.Errorf("%s burst size %.3f of T7's, want %.2f", w.ch, got, w.weight)
		}
	}
}

// TestEOGChannels checks Spec.EOG: the decoder reads VEOG and HEOG as EOG
// channels, VEOG carries the blinks at 1.6 times Fp1's size, and adding EOG
// channels leaves every EEG channel's samples as they were.
func TestEOGChannels(t *testing.T) {
	for _, spelling := range []Spelling{SpellPlain, SpellTypedRef, SpellDotted} {
		s := blinkSpec(11)
		s.Duration = 30
		s.Spelling = spelling
		s.EOG = []string{"VEOG", "HEOG"}
		data, err := Bytes(s)
		if err != nil {
			t.Fatal(err)
		}
		rec, err := ingest.Decode(bytes.NewReader(data), int64(len(data)), "eog.edf", ingest.Options{})
		if err != nil {
			t.Fatalf("%s: decode: %v", spelling, err)
		}
		kinds := map[string]ingest.ChannelKind{}
		for _, c := range rec.Channels {
			kinds[c.Label] = c.Kind
		}
		for _, want := range []struct {
			label string
			kind  ingest.ChannelKind
		}{{"VEOG", ingest.KindEOG}, {"HEOG", ingest.KindEOG}, {"Fp1", ingest.KindEEG}} {
			if kinds[want.label] != want.kind {
				t.Errorf("%s: channel %s has kind %q, want %q (kinds %v)", spelling, want.label, kinds[want.label], want.kind, kinds)
			}
		}
	}

	s := blinkSpec(11)
	s.Duration = 30
	s.EOG = []string{"VEOG", "HEOG"}
	with, plain := renderBoth(t, s, func(s *Spec) { s.EOG = nil })
	for _, ch := range s.Channels {
		if !slices.Equal(plain.Digital[slices.Index(plain.Channels, ch)], with.Digital[slices.Index(with.Channels, ch)]) {
			t.Errorf("%s changed when EOG channels were added", ch)
		}
	}
	_, without := renderBoth(t, s, func(s *Spec) { s.BlinksPerMinute = 0 })
	fp1 := difference(with, without, "Fp1")
	for _, w := range []struct {
		ch     string
		weight float64
	}{{"VEOG", 1.6}, {"HEOG", 0.15}} {
		d := difference(with, without, w.ch)
		num, den := 0.0, 0.0
		for i := range d {
			num += d[i] * fp1[i]
			den += fp1[i] * fp1[i]
		}
		if got := num / den; math.Abs(got-w.weight) > 0.005 {
			t.Errorf("%s blink gain %.4f of Fp1, want %v", w.ch, got, w.weight)
		}
	}
}

func TestArtefactSpecErrors(t *testing.T) {
	tests := []struct {
		name string
		edit func(*Spec)
	}{
		{"unknown EOG label", func(s *Spec) { s.EOG = []string{"LOC"} }},
		{"EEG name as EOG", func(s *Spec) { s.EOG = []string{"Fp1"} }},
		{"repeated EOG", func(s *Spec) { s.EOG = []string{"VEOG", "VEOG"} }},
		{"blink range reversed", func(s *Spec) { s.BlinkMinUV, s.BlinkMaxUV = 300, 100 }},
		{"negative blink amplitude", func(s *Spec) { s.BlinkMinUV, s.BlinkMaxUV = -10, 100 }},
		{"infinite muscle amplitude", func(s *Spec) { s.MuscleMaxUV = math.Inf(1) }},
		{"muscle length reversed", func(s *Spec) { s.MuscleMinSeconds, s.MuscleMaxSeconds = 2, 1 }},
		{"NaN muscle length", func(s *Spec) { s.MuscleMinSeconds = math.NaN() }},
	}
	for _, tt := range tests {
		s := Default()
		s.Duration = 10
		tt.edit(&s)
		if _, err := Bytes(s); !errors.Is(err, ErrSpec) {
			t.Errorf("%s: error %v, want ErrSpec", tt.name, err)
		}
	}
}
