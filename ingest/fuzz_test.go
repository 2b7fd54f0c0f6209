package ingest

import (
	"bytes"
	"errors"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// addSeeds adds the committed malformed files and small valid files to f.
func addSeeds(f *testing.F, bdf bool) {
	files, _ := filepath.Glob(filepath.Join(malformedDir, "*.[eb]df"))
	for _, p := range files {
		if b, err := os.ReadFile(p); err == nil && len(b) < 1<<16 {
			f.Add(b)
		}
	}
	valid := smallEDFPlus()
	if bdf {
		valid.BDF, valid.Reserved = true, "BDF+C"
		valid.Signals[2].Label = "BDF Annotations"
	}
	f.Add(valid.build())
	d := smallEDFPlus()
	d.BDF = bdf
	d.Reserved = "EDF+D"
	d.Signals[2].TAL = func(r int) []byte { return []byte("+" + string(rune('0'+3*r)) + "\x14\x14\x00") }
	f.Add(d.build())
	plain := smallEDFPlus()
	plain.BDF, plain.Reserved, plain.Signals = bdf, "", plain.Signals[:2]
	plain.Records = "-1"
	plain.Tail = []byte{1, 2, 3}
	f.Add(plain.build())
}

// checkDecodeResult asserts the decoder's contract on arbitrary input:
// either a *FormatError wrapping a sentinel, or a recording whose sample
// memory is bounded by the input size.
func checkDecodeResult(t *testing.T, data []byte, rec *Recording, err error) {
	if err != nil {
		var fe *FormatError
		if !errors.As(err, &fe) {
			t.Fatalf("error %v is not a *FormatError", err)
		}
		if !errors.Is(err, ErrInvalid) && !errors.Is(err, ErrUnsupported) && !errors.Is(err, io.ErrUnexpectedEOF) {
			t.Fatalf("error %v wraps no sentinel", err)
		}
		return
	}
	samples := 0
	for _, ch := range rec.Channels {
		samples += len(ch.Samples)
		for _, v := range ch.Samples {
			if math.IsNaN(float64(v)) {
				t.Fatalf("NaN sample in %s", ch.Label)
			}
		}
	}
	if samples > len(data)/2 {
		t.Fatalf("%d samples from %d bytes", samples, len(data))
	}
	for i := 1; i < len(rec.Periods); i++ {
		if rec.Periods[i].Start < rec.Periods[i-1].End {
			t.Fatalf("overlapping periods %v", rec.Periods)
		}
	}
}

func FuzzDecodeEDF(f *testing.F) {
	addSeeds(f, false)
	f.Fuzz(func(t *testing.T, data []byte) {
		rec, err := decode(bytes.NewReader(data), int64(len(data)), "fuzz.edf", Options{}, false)
		checkDecodeResult(t, data, rec, err)
	})
}

func FuzzDecodeBDF(f *testing.F) {
	addSeeds(f, true)
	f.Fuzz(func(t *testing.T, data []byte) {
		rec, err := decode(bytes.NewReader(data), int64(len(data)), "fuzz.bdf", Options{}, false)
		checkDecodeResult(t, data, rec, err)
	})
}

func FuzzTAL(f *testing.F) {
	for _, s := range []string{
		"+0\x14\x14\x00", "+180\x14Lights off\x14Close door\x14\x00", "+1800.2\x1525.5\x14Apnea\x14\x00",
		"+0.000000\x14\x14+0.000000\x14Segment: REC START\x14\x00", "-0.5\x14\x14\x00\x00\x00",
		"+0\x14\x14\x00+120\x14\xe4\xb8\xad\xe6\x96\x87\x14\x00", "+1x\x14", "0\x14\x14\x00",
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		tals, _, err := parseTALs(data)
		if err != nil {
			if err.Pos < 0 || err.Pos > len(data) {
				t.Fatalf("error position %d outside %d bytes", err.Pos, len(data))
			}
			return
		}
		for _, tl := range tals {
			if math.IsNaN(tl.Onset) || math.IsInf(tl.Onset, 0) || tl.Duration < 0 {
				t.Fatalf("bad TAL %+v", tl)
			}
			for _, s := range tl.Texts {
				if strings.ContainsAny(s, "\x14\x00") {
					t.Fatalf("text %q holds a TAL separator", s)
				}
			}
		}
	})
}

func FuzzPrefilter(f *testing.F) {
	for _, s := range []string{"HP:0.1Hz LP:70Hz N:50Hz", "HP:DC; LP:410", "HP:0,16; LP:500", "HP:0Hz LP:0Hz N:0Hz", "RF:50Hz"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		fl := ParsePrefilter(s)
		for _, q := range []Frequency{fl.HighPass, fl.LowPass, fl.Notch} {
			if q.Known && (q.Hz < 0 || math.IsNaN(q.Hz) || math.IsInf(q.Hz, 0)) {
				t.Fatalf("ParsePrefilter(%q) = %+v", s, fl)
			}
			if !q.Known && q.Hz != 0 {
				t.Fatalf("ParsePrefilter(%q): unknown edge with a value %+v", s, q)
			}
		}
	})
}

func FuzzLabel(f *testing.F) {
	for _, s := range []string{"EEG O1-REF", "Fp1-LE", "O1..", "FP1-F7", "Cpz.", "EEG A2-A1", "POL $A1"} {
		f.Add(s, "")
	}
	f.Fuzz(func(t *testing.T, label, transducer string) {
		name, _, kind, ok := NormalizeLabel(label, transducer)
		if ok {
			if canon, isPos := canonicalPosition(name); !isPos || canon != name {
				t.Fatalf("NormalizeLabel(%q) = %q ok but not a canonical position", label, name)
			}
		}
		switch kind {
		case KindEEG, KindEOG, KindECG, KindEMG, KindOther:
		default:
			t.Fatalf("NormalizeLabel(%q) kind %q", label, kind)
		}
	})
}
