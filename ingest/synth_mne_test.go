package ingest_test

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"

	"longwave/ingest"
	"longwave/ingest/synth"
)

// synthMNESpecs are short recordings from the synthetic writer (package
// ingest/synth) included in the MNE comparison of mne_test.go: an EDF+C
// and a BDF+C, 12 s each so that the committed files stay small.
func synthMNESpecs() map[string]synth.Spec {
	edf := synth.Default()
	edf.Duration = 12
	edf.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 6}, {State: ingest.EyesOpen, Start: 6, End: 12}}
	bdf := edf
	bdf.Format = ingest.FormatBDFPlusC
	bdf.SampleRate = 512
	bdf.UVPerStep = 0.03125
	bdf.Seed = 7
	return map[string]synth.Spec{"synth_edfplus.edf": edf, "synth_bdfplus.bdf": bdf}
}

// TestMNESynthFiles keeps testdata/ingest/mne/synthetic/synth_* equal to
// what the synthetic writer produces now. When the writer changes, rewrite
// them (go test ./ingest/ -run TestMNESynthFiles -update) and re-run
// make_golden.py; TestMNEAgreement then compares them with MNE.
func TestMNESynthFiles(t *testing.T) {
	dir := filepath.Join("..", "testdata", "ingest", "mne", "synthetic")
	for name, spec := range synthMNESpecs() {
		b, err := synth.Bytes(spec)
		if err != nil {
			t.Fatalf("%s: synth.Bytes: %v", name, err)
		}
		p := filepath.Join(dir, name)
		if updateSynth() {
			if err := os.WriteFile(p, b, 0o644); err != nil {
				t.Fatal(err)
			}
		}
		got, err := os.ReadFile(p)
		if err != nil {
			t.Fatalf("%v (run go test ./ingest/ -run TestMNESynthFiles -update, then make_golden.py)", err)
		}
		if !bytes.Equal(got, b) {
			t.Errorf("%s differs from the synthetic writer's output: run go test ./ingest/ -run TestMNESynthFiles -update, then /usr/bin/python3 testdata/ingest/mne/make_golden.py", name)
		}
	}
}
