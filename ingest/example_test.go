package ingest_test

import (
	"flag"
	"fmt"

	"longwave/ingest"
)

// ExampleReadFile decodes a small EDF+C written by the package's tests
// (invented signals) and prints what a visit's recording holds.
func ExampleReadFile() {
	rec, err := ingest.ReadFile("../testdata/ingest/mne/synthetic/synthetic_edfplus.edf", ingest.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, ch := range rec.Channels {
		fmt.Printf("%s (%s, %s) %g Hz\n", ch.Label, ch.Original, ch.Kind, ch.SampleRate)
	}
	c := rec.Conditions
	fmt.Println(c.Format, c.SampleRate, c.Duration, c.PeriodSource, rec.Periods)
	// Output:
	// Fp1 (EEG Fp1-REF, EEG) 128 Hz
	// T7 (EEG T3-REF, EEG) 128 Hz
	// O1 (O1.., EEG) 128 Hz
	// ECG (ECG, ECG) 128 Hz
	// EDF+C 128 3 annotations [{closed 0.5 2}]
}

// updateSynth reports whether -update was given (the flag is defined by the
// package's internal tests, which share this test binary).
func updateSynth() bool {
	f := flag.Lookup("update")
	return f != nil && f.Value.String() == "true"
}
