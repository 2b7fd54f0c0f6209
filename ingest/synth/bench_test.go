package synth

import (
	"io"
	"testing"

	"longwave/ingest"
)

// benchSpec is the 30-minute, 21-channel, 500 Hz recording of the decoding
// benchmark (issue 2 point 10) or the 10-minute, 19-channel, 250 Hz visit of
// the demo and the BIDS speed test (issue 4 point 9).
func benchSpec(minutes float64, rate float64, channels int) Spec {
	s := Default()
	s.Duration = minutes * 60
	s.SampleRate = rate
	s.Channels = append(append([]string(nil), ingest.Standard19[:]...), "A1", "A2")[:channels]
	s.Periods = nil
	return s
}

func BenchmarkWrite10min19ch250Hz(b *testing.B) {
	s := benchSpec(10, 250, 19)
	for b.Loop() {
		if err := Write(io.Discard, s); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkWrite30min21ch500Hz(b *testing.B) {
	s := benchSpec(30, 500, 21)
	for b.Loop() {
		if err := Write(io.Discard, s); err != nil {
			b.Fatal(err)
		}
	}
}
