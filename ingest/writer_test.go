package ingest

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"testing"
)

// This file holds a minimal EDF/BDF writer for tests, written from the
// layout in FORMATS.md 1.1–1.3 (Kemp et al. 1992; Kemp & Olivan 2003). Every
// header field is a string so that tests can write malformed values.

type testSignal struct {
	Label, Transducer, Unit string
	PhysMin, PhysMax        string
	DigMin, DigMax          string
	Prefilter               string
	Samples                 string // samples per record as written; "" = strconv of N
	N                       int    // samples per record actually written
	// Digital returns the digital value of sample j of record r (nil: a ramp).
	Digital func(r, j int) int
	// TAL returns the annotation bytes of record r (annotation signals).
	TAL func(r int) []byte
}

type testFile struct {
	BDF                           bool
	Version                       string // raw 8 bytes; "" = "0" or 0xFF BIOSEMI
	Patient, Recording            string
	StartDate, StartTime          string
	HeaderBytes, Reserved         string // "" = computed / blank
	Records, Duration, NumSignals string // "" = computed
	NRecords                      int    // records actually written
	Signals                       []testSignal
	Tail                          []byte // bytes appended after the records
}

func pad(s string, n int) []byte {
	b := bytes.Repeat([]byte{' '}, n)
	copy(b, s)
	return b
}

func (f testFile) width() int {
	if f.BDF {
		return 3
	}
	return 2
}

// build writes the file.
func (f testFile) build() []byte {
	var b bytes.Buffer
	ns := len(f.Signals)
	switch {
	case f.Version != "":
		b.Write(pad(f.Version, 8)[:8])
	case f.BDF:
		b.Write([]byte("\xffBIOSEMI"))
	default:
		b.Write(pad("0", 8))
	}
	or := func(s, def string) string {
		if s == "" {
			return def
		}
		return s
	}
	b.Write(pad(or(f.Patient, "X X X X"), 80))
	b.Write(pad(or(f.Recording, "Startdate X X X X"), 80))
	b.Write(pad(or(f.StartDate, "01.01.20"), 8))
	b.Write(pad(or(f.StartTime, "10.00.00"), 8))
	b.Write(pad(or(f.HeaderBytes, strconv.Itoa(256*(ns+1))), 8))
	b.Write(pad(f.Reserved, 44))
	b.Write(pad(or(f.Records, strconv.Itoa(f.NRecords)), 8))
	b.Write(pad(or(f.Duration, "1"), 8))
	b.Write(pad(or(f.NumSignals, strconv.Itoa(ns)), 4))
	field := func(n int, get func(s testSignal) string) {
		for _, s := range f.Signals {
			b.Write(pad(get(s), n)[:n])
		}
	}
	field(16, func(s testSignal) string { return s.Label })
	field(80, func(s testSignal) string { return s.Transducer })
	field(8, func(s testSignal) string { return s.Unit })
	field(8, func(s testSignal) string { return s.PhysMin })
	field(8, func(s testSignal) string { return s.PhysMax })
	field(8, func(s testSignal) string { return s.DigMin })
	field(8, func(s testSignal) string { return s.DigMax })
	field(80, func(s testSignal) string { return s.Prefilter })
	field(8, func(s testSignal) string { return or(s.Samples, strconv.Itoa(s.N)) })
	field(32, func(s testSignal) string { return "" })
	w := f.width()
	for r := 0; r < f.NRecords; r++ {
		for _, s := range f.Signals {
			if s.TAL != nil {
				slot := make([]byte, w*s.N)
				copy(slot, s.TAL(r))
				b.Write(slot)
				continue
			}
			for j := 0; j < s.N; j++ {
				v := (r*s.N + j) % 200
				if s.Digital != nil {
					v = s.Digital(r, j)
				}
				b.WriteByte(byte(v))
				b.WriteByte(byte(v >> 8))
				if w == 3 {
					b.WriteByte(byte(v >> 16))
				}
			}
		}
	}
	b.Write(f.Tail)
	return b.Bytes()
}

// eegSignal is an EEG signal with a 16-bit full-scale range of ±3276.7 µV
// (0.1 µV per step) and n samples per record.
func eegSignal(label string, n int) testSignal {
	return testSignal{Label: label, Transducer: "AgAgCl electrode", Unit: "uV",
		PhysMin: "-3276.8", PhysMax: "3276.7", DigMin: "-32768", DigMax: "32767",
		Prefilter: "HP:0.5Hz LP:70Hz N:50Hz", N: n}
}

// annotationSignal is an "EDF Annotations" signal of n samples whose record
// r holds a time-keeping TAL "+r" plus the TALs extra returns.
func annotationSignal(n int, recordDuration float64, extra func(r int) []byte) testSignal {
	return testSignal{Label: "EDF Annotations", PhysMin: "-1", PhysMax: "1", DigMin: "-32768", DigMax: "32767", N: n,
		TAL: func(r int) []byte {
			b := []byte(fmt.Sprintf("+%g\x14\x14\x00", float64(r)*recordDuration))
			if extra != nil {
				b = append(b, extra(r)...)
			}
			return b
		}}
}

// smallEDFPlus is a valid 3-record EDF+C with two EEG channels at 10 Hz
// and an annotation "Eyes closed" at 0.5 s lasting 2 s.
func smallEDFPlus() testFile {
	return testFile{Reserved: "EDF+C", NRecords: 3, Signals: []testSignal{
		eegSignal("EEG O1-REF", 10), eegSignal("EEG O2-REF", 10),
		annotationSignal(30, 1, func(r int) []byte {
			if r == 0 {
				return []byte("+0.5\x152\x14Eyes closed\x14\x00")
			}
			return nil
		}),
	}}
}

// writeTemp writes b to a file in a test's temporary directory.
func writeTemp(tb testing.TB, name string, b []byte) string {
	tb.Helper()
	p := filepath.Join(tb.TempDir(), name)
	if err := os.WriteFile(p, b, 0o644); err != nil {
		tb.Fatal(err)
	}
	return p
}
