package synth

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/gonum/dsp/fourier"

	"longwave/ingest"
)

// quietSpec is Default without transient artefacts, one eye state over the
// whole recording, so that a full-length periodogram sees only the
// stationary model.
func quietSpec(seed uint64, state ingest.EyeState, seconds float64) Spec {
	s := Default()
	s.Seed = seed
	s.Duration = seconds
	s.BlinksPerMinute = 0
	s.MuscleBurstsPerMinute = 0
	s.Periods = []ingest.Period{{State: state, Start: 0, End: seconds}}
	return s
}

func TestSameSeedSameBytes(t *testing.T) {
	for _, f := range []ingest.Format{ingest.FormatEDF, ingest.FormatEDFPlusC, ingest.FormatBDF, ingest.FormatBDFPlusC} {
		s := Default()
		s.Format = f
		s.Duration = 30
		a, err := Bytes(s)
		if err != nil {
			t.Fatalf("%s: %v", f, err)
		}
		b, err := Bytes(s)
		if err != nil {
			t.Fatalf("%s: %v", f, err)
		}
		if !bytes.Equal(a, b) {
			t.Errorf("%s: two writes of the same spec differ", f)
		}
		s.Seed++
		c, err := Bytes(s)
		if err != nil {
			t.Fatalf("%s: %v", f, err)
		}
		if len(c) != len(a) {
			t.Errorf("%s: seed changes the file size: %d, want %d", f, len(c), len(a))
		}
		hdr := 256 * (len(s.Channels) + 2)
		if bytes.Equal(a[hdr:], c[hdr:]) {
			t.Errorf("%s: seeds %d and %d give the same data records", f, s.Seed-1, s.Seed)
		}
	}
}

// TestHeaderLayout checks the written header against the EDF field table of
// FORMATS.md §1.1–1.2 (Kemp et al. 1992; EDF+ §2.1; BioSemi's BDF page),
// independently of the project's decoder.
func TestHeaderLayout(t *testing.T) {
	tests := []struct {
		format              ingest.Format
		version, reserved   string
		bytesPerSample      int
		annotLabel          string
		dmin, dmax          string
		uvPerStep, wantGain float64
	}{
		{ingest.FormatEDF, "0       ", "", 2, "", "-32768", "32767", 0.1, 0.1},
		{ingest.FormatEDFPlusC, "0       ", "EDF+C", 2, "EDF Annotations", "-32768", "32767", 0.5, 0.5},
		{ingest.FormatBDF, "\xffBIOSEMI", "24BIT", 3, "", "-8388608", "8388607", 0.03125, 0.03125},
		{ingest.FormatBDFPlusC, "\xffBIOSEMI", "BDF+C", 3, "BDF Annotations", "-8388608", "8388607", 0.01, 0.01},
	}
	for _, tt := range tests {
		s := Default()
		s.Format = tt.format
		s.Duration = 12
		s.UVPerStep = tt.uvPerStep
		s.Spelling = SpellTypedRef
		s.PatientField = "MRN-77 F 01-JAN-1950 Someone_Invented"
		b, err := Bytes(s)
		if err != nil {
			t.Fatalf("%s: %v", tt.format, err)
		}
		field := func(off, n int) string { return strings.TrimRight(string(b[off:off+n]), " ") }
		ns := len(s.Channels)
		if tt.annotLabel != "" {
			ns++
		}
		if got := string(b[0:8]); got != tt.version {
			t.Errorf("%s: version %q, want %q", tt.format, got, tt.version)
		}
		if got := field(8, 80); got != s.PatientField {
			t.Errorf("%s: patient field %q, want the spec's text", tt.format, got)
		}
		if got := field(88, 80); got != "Startdate 15-MAR-2024 X X synth" {
			t.Errorf("%s: recording field %q", tt.format, got)
		}
		if got := field(168, 16); got != "15.03.2410.00.00" {
			t.Errorf("%s: start date and time %q", tt.format, got)
		}
		if got := field(184, 8); got != strconv.Itoa(256*(ns+1)) {
			t.Errorf("%s: header bytes %q, want %d", tt.format, got, 256*(ns+1))
		}
		if got := field(192, 44); got != tt.reserved {
			t.Errorf("%s: reserved %q, want %q", tt.format, got, tt.reserved)
		}
		if got := field(236, 8); got != "12" {
			t.Errorf("%s: records %q, want 12", tt.format, got)
		}
		if got := field(244, 8); got != "1" {
			t.Errorf("%s: record duration %q, want 1", tt.format, got)
		}
		if got := field(252, 4); got != strconv.Itoa(ns) {
			t.Errorf("%s: signals %q, want %d", tt.format, got, ns)
		}
		sig := func(fieldOffset, width, i int) string { return field(256+fieldOffset*ns+width*i, width) }
		if got := sig(0, 16, 0); got != "EEG FP1-REF" {
			t.Errorf("%s: first label %q", tt.format, got)
		}
		if tt.annotLabel != "" {
			if got := sig(0, 16, ns-1); got != tt.annotLabel {
				t.Errorf("%s: last label %q, want %q", tt.format, got, tt.annotLabel)
			}
		}
		pmin, _ := strconv.ParseFloat(sig(104, 8, 0), 64)
		pmax, _ := strconv.ParseFloat(sig(112, 8, 0), 64)
		if got, want := sig(120, 8, 0), tt.dmin; got != want {
			t.Errorf("%s: digital minimum %q, want %q", tt.format, got, want)
		}
		if got, want := sig(128, 8, 0), tt.dmax; got != want {
			t.Errorf("%s: digital maximum %q, want %q", tt.format, got, want)
		}
		dmin, _ := strconv.Atoi(tt.dmin)
		dmax, _ := strconv.Atoi(tt.dmax)
		gain := (pmax - pmin) / float64(dmax-dmin)
		// gainTolerance: 8-character physical extremes may round the last
		// decimal (BDF 0.03125 µV/step: 262143.96875 is written 262144).
		const gainTolerance = 1e-6
		if math.Abs(gain-tt.wantGain) > gainTolerance*tt.wantGain {
			t.Errorf("%s: gain %v µV/step, want %v", tt.format, gain, tt.wantGain)
		}
		if got := sig(136, 80, 0); got != s.Prefilter {
			t.Errorf("%s: prefiltering %q, want %q", tt.format, got, s.Prefilter)
		}
		recBytes := 0
		for i := 0; i < ns; i++ {
			n, err := strconv.Atoi(sig(216, 8, i))
			if err != nil {
				t.Fatalf("%s: samples of signal %d: %v", tt.format, i, err)
			}
			if i < len(s.Channels) && n != 250 {
				t.Errorf("%s: signal %d has %d samples per record, want 250", tt.format, i, n)
			}
			recBytes += n * tt.bytesPerSample
		}
		if want := 256*(ns+1) + 12*recBytes; len(b) != want {
			t.Errorf("%s: file is %d bytes, want %d", tt.format, len(b), want)
		}
		if tt.annotLabel != "" {
			// The first record's annotation slot opens with the time-keeping
			// TAL "+0␔␔␀" (EDF+ §2.2.4), then the first period's annotation.
			first := 256 * (ns + 1)
			slot := b[first+recBytes-annotBytes(b, ns, tt.bytesPerSample) : first+recBytes]
			want := "+0\x14\x14\x00+0\x1512\x14eyes closed\x14\x00"
			if !bytes.HasPrefix(slot, []byte(want)) {
				t.Errorf("%s: first annotation slot %q, want prefix %q", tt.format, slot[:min(len(slot), 40)], want)
			}
		}
	}
}

// annotBytes returns the byte size of the last signal's slot in a record.
func annotBytes(b []byte, ns, bps int) int {
	off := 256 + 216*ns + 8*(ns-1)
	n, _ := strconv.Atoi(strings.TrimSpace(string(b[off : off+8])))
	return n * bps
}

// TestRoundTrip writes every format and spelling and decodes the bytes with
// the project's reader: every digital value must come back exactly (issue 2
// point 8), with the labels normalised to the 10-10 names and the eye-state
// periods from the annotations.
func TestRoundTrip(t *testing.T) {
	tests := []struct {
		format   ingest.Format
		spelling Spelling
		rate     float64
		uv       float64
		record   float64
	}{
		{ingest.FormatEDF, SpellPlain, 250, 0.1, 1},
		{ingest.FormatEDFPlusC, SpellTypedRef, 256, 0.05, 1},
		{ingest.FormatEDFPlusC, SpellDotted, 160, 1, 1},
		{ingest.FormatEDFPlusC, SpellOldNames, 500, 0.1, 0.5},
		{ingest.FormatEDFPlusC, SpellEarRef, 128, 0.25, 2},
		{ingest.FormatBDF, SpellPlain, 512, 0.03125, 1},
		{ingest.FormatBDFPlusC, SpellTypedRef, 1000, 0.01, 1},
	}
	for _, tt := range tests {
		name := fmt.Sprintf("%s/%s/%gHz", tt.format, tt.spelling, tt.rate)
		s := Default()
		s.Seed = 7
		s.Format, s.Spelling, s.SampleRate, s.UVPerStep, s.RecordDuration = tt.format, tt.spelling, tt.rate, tt.uv, tt.record
		s.Duration = 40
		s.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 20}, {State: ingest.EyesOpen, Start: 20, End: 40}}
		s.Flat = []string{"Cz"}
		s.LowPassHz = 0.4 * tt.rate
		s = s.WithoutChannels("O2")
		s.PatientField = "HOSP-123 M 02-FEB-1941 Invented_Name"
		r, err := Render(s)
		if err != nil {
			t.Fatalf("%s: render: %v", name, err)
		}
		b, err := Bytes(s)
		if err != nil {
			t.Fatalf("%s: write: %v", name, err)
		}
		rec, err := ingest.Decode(bytes.NewReader(b), int64(len(b)), "synthetic.edf", ingest.Options{})
		if err != nil {
			t.Fatalf("%s: decode: %v", name, err)
		}
		if len(rec.Channels) != len(s.Channels) {
			t.Fatalf("%s: %d channels decoded, want %d", name, len(rec.Channels), len(s.Channels))
		}
		for c := range rec.Channels {
			ch := &rec.Channels[c]
			if ch.Label != s.Channels[c] || ch.Original != r.Labels[c] {
				t.Errorf("%s: channel %d label %q (original %q), want %q (%q)", name, c, ch.Label, ch.Original, s.Channels[c], r.Labels[c])
			}
			if ch.SampleRate != tt.rate {
				t.Errorf("%s: %s rate %v, want %v", name, ch.Label, ch.SampleRate, tt.rate)
			}
			if len(ch.Samples) != len(r.Digital[c]) {
				t.Fatalf("%s: %s has %d samples, want %d", name, ch.Label, len(ch.Samples), len(r.Digital[c]))
			}
			bad := 0
			for i, v := range ch.Samples {
				d := math.Round((float64(v) - r.Offset) / r.Gain)
				if d != float64(r.Digital[c][i]) {
					if bad == 0 {
						t.Errorf("%s: %s sample %d decodes to digital %v, wrote %d", name, ch.Label, i, d, r.Digital[c][i])
					}
					bad++
				}
			}
			if bad > 0 {
				t.Errorf("%s: %s: %d of %d samples differ", name, ch.Label, bad, len(ch.Samples))
			}
		}
		cond := rec.Conditions
		if cond.Format != tt.format {
			t.Errorf("%s: format %q", name, cond.Format)
		}
		// stepTolerance: the 8-character header fields may round the gain.
		const stepTolerance = 1e-6
		if math.Abs(cond.UVPerStep-tt.uv) > stepTolerance*tt.uv {
			t.Errorf("%s: µV per step %v, want %v", name, cond.UVPerStep, tt.uv)
		}
		if !slices.Equal(cond.ChannelsMissing, []string{"O2"}) {
			t.Errorf("%s: missing channels %v, want [O2]", name, cond.ChannelsMissing)
		}
		if tt.format == ingest.FormatEDFPlusC || tt.format == ingest.FormatBDFPlusC {
			if cond.PeriodSource != ingest.FromAnnotations || !slices.Equal(rec.Periods, s.Periods) {
				t.Errorf("%s: periods %v from %q, want %v from annotations", name, rec.Periods, cond.PeriodSource, s.Periods)
			}
		} else if cond.PeriodSource != ingest.FromNothing {
			t.Errorf("%s: period source %q, want %q", name, cond.PeriodSource, ingest.FromNothing)
		}
		if dump := fmt.Sprintf("%+v", rec); strings.Contains(dump, "Invented_Name") || strings.Contains(dump, "HOSP-123") {
			t.Errorf("%s: the patient field reached the recording", name)
		}
	}
}

// periodogramBandPower returns the power (µV²) of x in [lo, hi) from its
// full-length one-sided periodogram: (2/n²)·Σ|X_k|² over the bins in the band
// (Parseval), no window, no averaging.
func periodogramBandPower(x []float64, fs float64, bands [][2]float64) []float64 {
	n := len(x)
	coeff := fourier.NewFFT(n).Coefficients(nil, x)
	out := make([]float64, len(bands))
	for k := 1; k < len(coeff); k++ {
		f := float64(k) * fs / float64(n)
		w := 2.0
		if n%2 == 0 && k == n/2 {
			w = 1
		}
		p := w * (real(coeff[k])*real(coeff[k]) + imag(coeff[k])*imag(coeff[k])) / float64(n) / float64(n)
		for i, b := range bands {
			if f >= b[0] && f < b[1] {
				out[i] += p
			}
		}
	}
	return out
}

func microvolts(r *Rendering, c int) []float64 {
	x := make([]float64, len(r.Digital[c]))
	for i := range x {
		x[i] = r.Microvolts(c, i)
	}
	return x
}

// withoutRhythms is s with the deterministic sinusoids (alpha, theta, line
// noise) removed: what remains is Gaussian noise.
func withoutRhythms(s Spec) Spec {
	s.AlphaPower, s.ThetaPower, s.LineAmplitude = 0, 0, 0
	return s
}

// noiseSD is the standard deviation of the realised power of the model's
// Gaussian noise in [lo, hi) over T seconds: each periodogram bin's power is
// exponentially distributed (its SD equals its mean μ_k), so SD² = Σ μ_k²;
// with the density taken constant over sub-bands of width w holding w·T bins
// of power P_j/(w·T) each, SD² = Σ_j P_j²/(w·T).
func noiseSD(s Spec, channel string, ref []string, lo, hi float64) float64 {
	ns := withoutRhythms(s)
	v := 0.0
	for a := lo; a < hi; {
		w := 1.0
		if a < 2 {
			w = 0.125
		}
		b := min(a+w, hi)
		p := ns.ExpectedBandPowerAverageRef(channel, ref, ingest.EyesClosed, a, b)
		v += p * p / ((b - a) * s.Duration)
		a = b
	}
	return math.Sqrt(v)
}

// Tolerances of the spectrum checks. The noise part may differ from the
// model by noiseSigmas standard deviations (noiseSD), and so may the cross
// term of rhythms and noise; the deterministic rhythms by rhythmTolerance
// relative (their slow modulation completes only some tens of cycles, well
// under 1 %).
const (
	noiseSigmas     = 5
	rhythmTolerance = 0.01
)

// TestSpectrumMatchesExpectedBandPower compares the full-length periodogram
// of generated channels with ExpectedBandPower, over several seeds, states,
// a low-pass and the average reference.
func TestSpectrumMatchesExpectedBandPower(t *testing.T) {
	bands := [][2]float64{{1, 4}, {4, 8}, {8, 13}, {13, 30}, {30, 45}, {49, 51}, {0, 125}}
	type variant struct {
		name  string
		state ingest.EyeState
		edit  func(*Spec)
		ref   bool
	}
	variants := []variant{
		{"closed", ingest.EyesClosed, func(*Spec) {}, false},
		{"open", ingest.EyesOpen, func(s *Spec) { s.AlphaOpenAttenuation = 0.7 }, false},
		{"low-pass 30 Hz, χ 2", ingest.EyesClosed, func(s *Spec) { s.LowPassHz = 30; s.AperiodicExponent = 2 }, false},
		{"average reference", ingest.EyesClosed, func(s *Spec) { s.Flat = []string{"T8"} }, true},
	}
	for _, v := range variants {
		// The noise part and its scatter do not depend on the seed.
		type key struct {
			ch   string
			band int
		}
		noise, tol := map[key]float64{}, map[key]float64{}
		for seed := uint64(1); seed <= 3; seed++ {
			s := quietSpec(seed, v.state, 300)
			v.edit(&s)
			r, err := Render(s)
			if err != nil {
				t.Fatal(err)
			}
			var ref []string
			var mean []float64
			if v.ref {
				ref = s.Channels
				mean = make([]float64, len(r.Digital[0]))
				for c := range s.Channels {
					for i, u := range microvolts(r, c) {
						mean[i] += u / float64(len(s.Channels))
					}
				}
			}
			for _, ch := range []string{"O1", "Fp1", "Cz", "T7"} {
				c := slices.Index(s.Channels, ch)
				x := microvolts(r, c)
				if v.ref {
					for i := range x {
						x[i] -= mean[i]
					}
				}
				got := periodogramBandPower(x, s.SampleRate, bands)
				for i, b := range bands {
					want := s.ExpectedBandPowerAverageRef(ch, ref, v.state, b[0], b[1])
					k := key{ch, i}
					if _, ok := noise[k]; !ok {
						noise[k] = withoutRhythms(s).ExpectedBandPowerAverageRef(ch, ref, v.state, b[0], b[1])
						tol[k] = noiseSigmas * noiseSD(s, ch, ref, b[0], b[1])
					}
					// A sinusoid of power P over Gaussian noise of bin mean μ adds a
					// cross term of variance 2·P·μ; μ from the band's mean density.
					rhythm := want - noise[k]
					mu := noise[k] / (b[1] - b[0]) / s.Duration
					tol := tol[k] + rhythmTolerance*rhythm + noiseSigmas*math.Sqrt(2*rhythm*mu)
					// quantisation adds q²/12 of white noise over 0..fs/2.
					q := r.Gain
					want += q * q / 12 * (b[1] - b[0]) / (s.SampleRate / 2)
					if math.Abs(got[i]-want) > tol {
						t.Errorf("%s seed %d %s [%g,%g) Hz: periodogram %.4g µV², model %.4g (tolerance %.3g)",
							v.name, seed, ch, b[0], b[1], got[i], want, tol)
					}
				}
			}
		}
	}
}

func TestDrowsinessDropouts(t *testing.T) {
	s := quietSpec(4, ingest.EyesClosed, 300)
	s.Drowsiness = 0.3
	drop := s.AlphaDropouts()
	// round(0.3 · 300 s / 4 s) = 23 stretches, on the grid 2 + 4k s.
	if len(drop) != 23 {
		t.Fatalf("%d dropout stretches, want 23", len(drop))
	}
	for _, p := range drop {
		if k := (p.Start - dropoutLead) / dropoutLength; k != math.Trunc(k) || p.End-p.Start != dropoutLength {
			t.Errorf("dropout [%v, %v) is off the 4-s grid", p.Start, p.End)
		}
	}
	awakeSpec := quietSpec(4, ingest.EyesClosed, 300)
	noise := withoutRhythms(s).ExpectedBandPower("O1", ingest.EyesClosed, 9.5, 10.5)
	alpha := awakeSpec.ExpectedBandPower("O1", ingest.EyesClosed, 9.5, 10.5) - noise
	if got, want := s.ExpectedBandPower("O1", ingest.EyesClosed, 9.5, 10.5), noise+alpha*(1-23*4/300.0); math.Abs(got-want) > 1e-9*want {
		t.Errorf("closed 9.5–10.5 Hz power with dropouts %v µV², want %v", got, want)
	}
	r, err := Render(s)
	if err != nil {
		t.Fatal(err)
	}
	x := microvolts(r, slices.Index(s.Channels, "O1"))
	fs := s.SampleRate
	alphaIn := func(p ingest.Period) float64 {
		seg := x[int(p.Start*fs):int(p.End*fs)]
		return periodogramBandPower(seg, fs, [][2]float64{{8, 12}})[0]
	}
	inDrop := alphaIn(drop[0])
	awake := ingest.Period{Start: drop[0].Start - 4, End: drop[0].Start}
	if slices.ContainsFunc(drop, func(p ingest.Period) bool { return p.Start == awake.Start }) || awake.Start < 0 {
		awake = ingest.Period{Start: drop[0].End, End: drop[0].End + 4}
	}
	if out := alphaIn(awake); !(inDrop < 0.1*out) {
		t.Errorf("alpha power in a dropout %v µV², beside it %v µV²: the rhythm did not drop out", inDrop, out)
	}
}

func TestWithoutChannelsKeepsOthers(t *testing.T) {
	s := Default()
	s.Duration = 20
	a, err := Render(s)
	if err != nil {
		t.Fatal(err)
	}
	b, err := Render(s.WithoutChannels("O2", "T7"))
	if err != nil {
		t.Fatal(err)
	}
	if len(b.Channels) != 17 {
		t.Fatalf("%d channels, want 17", len(b.Channels))
	}
	for _, ch := range []string{"Fp1", "O1", "P8"} {
		if !slices.Equal(a.Digital[slices.Index(a.Channels, ch)], b.Digital[slices.Index(b.Channels, ch)]) {
			t.Errorf("%s changed when other channels were left out", ch)
		}
	}
}

func TestFlatAndArtefacts(t *testing.T) {
	s := Default()
	s.Duration = 120
	s.Flat = []string{"P4"}
	s.BlinksPerMinute = 20
	s.MuscleBurstsPerMinute = 10
	r, err := Render(s)
	if err != nil {
		t.Fatal(err)
	}
	flat := r.Digital[slices.Index(s.Channels, "P4")]
	if slices.Min(flat) != slices.Max(flat) {
		t.Errorf("flat channel P4 varies: %d..%d", slices.Min(flat), slices.Max(flat))
	}
	if p := s.ExpectedBandPower("P4", ingest.EyesClosed, 1, 40); p != 0 {
		t.Errorf("flat channel expected power %v, want 0", p)
	}
	// Blinks make Fp1 swing far more than O1 (blink weights 1 and 0.03).
	span := func(ch string) float64 {
		d := r.Digital[slices.Index(s.Channels, ch)]
		return float64(slices.Max(d)-slices.Min(d)) * r.Gain
	}
	if fp, o := span("Fp1"), span("O1"); !(fp > 150 && fp > 2*o) {
		t.Errorf("peak-to-peak Fp1 %.0f µV, O1 %.0f µV: blinks are not frontal", fp, o)
	}
	// Muscle bursts: T7's 30–60 Hz power well above that of the quiet spec.
	quiet := s
	quiet.MuscleBurstsPerMinute = 0
	q, err := Render(quiet)
	if err != nil {
		t.Fatal(err)
	}
	c := slices.Index(s.Channels, "T7")
	hf := periodogramBandPower(microvolts(r, c), s.SampleRate, [][2]float64{{30, 45}})[0]
	hfQuiet := periodogramBandPower(microvolts(q, c), s.SampleRate, [][2]float64{{30, 45}})[0]
	if !(hf > 3*hfQuiet) {
		t.Errorf("T7 30–45 Hz power %v µV² with muscle bursts, %v without", hf, hfQuiet)
	}
}

func TestSpecErrors(t *testing.T) {
	tests := []struct {
		name string
		edit func(*Spec)
	}{
		{"unknown format", func(s *Spec) { s.Format = "EDF+D" }},
		{"zero rate", func(s *Spec) { s.SampleRate = 0 }},
		{"fractional samples per record", func(s *Spec) { s.SampleRate = 250.5 }},
		{"shorter than a record", func(s *Spec) { s.Duration = 0.5 }},
		{"too long", func(s *Spec) { s.Duration = 1e9 }},
		{"no channels", func(s *Spec) { s.Channels = nil }},
		{"repeated channel", func(s *Spec) { s.Channels = []string{"O1", "O1"} }},
		{"label too long", func(s *Spec) { s.Channels = []string{"AVeryLongElectrodeName"} }},
		{"alpha above Nyquist", func(s *Spec) { s.AlphaHz = 200 }},
		{"negative power", func(s *Spec) { s.ThetaPower = -1 }},
		{"attenuation above 1", func(s *Spec) { s.AlphaOpenAttenuation = 1.5 }},
		{"NaN drowsiness", func(s *Spec) { s.Drowsiness = math.NaN() }},
		{"zero step", func(s *Spec) { s.UVPerStep = 0 }},
		{"step too large for the header", func(s *Spec) { s.UVPerStep = 1e5 }},
		{"overlapping periods", func(s *Spec) {
			s.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 10}, {State: ingest.EyesOpen, Start: 5, End: 20}}
		}},
		{"unknown state period", func(s *Spec) { s.Periods = []ingest.Period{{State: ingest.EyesUnknown, Start: 0, End: 10}} }},
		{"start before 1985", func(s *Spec) { s.Start = s.Start.AddDate(-50, 0, 0) }},
		{"non-ASCII patient field", func(s *Spec) { s.PatientField = "Müller" }},
		{"separator in annotation", func(s *Spec) { s.ExtraAnnotations = []ingest.Annotation{{Onset: 1, Text: "a\x14b"}} }},
	}
	for _, tt := range tests {
		s := Default()
		s.Duration = 10
		tt.edit(&s)
		_, err := Bytes(s)
		if !errors.Is(err, ErrSpec) {
			t.Errorf("%s: error %v, want ErrSpec", tt.name, err)
		}
	}
}

// welchPeak is a minimal Welch estimate (Welch 1967: periodic Hann, 4-s
// segments, 50 % overlap, mean of periodograms) and the largest bin in
// [lo, hi) Hz refined by a parabola through it and its neighbours — the
// posterior dominant rhythm search of DESIGN.md without the smoothing.
func welchPeak(x []float64, fs, lo, hi float64) float64 {
	seg := int(4 * fs)
	win := make([]float64, seg)
	for i := range win {
		win[i] = 0.5 * (1 - math.Cos(2*math.Pi*float64(i)/float64(seg)))
	}
	plan := fourier.NewFFT(seg)
	psd := make([]float64, seg/2+1)
	buf := make([]float64, seg)
	for start := 0; start+seg <= len(x); start += seg / 2 {
		mean := 0.0
		for _, v := range x[start : start+seg] {
			mean += v / float64(seg)
		}
		for i := range buf {
			buf[i] = (x[start+i] - mean) * win[i]
		}
		for k, c := range plan.Coefficients(nil, buf) {
			psd[k] += real(c)*real(c) + imag(c)*imag(c)
		}
	}
	df := fs / float64(seg)
	best := -1
	for k := int(math.Ceil(lo / df)); float64(k)*df < hi; k++ {
		if best < 0 || psd[k] > psd[best] {
			best = k
		}
	}
	a, b, c := psd[best-1], psd[best], psd[best+1]
	return (float64(best) + 0.5*(a-c)/(a-2*b+c)) * df
}

// TestAlphaPeakRecoverable checks that the posterior rhythm is narrow
// enough for the marker engine: a Welch peak with parabolic refinement on
// O1 finds AlphaHz within pdrTolerance (issue 3 point 7), blinks, muscle
// bursts and line noise present, over several seeds and off-bin
// frequencies.
func TestAlphaPeakRecoverable(t *testing.T) {
	// pdrTolerance is issue 3's ±0.1 Hz; the sinusoid allows far less.
	const pdrTolerance = 0.1
	for _, hz := range []float64{6, 7.5, 8.1, 9.5, 10.37, 11.5} {
		for seed := uint64(1); seed <= 3; seed++ {
			s := Default()
			s.Seed = seed
			s.Duration = 120
			s.AlphaHz = hz
			s.AlphaPower = 40
			s.ThetaHz = 5
			s.BlinksPerMinute, s.MuscleBurstsPerMinute = 12, 4
			s.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 120}}
			r, err := Render(s)
			if err != nil {
				t.Fatal(err)
			}
			got := welchPeak(microvolts(r, slices.Index(s.Channels, "O1")), s.SampleRate, 5, 14)
			if math.Abs(got-hz) > pdrTolerance {
				t.Errorf("alpha %v Hz seed %d: Welch peak at %.3f Hz", hz, seed, got)
			}
		}
	}
}
