package ingest

import (
	"bytes"
	"errors"
	"flag"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// update rewrites the generated files under testdata (go test ./ingest/ -run Malformed -update).
var update = flag.Bool("update", false, "rewrite generated testdata files")

// malformedDir holds the generated malformed files (module-root testdata).
const malformedDir = "../testdata/ingest/malformed"

// malformedCase is one broken file, the generator that makes it, and the
// error Decode must return: field, signal, byte offset and sentinel.
type malformedCase struct {
	name   string
	make   func() []byte
	field  string
	signal int
	offset int64
	err    error
}

// mutate returns smallEDFPlus with change applied, built.
func mutate(change func(f *testFile)) func() []byte {
	return func() []byte {
		f := smallEDFPlus()
		change(&f)
		return f.build()
	}
}

// Layout of smallEDFPlus: 3 signals (header 1024 bytes), record of
// 2·(10+10+30) = 100 bytes; the annotation slot starts 40 bytes into a record.
const (
	smallNS         = 3
	smallData       = 1024
	smallRecord     = 100
	smallAnnotation = 40
)

func sigOff(f, i int) int64 { return signalFieldOffset(f, i, smallNS) }

func malformedCases() []malformedCase {
	withTAL := func(rec int, tal string) func(f *testFile) {
		return func(f *testFile) {
			f.Signals[2].TAL = func(r int) []byte {
				if r == rec {
					return []byte(tal)
				}
				return []byte("+" + strconv.Itoa(r) + "\x14\x14\x00")
			}
		}
	}
	bigRecord := func() []byte {
		f := testFile{NRecords: 0, Records: "1"}
		for i := 0; i < 40; i++ {
			s := eegSignal("EEG Cz", MaxSamplesPerRecord)
			s.N = 0
			s.Samples = strconv.Itoa(MaxSamplesPerRecord)
			f.Signals = append(f.Signals, s)
		}
		return f.build()
	}
	return []malformedCase{
		{"empty.edf", func() []byte { return nil }, "version", -1, 0, io.ErrUnexpectedEOF},
		{"png_renamed.edf", func() []byte {
			// An invented 1×1 PNG: signature, IHDR, IEND (PNG spec layout).
			return []byte("\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR\x00\x00\x00\x01\x00\x00\x00\x01\x08\x02\x00\x00\x00\x90wS\xde\x00\x00\x00\x00IEND\xaeB`\x82")
		}, "version", -1, 0, ErrUnsupported},
		{"version_garbage.edf", mutate(func(f *testFile) { f.Version = "1.0" }), "version", -1, 0, ErrUnsupported},
		{"truncated_main_header.edf", func() []byte { return smallEDFPlus().build()[:100] }, "local recording identification", -1, 88, io.ErrUnexpectedEOF},
		{"truncated_signal_header.edf", func() []byte { return smallEDFPlus().build()[:256+48+20] }, "transducer type", 0, 304, io.ErrUnexpectedEOF},
		{"truncated_signal_header_late.edf", func() []byte { return smallEDFPlus().build()[:1000] }, "reserved", 2, 992, io.ErrUnexpectedEOF},
		{"records_non_numeric.edf", mutate(func(f *testFile) { f.Records = "three" }), "number of data records", -1, 236, ErrInvalid},
		{"records_negative.edf", mutate(func(f *testFile) { f.Records = "-5" }), "number of data records", -1, 236, ErrInvalid},
		{"duration_non_numeric.edf", mutate(func(f *testFile) { f.Duration = "one" }), "duration of a data record", -1, 244, ErrInvalid},
		{"duration_negative.edf", mutate(func(f *testFile) { f.Duration = "-1" }), "duration of a data record", -1, 244, ErrInvalid},
		{"duration_zero_with_signals.edf", mutate(func(f *testFile) { f.Duration = "0" }), "duration of a data record", -1, 244, ErrUnsupported},
		{"duration_tiny.edf", mutate(func(f *testFile) { f.Duration = "1e-300" }), "duration of a data record", -1, 244, ErrUnsupported},
		{"signals_non_numeric.edf", mutate(func(f *testFile) { f.NumSignals = "x" }), "number of signals", -1, 252, ErrInvalid},
		{"signals_zero.edf", mutate(func(f *testFile) { f.NumSignals = "0" }), "number of signals", -1, 252, ErrInvalid},
		{"signals_negative.edf", mutate(func(f *testFile) { f.NumSignals = "-3" }), "number of signals", -1, 252, ErrInvalid},
		{"signals_huge.edf", mutate(func(f *testFile) { f.NumSignals = "4000" }), "number of signals", -1, 252, ErrInvalid},
		{"signals_more_than_file.edf", mutate(func(f *testFile) { f.NumSignals = "900" }), "label", 66, 1312, io.ErrUnexpectedEOF},
		{"samples_non_numeric.edf", mutate(func(f *testFile) { f.Signals[1].Samples = "ten" }), "nr of samples in each data record", 1, sigOff(sfSamples, 1), ErrInvalid},
		{"samples_zero.edf", mutate(func(f *testFile) { f.Signals[0].Samples = "0" }), "nr of samples in each data record", 0, sigOff(sfSamples, 0), ErrInvalid},
		{"samples_huge.edf", mutate(func(f *testFile) { f.Signals[0].Samples = "99999999" }), "nr of samples in each data record", 0, sigOff(sfSamples, 0), ErrInvalid},
		{"samples_exceed_file.edf", mutate(func(f *testFile) { f.Signals[0].Samples = "5000" }), "number of data records", -1, 236, io.ErrUnexpectedEOF},
		{"record_too_large.edf", bigRecord, "nr of samples in each data record", 32, signalFieldOffset(sfSamples, 32, 40), ErrInvalid},
		{"physical_min_non_numeric.edf", mutate(func(f *testFile) { f.Signals[0].PhysMin = "low" }), "physical minimum", 0, sigOff(sfPhysMin, 0), ErrInvalid},
		{"physical_max_nan.edf", mutate(func(f *testFile) { f.Signals[1].PhysMax = "NaN" }), "physical maximum", 1, sigOff(sfPhysMax, 1), ErrInvalid},
		{"physical_min_equals_max.edf", mutate(func(f *testFile) { f.Signals[1].PhysMin, f.Signals[1].PhysMax = "100", "100" }), "physical maximum", 1, sigOff(sfPhysMax, 1), ErrInvalid},
		{"digital_min_equals_max.edf", mutate(func(f *testFile) { f.Signals[0].DigMin, f.Signals[0].DigMax = "0", "0" }), "digital maximum", 0, sigOff(sfDigMax, 0), ErrInvalid},
		{"digital_max_below_min.edf", mutate(func(f *testFile) { f.Signals[1].DigMin, f.Signals[1].DigMax = "100", "-100" }), "digital maximum", 1, sigOff(sfDigMax, 1), ErrInvalid},
		{"digital_min_out_of_range.edf", mutate(func(f *testFile) { f.Signals[0].DigMin = "-40000" }), "digital minimum", 0, sigOff(sfDigMin, 0), ErrInvalid},
		{"digital_max_fraction.edf", mutate(func(f *testFile) { f.Signals[0].DigMax = "2047.5" }), "digital maximum", 0, sigOff(sfDigMax, 0), ErrInvalid},
		{"tal_bad_onset_byte.edf", mutate(withTAL(1, "+1\x14\x14\x00+x2\x14Eyes closed\x14\x00")), "TAL onset", 2, smallData + smallRecord + smallAnnotation + 6, ErrInvalid},
		{"tal_without_sign.edf", mutate(withTAL(0, "0\x14\x14\x00")), "TAL onset", 2, smallData + smallAnnotation, ErrInvalid},
		{"tal_bad_duration_byte.edf", mutate(withTAL(2, "+2\x14\x14\x00+2.5\x15-1\x14Eyes open\x14\x00")), "TAL duration", 2, 1024 + 2*smallRecord + smallAnnotation + 10, ErrInvalid},
		{"tal_text_unterminated.edf", mutate(withTAL(0, "+0\x14\x14\x00+0.5\x14"+strings.Repeat("A", 60))), "TAL annotation", 2, smallData + smallAnnotation + 10, ErrInvalid},
		{"tal_onset_unterminated.edf", mutate(withTAL(0, "+"+strings.Repeat("1", 59))), "TAL onset", 2, smallData + smallAnnotation, ErrInvalid},
		{"edfd_missing_time_keeping.edf", mutate(func(f *testFile) {
			f.Reserved = "EDF+D"
			withTAL(1, "+1\x14Eyes open\x14\x00")(f)
		}), "TAL onset", 2, smallData + smallRecord + smallAnnotation, ErrInvalid},
		{"edfd_onset_backwards.edf", mutate(func(f *testFile) {
			f.Reserved = "EDF+D"
			withTAL(2, "+0.5\x14\x14\x00")(f)
		}), "TAL onset", 2, smallData + 2*smallRecord + smallAnnotation, ErrInvalid},
		{"no_eeg_channel.edf", mutate(func(f *testFile) {
			f.Signals[0].Label, f.Signals[1].Label = "Resp chest", "Body temp"
			f.Signals[0].Transducer, f.Signals[1].Transducer = "belt", "thermistor"
		}), "label", -1, 256, ErrUnsupported},
		{"bdf_wrong_id.bdf", func() []byte {
			f := smallEDFPlus()
			f.BDF = true
			f.Version = "\xffBIOSEMX"
			return f.build()
		}, "version", -1, 0, ErrUnsupported},
		{"bdf_no_whole_record.bdf", func() []byte {
			f := smallEDFPlus()
			f.BDF, f.Reserved = true, "BDF+C"
			f.Signals[2].Label = "BDF Annotations"
			b := f.build()
			return b[:smallData+100] // a BDF record takes 150 bytes
		}, "number of data records", -1, 236, io.ErrUnexpectedEOF},
	}
}

// TestMalformedGenerated checks that the committed files are what the
// generator writes (run with -update to rewrite them).
func TestMalformedGenerated(t *testing.T) {
	cases := malformedCases()
	if *update {
		if err := os.MkdirAll(malformedDir, 0o755); err != nil {
			t.Fatal(err)
		}
		for _, c := range cases {
			if err := os.WriteFile(filepath.Join(malformedDir, c.name), c.make(), 0o644); err != nil {
				t.Fatal(err)
			}
		}
	}
	if len(cases) < 25 {
		t.Errorf("%d malformed cases, want at least 25", len(cases))
	}
	for _, c := range cases {
		got, err := os.ReadFile(filepath.Join(malformedDir, c.name))
		if err != nil {
			t.Errorf("%s: %v (run go test ./ingest/ -run TestMalformedGenerated -update)", c.name, err)
			continue
		}
		if !bytes.Equal(got, c.make()) {
			t.Errorf("%s: committed file differs from the generator (run with -update)", c.name)
		}
	}
}

// TestMalformedFiles decodes every committed malformed file and checks that
// the error names the file, the field, the signal and the byte offset.
func TestMalformedFiles(t *testing.T) {
	for _, c := range malformedCases() {
		t.Run(c.name, func(t *testing.T) {
			path := filepath.Join(malformedDir, c.name)
			if _, err := os.Stat(path); err != nil {
				t.Fatalf("%s missing: run go test ./ingest/ -run TestMalformedGenerated -update", path)
			}
			rec, err := ReadFile(path, Options{})
			if err == nil {
				t.Fatalf("ReadFile(%s) = recording with %d channels, want an error", c.name, len(rec.Channels))
			}
			var fe *FormatError
			if !errors.As(err, &fe) {
				t.Fatalf("ReadFile(%s) error %v is not a *FormatError", c.name, err)
			}
			if fe.File != c.name {
				t.Errorf("%s: File = %q", c.name, fe.File)
			}
			if fe.Field != c.field || fe.Signal != c.signal || fe.Offset != c.offset {
				t.Errorf("%s: field %q signal %d offset %d, want %q %d %d (%v)", c.name, fe.Field, fe.Signal, fe.Offset, c.field, c.signal, c.offset, err)
			}
			if !errors.Is(err, c.err) {
				t.Errorf("%s: error %v does not wrap %v", c.name, err, c.err)
			}
			if fe.Signal >= 0 && errors.Is(err, ErrInvalid) && fe.Label == "" {
				t.Errorf("%s: signal error without the signal's label: %v", c.name, err)
			}
			msg := err.Error()
			if !strings.HasPrefix(msg, "ingest: "+c.name+": ") || !strings.Contains(msg, c.field) {
				t.Errorf("%s: message %q does not start with the file and name the field", c.name, msg)
			}
		})
	}
}
