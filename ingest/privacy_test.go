package ingest

import (
	"bytes"
	"encoding/json"
	"log"
	"log/slog"
	"runtime"
	"strings"
	"testing"
)

// Invented identifying values (an invented patient of an invented clinic),
// placed in every identifying header field (EDF+ items 3 and 4, FORMATS.md 1.6).
var identifying = []string{
	"MRN-4417-22", "4417", "14-MAR-1948", "1948", "Wilhelmina", "Quast",
	"EEG-88123", "88123", "TechKV", "03.02.23", "03-FEB-2023", "Elmstreet",
}

func identifyingFile() testFile {
	f := smallEDFPlus()
	f.Patient = "MRN-4417-22 F 14-MAR-1948 Wilhelmina_Quast Elmstreet_12"
	f.Recording = "Startdate 03-FEB-2023 EEG-88123/2023 TechKV Brainbox_X1"
	f.StartDate = "03.02.23"
	f.Signals[2].TAL = func(r int) []byte {
		b := []byte("+" + string(rune('0'+r)) + "\x14\x14\x00")
		if r == 1 {
			b = append(b, "+1.5\x14Wilhelmina Quast asked for water\x14eyes closed\x14\x00"...)
		}
		return b
	}
	return f
}

func assertNoIdentifying(t *testing.T, where, s string) {
	t.Helper()
	for _, v := range identifying {
		if strings.Contains(s, v) {
			t.Errorf("%s contains identifying value %q", where, v)
		}
	}
}

func TestIdentifyingFieldsDropped(t *testing.T) {
	var logs bytes.Buffer
	old := slog.Default()
	slog.SetDefault(slog.New(slog.NewTextHandler(&logs, &slog.HandlerOptions{Level: slog.LevelDebug})))
	oldOut := log.Writer()
	log.SetOutput(&logs)
	defer func() { slog.SetDefault(old); log.SetOutput(oldOut) }()

	f := identifyingFile()
	b := f.build()
	// The values really are in the file.
	for _, v := range []string{"Wilhelmina", "88123", "03.02.23"} {
		if !bytes.Contains(b, []byte(v)) {
			t.Fatalf("test file lacks %q", v)
		}
	}
	rec := decodeBytes(t, b, "visit.edf", Options{})
	js, err := json.Marshal(rec)
	if err != nil {
		t.Fatal(err)
	}
	assertNoIdentifying(t, "recording JSON", string(js))
	if rec.Conditions.Equipment != "Brainbox_X1" {
		t.Errorf("equipment %q, want the fifth recording subfield", rec.Conditions.Equipment)
	}
	if len(rec.Annotations) != 1 || rec.Annotations[0].Text != "eyes closed" {
		t.Errorf("annotations %v: want only the eye-state text", rec.Annotations)
	}
	h, err := DecodeHeader(bytes.NewReader(b), int64(len(b)), "visit.edf")
	if err != nil {
		t.Fatal(err)
	}
	js, _ = json.Marshal(h)
	assertNoIdentifying(t, "header JSON", string(js))

	// Errors at several fields of the same header.
	breaks := map[string]func(f *testFile){
		"records":  func(f *testFile) { f.Records = "x" },
		"signals":  func(f *testFile) { f.NumSignals = "5000" },
		"physical": func(f *testFile) { f.Signals[0].PhysMax = f.Signals[0].PhysMin },
		"samples":  func(f *testFile) { f.Signals[1].Samples = "-2" },
		"truncate": func(f *testFile) { f.NRecords = 0; f.Records = "3" },
		"tal": func(f *testFile) {
			f.Signals[2].TAL = func(int) []byte { return []byte("+0\x14\x14\x00+1\x14Wilhelmina Quast\x00") }
		},
		"no eeg": func(f *testFile) { f.Signals[0].Label, f.Signals[1].Label = "Resp", "Resp" },
		"edfd": func(f *testFile) {
			f.Reserved = "EDF+D"
			f.Signals[2].TAL = func(int) []byte { return []byte("+0\x14Wilhelmina Quast\x14\x00") }
		},
	}
	for name, change := range breaks {
		g := identifyingFile()
		change(&g)
		bb := g.build()
		_, err := Decode(bytes.NewReader(bb), int64(len(bb)), "visit.edf", Options{})
		if err == nil {
			t.Errorf("%s: decode succeeded, want an error", name)
			continue
		}
		assertNoIdentifying(t, name+" error", err.Error())
	}
	runtime.Gosched()
	assertNoIdentifying(t, "log output", logs.String())
}
