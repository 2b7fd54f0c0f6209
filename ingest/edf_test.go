package ingest

import (
	"bytes"
	"errors"
	"math"
	"strings"
	"testing"
)

func decodeBytes(tb testing.TB, b []byte, name string, opt Options) *Recording {
	tb.Helper()
	rec, err := Decode(bytes.NewReader(b), int64(len(b)), name, opt)
	if err != nil {
		tb.Fatalf("Decode(%s): %v", name, err)
	}
	return rec
}

func hasCaution(rec *Recording, code string) bool {
	for _, c := range rec.Conditions.Cautions {
		if c.Code == code {
			return true
		}
	}
	return false
}

func TestScaling(t *testing.T) {
	// phys = pmin + (dig − dmin)·(pmax − pmin)/(dmax − dmin) (FORMATS.md 1.3,
	// the formula of EDFlib, BioSemi's format page and MNE), times 1e3 for mV
	// and 1e6 for V. Expected values are worked by hand from that formula.
	tests := []struct {
		name                   string
		bdf                    bool
		unit                   string
		pmin, pmax, dmin, dmax string
		dig                    int
		want                   float64
	}{
		{"unit gain (eegmmidb range)", false, "uV", "-8092", "8092", "-8092", "8092", 123, 123},
		{"0.1 uV per step", false, "uV", "-3276.8", "3276.7", "-32768", "32767", 10, 1.0},
		{"inverted range dmin", false, "uV", "8711", "-8711", "-32768", "32767", -32768, 8711},
		{"inverted range dmax", false, "uV", "8711", "-8711", "-32768", "32767", 32767, -8711},
		{"inverted range zero", false, "uV", "8711", "-8711", "-32768", "32767", 0, 8711 - 32768*17422.0/65535},
		{"asymmetric digital", false, "uV", "0", "1", "-100", "1000", 1000, 1},
		{"asymmetric digital low", false, "uV", "0", "1", "-100", "1000", -100, 0},
		{"volts", false, "V", "-10", "10", "-2048", "2048", 1024, 5e6},
		{"millivolts", false, "mV", "-5", "5", "-32768", "32767", -32768, -5000},
		{"micro sign U+00B5", false, "µV", "-100", "100", "-100", "100", 7, 7},
		{"greek mu U+03BC", false, "μV", "-100", "100", "-100", "100", -7, -7},
		{"comma decimal", false, "uV", "-3276,8", "3276,7", "-32768", "32767", 10, 1.0},
		{"bdf biosemi range", true, "uV", "-262144", "262143", "-8388608", "8388607", -8388608, -262144},
		{"bdf negative", true, "uV", "-262144", "262143", "-8388608", "8388607", -1, -262144 + 8388607*524287.0/16777215},
		{"bdf max", true, "uV", "-262144", "262143", "-8388608", "8388607", 8388607, 262143},
		{"non-volt unit kept", false, "degC", "30", "40", "0", "1000", 500, 35},
	}
	for _, tt := range tests {
		s := testSignal{Label: "Cz", Unit: tt.unit, PhysMin: tt.pmin, PhysMax: tt.pmax, DigMin: tt.dmin, DigMax: tt.dmax,
			N: 4, Digital: func(r, j int) int { return tt.dig }}
		f := testFile{BDF: tt.bdf, NRecords: 2, Signals: []testSignal{s}}
		rec := decodeBytes(t, f.build(), "scale.edf", Options{})
		got := rec.Channels[0].Samples[5]
		if d := math.Abs(float64(got) - tt.want); d > 1e-6*math.Max(1, math.Abs(tt.want)) {
			t.Errorf("%s: digital %d = %v, want %v", tt.name, tt.dig, got, tt.want)
		}
	}
}

func TestTolerances(t *testing.T) {
	base := func() testFile {
		return testFile{NRecords: 4, Signals: []testSignal{eegSignal("EEG Cz", 5), eegSignal("EEG Pz", 5)}}
	}
	t.Run("records -1 counted from size", func(t *testing.T) {
		f := base()
		f.Records = "-1"
		rec := decodeBytes(t, f.build(), "m1.edf", Options{})
		if n := len(rec.Channels[0].Samples); n != 20 || !hasCaution(rec, "records_unknown") {
			t.Errorf("got %d samples, cautions %v; want 20 and records_unknown", n, rec.Conditions.Cautions)
		}
	})
	t.Run("short last record dropped", func(t *testing.T) {
		f := base()
		f.Records = "-1"
		f.Tail = make([]byte, 13)
		rec := decodeBytes(t, f.build(), "short.edf", Options{})
		if n := len(rec.Channels[0].Samples); n != 20 || !hasCaution(rec, "short_last_record") {
			t.Errorf("got %d samples, cautions %v", n, rec.Conditions.Cautions)
		}
	})
	t.Run("more records declared than present", func(t *testing.T) {
		f := base()
		f.Records = "1000"
		f.Tail = make([]byte, 7)
		rec := decodeBytes(t, f.build(), "unstopped.edf", Options{})
		var text string
		for _, c := range rec.Conditions.Cautions {
			if c.Code == "records_missing" {
				text = c.Text
			}
		}
		if n := len(rec.Channels[0].Samples); n != 20 || !strings.Contains(text, "1000") || !strings.Contains(text, "4") {
			t.Errorf("got %d samples, caution %q; want 20 and both counts named", n, text)
		}
		if !hasCaution(rec, "short_last_record") {
			t.Errorf("no short_last_record caution: %v", rec.Conditions.Cautions)
		}
	})
	t.Run("fewer records declared than present", func(t *testing.T) {
		f := base()
		f.Records = "2"
		rec := decodeBytes(t, f.build(), "fewer.edf", Options{})
		if n := len(rec.Channels[0].Samples); n != 10 || !hasCaution(rec, "records_extra") {
			t.Errorf("got %d samples, cautions %v", n, rec.Conditions.Cautions)
		}
	})
	t.Run("header byte count wrong", func(t *testing.T) {
		f := base()
		f.HeaderBytes = "999"
		rec := decodeBytes(t, f.build(), "hb.edf", Options{})
		if n := len(rec.Channels[0].Samples); n != 20 || !hasCaution(rec, "header_bytes") {
			t.Errorf("got %d samples, cautions %v", n, rec.Conditions.Cautions)
		}
	})
	t.Run("trailing spaces, right-justified numbers, comma duration", func(t *testing.T) {
		f := base()
		f.Duration = "   0,5"
		f.Records = "  4"
		f.Signals[0].PhysMin = "  -3276,8"[:8]
		rec := decodeBytes(t, f.build(), "spaces.edf", Options{})
		if rec.Conditions.SampleRate != 10 || len(rec.Channels[0].Samples) != 20 {
			t.Errorf("rate %v, %d samples; want 10 Hz, 20", rec.Conditions.SampleRate, len(rec.Channels[0].Samples))
		}
	})
	t.Run("different rates per signal", func(t *testing.T) {
		f := base()
		f.Signals = append(f.Signals, eegSignal("EEG Fz", 5), eegSignal("EEG Oz", 50),
			testSignal{Label: "SpO2", Unit: "%", PhysMin: "0", PhysMax: "100", DigMin: "0", DigMax: "1000", N: 1})
		rec := decodeBytes(t, f.build(), "rates.edf", Options{})
		// Cz, Pz, Fz at 5 Hz are the majority among the 19 positions; Oz is not one of them.
		if rec.Conditions.SampleRate != 5 {
			t.Errorf("EEG rate %v, want 5", rec.Conditions.SampleRate)
		}
		if ch := rec.Channel("SpO2"); ch == nil || ch.SampleRate != 1 || len(ch.Samples) != 4 || ch.Kind != KindOther {
			t.Errorf("SpO2 channel %+v", ch)
		}
		if ch := rec.Channel("Oz"); ch == nil || len(ch.Samples) != 200 {
			t.Errorf("Oz channel wrong")
		}
	})
	t.Run("plus flag without annotations", func(t *testing.T) {
		f := base()
		f.Reserved = "EDF+C"
		rec := decodeBytes(t, f.build(), "flag.edf", Options{})
		if rec.Conditions.Format != FormatEDF || !hasCaution(rec, "plus_flag_without_annotations") {
			t.Errorf("format %s cautions %v", rec.Conditions.Format, rec.Conditions.Cautions)
		}
	})
}

func TestDiscontinuous(t *testing.T) {
	// EDF+D record times come from the time-keeping TALs, not index × duration
	// (Kemp & Olivan 2003 §2.2.4; FORMATS.md 7 item 2).
	onsets := []string{"+0", "+1", "+10", "+11", "+11.9999"}
	f := testFile{Reserved: "EDF+D", NRecords: 5, Signals: []testSignal{
		eegSignal("EEG O1", 8),
		{Label: "EDF Annotations", PhysMin: "-1", PhysMax: "1", DigMin: "-32768", DigMax: "32767", N: 20,
			TAL: func(r int) []byte { return []byte(onsets[r] + "\x14\x14\x00") }},
	}}
	rec := decodeBytes(t, f.build(), "gaps.edf", Options{})
	want := []Segment{{Onset: 0, First: 0, Count: 16}, {Onset: 10, First: 16, Count: 24}}
	if len(rec.Segments) != len(want) {
		t.Fatalf("segments %v, want %v", rec.Segments, want)
	}
	for i := range want {
		if rec.Segments[i] != want[i] {
			t.Errorf("segment %d = %+v, want %+v", i, rec.Segments[i], want[i])
		}
	}
	if rec.Conditions.Format != FormatEDFPlusD || rec.Conditions.Duration != 5 {
		t.Errorf("format %s duration %v", rec.Conditions.Format, rec.Conditions.Duration)
	}
	if p := rec.Periods; len(p) != 1 || p[0].End != 13 {
		t.Errorf("periods %v, want one unknown period to 13 s", p)
	}
}

func TestSubsecondStartAndAnnotations(t *testing.T) {
	// The first TAL "+0.25" puts the first sample 0.25 s after the header
	// time (EDF+ §2.2.4); annotation onsets become seconds after that sample.
	f := testFile{Reserved: "EDF+C", NRecords: 4, Signals: []testSignal{
		eegSignal("EEG O1", 10),
		{Label: "EDF Annotations", PhysMin: "-1", PhysMax: "1", DigMin: "-32768", DigMax: "32767", N: 30,
			TAL: func(r int) []byte {
				b := []byte("+" + []string{"0.25", "1.25", "2.25", "3.25"}[r] + "\x14\x14\x00")
				switch r {
				case 0:
					b = append(b, "+0.75\x14Eyes Closed\x14\x00"...)
				case 2:
					b = append(b, "+2.25\x14eyes-open\x14Jane Roe called\x14\x00"...)
				}
				return b
			}},
	}}
	rec := decodeBytes(t, f.build(), "sub.edf", Options{})
	want := []Period{{EyesClosed, 0.5, 2}, {EyesOpen, 2, 4}}
	if len(rec.Periods) != 2 || rec.Periods[0] != want[0] || rec.Periods[1] != want[1] {
		t.Errorf("periods %v, want %v", rec.Periods, want)
	}
	if rec.Conditions.PeriodSource != FromAnnotations {
		t.Errorf("period source %s", rec.Conditions.PeriodSource)
	}
	if len(rec.Annotations) != 2 || rec.Annotations[0].Text != "Eyes Closed" || rec.Annotations[1].Text != "eyes-open" {
		t.Errorf("annotations %v: want only the two eye-state ones", rec.Annotations)
	}
	rec = decodeBytes(t, f.build(), "sub.edf", Options{DeclaredState: EyesOpen})
	if rec.Conditions.PeriodSource != FromUser || len(rec.Periods) != 1 || rec.Periods[0] != (Period{EyesOpen, 0, 4}) {
		t.Errorf("declared: %s %v", rec.Conditions.PeriodSource, rec.Periods)
	}
	none := EyePhrases{}
	rec = decodeBytes(t, f.build(), "sub.edf", Options{Phrases: &none})
	if rec.Conditions.PeriodSource != FromNothing || len(rec.Periods) != 1 || rec.Periods[0] != (Period{EyesUnknown, 0, 4}) || len(rec.Annotations) != 0 {
		t.Errorf("no phrases: %s %v %v", rec.Conditions.PeriodSource, rec.Periods, rec.Annotations)
	}
	if _, err := Decode(bytes.NewReader(f.build()), int64(len(f.build())), "sub.edf", Options{DeclaredState: "drowsy"}); err == nil {
		t.Error("declared state drowsy accepted")
	}
}

func TestZeroPaddingCut(t *testing.T) {
	// Like eegmmidb: the last record is zero-padded after the annotated end.
	mk := func(withEnd bool) testFile {
		return testFile{Reserved: "EDF+C", NRecords: 3, Signals: []testSignal{
			{Label: "Cz", Unit: "uV", PhysMin: "-100", PhysMax: "100", DigMin: "-100", DigMax: "100", N: 10,
				Digital: func(r, j int) int {
					if r == 2 && j >= 4 {
						return 0
					}
					return 1 + j
				}},
			annotationSignal(20, 1, func(r int) []byte {
				if r == 0 && withEnd {
					return []byte("+0\x152.4\x14T0\x14\x00")
				}
				return nil
			}),
		}}
	}
	rec := decodeBytes(t, mk(true).build(), "pad.edf", Options{})
	if n := len(rec.Channels[0].Samples); n != 24 || rec.Segments[0].Count != 24 || !hasCaution(rec, "zero_padding_cut") {
		t.Errorf("with end: %d samples, segments %v, cautions %v; want 24", n, rec.Segments, rec.Conditions.Cautions)
	}
	if rec.Conditions.Duration != 2.4 {
		t.Errorf("duration %v, want 2.4", rec.Conditions.Duration)
	}
	rec = decodeBytes(t, mk(false).build(), "pad.edf", Options{})
	if n := len(rec.Channels[0].Samples); n != 30 {
		t.Errorf("without end annotation: %d samples, want all 30", n)
	}
}

func TestNoEEGChannel(t *testing.T) {
	f := testFile{NRecords: 2, Signals: []testSignal{{Label: "Resp", Unit: "mV", PhysMin: "-1", PhysMax: "1", DigMin: "-10", DigMax: "10", N: 2}}}
	b := f.build()
	_, err := Decode(bytes.NewReader(b), int64(len(b)), "resp.edf", Options{})
	var fe *FormatError
	if !errors.As(err, &fe) || !errors.Is(err, ErrUnsupported) || fe.Field != "label" {
		t.Errorf("Decode of a file without EEG: %v, want an ErrUnsupported FormatError on label", err)
	}
}

func TestDecodeHeaderOnly(t *testing.T) {
	b := smallEDFPlus().build()
	h, err := DecodeHeader(bytes.NewReader(b), int64(len(b)), "small.edf")
	if err != nil {
		t.Fatal(err)
	}
	if h.Format != FormatEDFPlusC || h.Records != 3 || len(h.Signals) != 3 || !h.Signals[2].Annotation || h.RecordBytes != 100 {
		t.Errorf("header %+v", h)
	}
}

// TestDecodeLoops checks the unrolled loops against a one-sample-at-a-time
// reading of the same bytes, for every length 0..9 (tails included).
func TestDecodeLoops(t *testing.T) {
	src := make([]byte, 3*9)
	for i := range src {
		src[i] = byte(37*i + 11)
	}
	for n := 0; n <= 9; n++ {
		got16, got24 := make([]float32, n), make([]float32, n)
		decode16(got16, src, 0.5, 3)
		decode24(got24, src, 0.25, -1)
		for j := 0; j < n; j++ {
			d16 := int(int16(uint16(src[2*j]) | uint16(src[2*j+1])<<8))
			d24 := int(src[3*j]) | int(src[3*j+1])<<8 | int(src[3*j+2])<<16
			if d24 >= 1<<23 {
				d24 -= 1 << 24
			}
			if w := float32(3 + 0.5*float64(d16)); got16[j] != w {
				t.Errorf("decode16 n=%d [%d] = %v, want %v", n, j, got16[j], w)
			}
			if w := float32(-1 + 0.25*float64(d24)); got24[j] != w {
				t.Errorf("decode24 n=%d [%d] = %v, want %v", n, j, got24[j], w)
			}
		}
	}
}

func TestReadFile(t *testing.T) {
	p := writeTemp(t, "visit.edf", smallEDFPlus().build())
	rec, err := ReadFile(p, Options{})
	if err != nil || rec.Name != "visit.edf" || len(rec.Channels) != 2 {
		t.Fatalf("ReadFile = %v, %v", rec, err)
	}
	dir := t.TempDir()
	if _, err := ReadFile(dir, Options{}); err == nil || strings.Contains(err.Error(), dir) {
		t.Errorf("ReadFile(directory) = %v: want an error without the full path", err)
	}
	missing := dir + "/Jane_Roe/none.edf"
	if _, err := ReadFile(missing, Options{}); err == nil || strings.Contains(err.Error(), "Jane_Roe") {
		t.Errorf("ReadFile(missing) = %v: want an error naming only the base name", err)
	}
}
