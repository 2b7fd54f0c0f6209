package synth_test

import (
	"bytes"
	"fmt"

	"longwave/ingest"
	"longwave/ingest/synth"
)

// A slowed recording: a 7.5 Hz posterior rhythm that eye opening barely
// attenuates, written as EDF+C and read back.
func Example() {
	s := synth.Default()
	s.Seed = 42
	s.Duration = 60
	s.AlphaHz = 7.5
	s.AlphaOpenAttenuation = 0.2
	s.Periods = []ingest.Period{
		{State: ingest.EyesClosed, Start: 0, End: 40},
		{State: ingest.EyesOpen, Start: 40, End: 60},
	}
	b, err := synth.Bytes(s)
	if err != nil {
		fmt.Println(err)
		return
	}
	rec, err := ingest.Decode(bytes.NewReader(b), int64(len(b)), "slowed.edf", ingest.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	closed := s.ExpectedBandPower("O1", ingest.EyesClosed, 7, 8)
	open := s.ExpectedBandPower("O1", ingest.EyesOpen, 7, 8)
	fmt.Printf("%d bytes, %d channels at %g Hz, periods %v\n", len(b), len(rec.Channels), rec.Conditions.SampleRate, rec.Periods)
	fmt.Printf("O1 7-8 Hz: closed %.1f µV², open %.1f µV²\n", closed, open)
	// Output:
	// 576816 bytes, 19 channels at 250 Hz, periods [{closed 0 40} {open 40 60}]
	// O1 7-8 Hz: closed 101.0 µV², open 81.0 µV²
}
