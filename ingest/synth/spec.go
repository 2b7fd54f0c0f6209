// Package synth writes synthetic resting-EEG recordings with a known ground
// truth, as EDF (Kemp et al. 1992), EDF+C (Kemp & Olivan 2003) or BDF
// (BioSemi 24-bit). Tests of the decoders and of the marker engine, and the
// demo clinic, are built on it.
//
// A Spec describes one recording: its container, sampling, channels and the
// signal model (see model.go for the formulas). Write encodes it; the same
// Spec (seed included) always gives the same bytes on one platform.
// ExpectedBandPower gives the model's true band power of a channel in an eye
// state, integrated from the generating spectra, for ground-truth checks.
//
// All numbers invented here (weights, artefact sizes, defaults) are synthetic
// ground truth, not reference values.
package synth

import (
	"errors"
	"fmt"
	"math"
	"time"

	"longwave/ingest"
)

// Spelling chooses how channel labels are written in the header, to exercise
// the label normaliser with the forms real exports use (FORMATS.md §3).
type Spelling string

// Label spellings.
const (
	// SpellPlain writes the 10-10 name: "O1", "Fp1".
	SpellPlain Spelling = "plain"
	// SpellTypedRef writes a type prefix and a reference suffix in capitals,
	// as some hospital archives do: "EEG O1-REF", "EEG FP1-REF".
	SpellTypedRef Spelling = "typed-ref"
	// SpellDotted pads the name with dots to four characters: "O1..",
	// "Fp1.", "Fz.." (the eegmmidb files of ../shared/data).
	SpellDotted Spelling = "dotted"
	// SpellOldNames writes T3 T4 T5 T6 for T7 T8 P7 P8, otherwise plain.
	SpellOldNames Spelling = "old-names"
	// SpellEarRef writes a left-ear reference suffix: "O1-A1".
	SpellEarRef Spelling = "ear-ref"
)

// Spec is one synthetic recording. Amplitudes are in µV, powers in µV²
// (mean square), spectral densities in µV²/Hz, frequencies in Hz, times in
// seconds. The zero value is not useful: start from Default().
type Spec struct {
	// Seed selects every random draw (math/rand/v2 PCG streams derived
	// from it and the channel label).
	Seed uint64
	// Format is ingest.FormatEDF, FormatEDFPlusC, FormatBDF or
	// FormatBDFPlusC. Only the "+C" forms carry annotations.
	Format ingest.Format
	// SampleRate of every EEG channel. SampleRate × RecordDuration must be
	// a whole number of samples.
	SampleRate float64
	// Duration of the recording; the file holds floor(Duration /
	// RecordDuration) whole data records.
	Duration float64
	// RecordDuration is the length of one data record (1 s in most files).
	RecordDuration float64
	// Channels are the 10-10 names of the EEG channels written, in order.
	// A channel left out is missing from the file. Unknown names get the
	// default weights of model.go.
	Channels []string
	// Spelling of the labels in the header.
	Spelling Spelling

	// AperiodicExponent χ and AperiodicLevel A: the background's density is
	// A·f^−χ µV²/Hz (A is the density at 1 Hz), flat below ApFloorHz.
	AperiodicExponent float64
	AperiodicLevel    float64
	// SharedAperiodic is the share (0..1) of the background power common to
	// all channels (volume conduction); the rest is independent per channel.
	SharedAperiodic float64

	// AlphaHz and AlphaPower: the posterior rhythm's frequency and its power
	// at weight 1 (O1, O2, Oz) with eyes closed. 0 power: no rhythm.
	AlphaHz    float64
	AlphaPower float64
	// AlphaOpenAttenuation is the fraction (0..1) of alpha POWER removed in
	// eyes-open periods: open power = (1 − a)·closed power.
	AlphaOpenAttenuation float64
	// ThetaHz and ThetaPower: the theta rhythm, power at weight 1 (Cz).
	ThetaHz    float64
	ThetaPower float64
	// BetaHz, BetaWidthHz and BetaPower: an optional Gaussian spectral bump
	// of standard deviation BetaWidthHz, power at weight 1 (fronto-central).
	BetaHz, BetaWidthHz, BetaPower float64

	// LineHz (50 or 60, 0 none) and LineAmplitude (peak µV at a channel of
	// median impedance; each channel draws a factor in [0.5, 1.5) and a
	// phase).
	LineHz, LineAmplitude float64
	// BlinksPerMinute: frontal blinks, a Poisson process over the whole
	// recording. Each blink is a positive raised-cosine bump of 0.2–0.4 s
	// (uniform) whose peak at Fp1/Fp2 is drawn uniformly from
	// [BlinkMinUV, BlinkMaxUV] µV; it spreads to the other sites with
	// falling weights (F7/F8 0.5, F3/Fz/F4 0.45, central and mid-temporal
	// 0.12, parietal 0.05, occipital 0.03; model.go). Blinks come from their
	// own random stream: the same Spec with BlinksPerMinute 0 gives the same
	// file without the blinks, sample for sample.
	BlinksPerMinute float64
	// BlinkMinUV and BlinkMaxUV bound the blink peak at Fp1/Fp2 (µV). Both 0
	// means the default 80–200 µV.
	BlinkMinUV, BlinkMaxUV float64
	// MuscleBurstsPerMinute: broadband 20–80 Hz bursts (capped at 0.45·fs)
	// under a Hann envelope, a Poisson process over the whole recording,
	// strongest at T7/T8 (weight 1), then F7/F8 0.7, P7/P8 0.6, Fp1/Fp2 0.3,
	// O1/O2 0.2, elsewhere 0.1. Own random stream, like the blinks.
	MuscleBurstsPerMinute float64
	// MuscleMinUV and MuscleMaxUV bound a burst's RMS at the envelope peak at
	// weight 1 (µV); both 0 means the default 10–30 µV.
	MuscleMinUV, MuscleMaxUV float64
	// MuscleMinSeconds and MuscleMaxSeconds bound a burst's length (s);
	// both 0 means the default 0.5–1.5 s.
	MuscleMinSeconds, MuscleMaxSeconds float64
	// EOG lists electro-oculogram channels written after the EEG channels,
	// under labels the ingest label normaliser reads as EOG: "VEOG"
	// (vertical, above and below one eye) carries the blinks at 1.6 times
	// their Fp1/Fp2 size, "HEOG" (outer canthi) at 0.15; both carry their
	// own aperiodic background at a quarter of the EEG density and a fifth of
	// the shared (volume-conducted) background, no rhythms, and line noise.
	// Any other label is refused. Adding or removing EOG channels leaves the
	// EEG channels' samples unchanged.
	EOG []string
	// Flat lists channels written as a constant 0 µV (a disconnected
	// electrode).
	Flat []string
	// LowPassHz, when > 0, is a hardware low-pass actually applied to the
	// signal: 4th-order Butterworth magnitude |H(f)|² = 1/(1+(f/fc)^8). The
	// Prefilter text is written as given; keep the two consistent.
	LowPassHz float64

	// UVPerStep is the amplitude resolution: the physical and digital ranges
	// are the full 16-bit (EDF) or 24-bit (BDF) digital range times it. The
	// header's 8-character number fields may round the physical extremes;
	// the effective gain is then (pmax − pmin)/(dmax − dmin) as written.
	UVPerStep float64
	// Prefilter is written in every EEG signal's prefiltering field.
	Prefilter string

	// Periods are the eye-state stretches: they shape the alpha rhythm and,
	// in the "+C" formats, are written as annotations with durations at
	// their starts. Time outside every period behaves as eyes closed and is
	// not annotated. Sorted, non-overlapping, states closed or open.
	Periods []ingest.Period
	// ClosedText and OpenText are the annotation texts of the periods.
	ClosedText, OpenText string
	// ExtraAnnotations are written as given (any text), e.g. free text that
	// a decoder must not keep.
	ExtraAnnotations []ingest.Annotation
	// Drowsiness is the share (0..1) of eyes-closed time in which the alpha
	// rhythm drops out, in whole 4-s stretches (see AlphaDropouts).
	Drowsiness float64

	// Start is the recording's start (local time as EDF keeps it; 1985–2084).
	Start time.Time
	// PatientField and RecordingField, when not empty, replace the header's
	// identification fields verbatim (truncated to 80 bytes). By default the
	// patient field is the anonymous "X X X X" and the recording field
	// "Startdate dd-MMM-yyyy X X <Equipment>".
	PatientField, RecordingField string
	// Equipment is the equipment subfield of the default recording field.
	Equipment string
}

// Default returns a healthy adult's 5-minute EDF+C at 250 Hz with the 19
// channels of the 10-20 system: eyes closed 0–90 s, open 90–150 s, closed
// 150–240 s, open 240–300 s; a 10 Hz posterior rhythm of 100 µV² attenuated
// by 60 % on eye opening; 6 Hz theta of 6 µV²; a small 20 Hz beta bump; a
// 1/f^1.5 background; 50 Hz line noise; 6 blinks and 1 muscle burst a
// minute; 0.1 µV per step.
func Default() Spec {
	return Spec{
		Seed:                  1,
		Format:                ingest.FormatEDFPlusC,
		SampleRate:            250,
		Duration:              300,
		RecordDuration:        1,
		Channels:              append([]string(nil), ingest.Standard19[:]...),
		Spelling:              SpellPlain,
		AperiodicExponent:     1.5,
		AperiodicLevel:        20,
		SharedAperiodic:       0.3,
		AlphaHz:               10,
		AlphaPower:            100,
		AlphaOpenAttenuation:  0.6,
		ThetaHz:               6,
		ThetaPower:            6,
		BetaHz:                20,
		BetaWidthHz:           2.5,
		BetaPower:             3,
		LineHz:                50,
		LineAmplitude:         4,
		BlinksPerMinute:       6,
		MuscleBurstsPerMinute: 1,
		UVPerStep:             0.1,
		Prefilter:             "HP:0.1Hz LP:70Hz",
		Periods: []ingest.Period{
			{State: ingest.EyesClosed, Start: 0, End: 90},
			{State: ingest.EyesOpen, Start: 90, End: 150},
			{State: ingest.EyesClosed, Start: 150, End: 240},
			{State: ingest.EyesOpen, Start: 240, End: 300},
		},
		ClosedText: "eyes closed",
		OpenText:   "eyes open",
		Start:      time.Date(2024, time.March, 15, 10, 0, 0, 0, time.UTC),
		Equipment:  "synth",
	}
}

// WithoutChannels returns a copy of s without the named channels (missing
// electrodes). The other channels keep their exact samples: random streams
// are tied to labels, not positions.
func (s Spec) WithoutChannels(labels ...string) Spec {
	drop := make(map[string]bool, len(labels))
	for _, l := range labels {
		drop[l] = true
	}
	out := make([]string, 0, len(s.Channels))
	for _, c := range s.Channels {
		if !drop[c] {
			out = append(out, c)
		}
	}
	s.Channels = out
	return s
}

// ErrSpec is wrapped by every error about an unusable Spec.
var ErrSpec = errors.New("synth: invalid spec")

func specError(format string, args ...any) error {
	return fmt.Errorf("%w: "+format, append([]any{ErrSpec}, args...)...)
}

// Limits that keep a Spec inside what the formats can hold and what a test
// machine can afford.
const (
	maxSamples  = 1 << 27 // samples per channel (about 3 days at 500 Hz)
	maxChannels = 512
	// maxRecords: the header's record count is 8 ASCII digits.
	maxRecords = 99999999
)

// check validates s and returns the number of records and samples per record.
func (s Spec) check() (records, perRecord int, err error) {
	switch s.Format {
	case ingest.FormatEDF, ingest.FormatEDFPlusC, ingest.FormatBDF, ingest.FormatBDFPlusC:
	default:
		return 0, 0, specError("format %q: want EDF, EDF+C, BDF or BDF+C", s.Format)
	}
	if !(s.SampleRate > 0) || math.IsInf(s.SampleRate, 0) {
		return 0, 0, specError("sample rate %v Hz: must be positive", s.SampleRate)
	}
	if !(s.RecordDuration > 0) || math.IsInf(s.RecordDuration, 0) {
		return 0, 0, specError("record duration %v s: must be positive", s.RecordDuration)
	}
	spr := s.SampleRate * s.RecordDuration
	perRecord = int(math.Round(spr))
	if perRecord < 1 || math.Abs(spr-float64(perRecord)) > 1e-9*spr {
		return 0, 0, specError("%v Hz × %v s records is not a whole number of samples", s.SampleRate, s.RecordDuration)
	}
	if !(s.Duration > 0) || math.IsInf(s.Duration, 0) {
		return 0, 0, specError("duration %v s: must be positive", s.Duration)
	}
	recs := math.Floor(s.Duration/s.RecordDuration + 1e-9)
	if recs < 1 {
		return 0, 0, specError("duration %v s is shorter than one %v s record", s.Duration, s.RecordDuration)
	}
	if recs > maxRecords || recs*float64(perRecord) > maxSamples {
		return 0, 0, specError("duration %v s at %v Hz is too long (limit %d samples per channel)", s.Duration, s.SampleRate, maxSamples)
	}
	records = int(recs)
	if len(s.Channels) == 0 {
		return 0, 0, specError("no channels")
	}
	if len(s.Channels) > maxChannels {
		return 0, 0, specError("%d channels: at most %d", len(s.Channels), maxChannels)
	}
	seen := map[string]bool{}
	for _, c := range s.Channels {
		if c == "" || seen[c] {
			return 0, 0, specError("channel %q: empty or repeated", c)
		}
		seen[c] = true
		if l := spell(c, s.Spelling); len(l) > 16 || !printable(l) {
			return 0, 0, specError("channel %q: label %q does not fit the 16-character ASCII field", c, l)
		}
	}
	for _, c := range s.EOG {
		if _, known := eogBlinkWeight[c]; !known || seen[c] {
			return 0, 0, specError("EOG channel %q: want VEOG or HEOG, each once, not an EEG name", c)
		}
		seen[c] = true
	}
	if len(s.Channels)+len(s.EOG) > maxChannels {
		return 0, 0, specError("%d channels: at most %d", len(s.Channels)+len(s.EOG), maxChannels)
	}
	for _, r := range []struct {
		name   string
		lo, hi float64
	}{
		{"blink amplitude (µV)", s.BlinkMinUV, s.BlinkMaxUV},
		{"muscle amplitude (µV)", s.MuscleMinUV, s.MuscleMaxUV},
		{"muscle burst length (s)", s.MuscleMinSeconds, s.MuscleMaxSeconds},
	} {
		if !(r.lo >= 0 && r.hi >= r.lo) || math.IsInf(r.hi, 0) {
			return 0, 0, specError("%s range [%v, %v]: want 0 ≤ min ≤ max, finite", r.name, r.lo, r.hi)
		}
	}
	switch s.Spelling {
	case "", SpellPlain, SpellTypedRef, SpellDotted, SpellOldNames, SpellEarRef:
	default:
		return 0, 0, specError("spelling %q unknown", s.Spelling)
	}
	type named struct {
		name string
		v    float64
	}
	for _, p := range []named{
		{"aperiodic exponent", s.AperiodicExponent}, {"aperiodic level", s.AperiodicLevel},
		{"alpha power", s.AlphaPower}, {"theta power", s.ThetaPower}, {"beta power", s.BetaPower},
		{"line amplitude", s.LineAmplitude}, {"blinks per minute", s.BlinksPerMinute},
		{"muscle bursts per minute", s.MuscleBurstsPerMinute}, {"low-pass", s.LowPassHz},
	} {
		if !(p.v >= 0) || math.IsInf(p.v, 0) {
			return 0, 0, specError("%s %v: must be a finite number ≥ 0", p.name, p.v)
		}
	}
	for _, p := range []named{
		{"shared aperiodic share", s.SharedAperiodic}, {"alpha eyes-open attenuation", s.AlphaOpenAttenuation},
		{"drowsiness", s.Drowsiness},
	} {
		if !(p.v >= 0 && p.v <= 1) {
			return 0, 0, specError("%s %v: must be in [0, 1]", p.name, p.v)
		}
	}
	nyq := s.SampleRate / 2
	for _, r := range []struct {
		name      string
		hz, power float64
	}{
		{"alpha", s.AlphaHz, s.AlphaPower}, {"theta", s.ThetaHz, s.ThetaPower},
		{"beta", s.BetaHz, s.BetaPower}, {"line", s.LineHz, s.LineAmplitude},
	} {
		if r.power > 0 && !(r.hz > 0 && r.hz < nyq) {
			return 0, 0, specError("%s frequency %v Hz: must be in (0, %v) Hz (Nyquist)", r.name, r.hz, nyq)
		}
	}
	if s.BetaPower > 0 && !(s.BetaWidthHz > 0) {
		return 0, 0, specError("beta width %v Hz: must be positive", s.BetaWidthHz)
	}
	if !(s.UVPerStep > 0) || math.IsInf(s.UVPerStep, 0) {
		return 0, 0, specError("µV per step %v: must be positive", s.UVPerStep)
	}
	if _, _, _, err := physicalRange(s); err != nil {
		return 0, 0, err
	}
	if len(s.Prefilter) > 80 || !printable(s.Prefilter) {
		return 0, 0, specError("prefiltering text: at most 80 printable ASCII characters")
	}
	for i, p := range s.Periods {
		if p.State != ingest.EyesClosed && p.State != ingest.EyesOpen {
			return 0, 0, specError("period %d: state %q, want closed or open", i, p.State)
		}
		if !(p.Start >= 0 && p.End > p.Start) || math.IsInf(p.End, 0) {
			return 0, 0, specError("period %d: [%v, %v) is empty or negative", i, p.Start, p.End)
		}
		if i > 0 && p.Start < s.Periods[i-1].End {
			return 0, 0, specError("period %d starts at %v s, before period %d ends", i, p.Start, i-1)
		}
	}
	for i, a := range s.ExtraAnnotations {
		if !(a.Onset >= 0) || !(a.Duration >= 0) {
			return 0, 0, specError("extra annotation %d: negative onset or duration", i)
		}
	}
	if y := s.startTime().Year(); y < 1985 || y > 2084 {
		return 0, 0, specError("start year %d: EDF holds 1985–2084", y)
	}
	for _, f := range [][2]string{{"patient field", s.PatientField}, {"recording field", s.RecordingField}, {"equipment", s.Equipment}} {
		if !printable(f[1]) {
			return 0, 0, specError("%s: printable ASCII only", f[0])
		}
	}
	return records, perRecord, nil
}

// orDefault returns [lo, hi], or [dlo, dhi] when both are 0 (the field
// left at its zero value).
func orDefault(lo, hi, dlo, dhi float64) (float64, float64) {
	if lo == 0 && hi == 0 {
		return dlo, dhi
	}
	return lo, hi
}

// blinkRange is the blink peak range at Fp1/Fp2 in µV.
func (s Spec) blinkRange() (float64, float64) {
	return orDefault(s.BlinkMinUV, s.BlinkMaxUV, blinkMinUV, blinkMaxUV)
}

// muscleRange is the burst RMS range at weight 1 in µV.
func (s Spec) muscleRange() (float64, float64) {
	return orDefault(s.MuscleMinUV, s.MuscleMaxUV, muscleMinUV, muscleMaxUV)
}

// muscleLength is the burst length range in seconds.
func (s Spec) muscleLength() (float64, float64) {
	return orDefault(s.MuscleMinSeconds, s.MuscleMaxSeconds, muscleMinSeconds, muscleMaxSeconds)
}

func (s Spec) startTime() time.Time {
	if s.Start.IsZero() {
		return time.Date(2024, time.March, 15, 10, 0, 0, 0, time.UTC)
	}
	return s.Start
}

// isBDF reports whether s writes 24-bit samples.
func (s Spec) isBDF() bool {
	return s.Format == ingest.FormatBDF || s.Format == ingest.FormatBDFPlusC
}

// hasAnnotations reports whether s writes an annotation signal.
func (s Spec) hasAnnotations() bool {
	return s.Format == ingest.FormatEDFPlusC || s.Format == ingest.FormatBDFPlusC
}

func printable(t string) bool {
	for i := 0; i < len(t); i++ {
		if t[i] < 32 || t[i] > 126 {
			return false
		}
	}
	return true
}
