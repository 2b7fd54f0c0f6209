package ingest

import (
	"bytes"
	"testing"
)

// thirtyMinuteEDF is a 30-minute, 21-channel (Standard19 + A1 + A2), 500 Hz
// EDF+C with 1-s records: 21·500·2·1800 bytes ≈ 37.8 MB of samples.
func thirtyMinuteEDF() []byte {
	labels := append(append([]string(nil), Standard19[:]...), "A1", "A2")
	f := testFile{Reserved: "EDF+C", NRecords: 1800}
	for i, l := range labels {
		s := eegSignal("EEG "+l+"-REF", 500)
		k := i
		s.Digital = func(r, j int) int { return (r*7919+j*104729+k*31)%60000 - 30000 }
		f.Signals = append(f.Signals, s)
	}
	f.Signals = append(f.Signals, annotationSignal(30, 1, nil))
	return f.build()
}

// BenchmarkDecode30Min decodes the 30-minute file from memory; MB/s is over
// the file's bytes. Issue 2 asks for at least 300 MB/s on one core (run
// with -cpu 1) and float32 samples (≈ 75.6 MB for 37.8 MB of int16).
func BenchmarkDecode30Min(b *testing.B) {
	data := thirtyMinuteEDF()
	r := bytes.NewReader(data)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	cpu0 := processCPUSeconds()
	n := 0
	for b.Loop() {
		rec, err := Decode(r, int64(len(data)), "bench.edf", Options{})
		if err != nil {
			b.Fatal(err)
		}
		if len(rec.Channels) != 21 || len(rec.Channels[0].Samples) != 900000 {
			b.Fatalf("%d channels", len(rec.Channels))
		}
		n++
	}
	// Throughput per CPU second (all threads of the process, GC included):
	// on a shared machine wall time also counts time spent waiting for a core.
	if cpu := processCPUSeconds() - cpu0; cpu > 0 {
		b.ReportMetric(float64(n)*float64(len(data))/cpu/1e6, "MB/cpu-s")
	}
}

// BenchmarkDecode16 and BenchmarkDecode24 time the inner scaling loops.
func BenchmarkDecode16(b *testing.B) {
	src := make([]byte, 2*4096)
	dst := make([]float32, 4096)
	b.SetBytes(int64(len(src)))
	for b.Loop() {
		decode16(dst, src, 0.1, -0.05)
	}
}

func BenchmarkDecode24(b *testing.B) {
	src := make([]byte, 3*4096)
	dst := make([]float32, 4096)
	b.SetBytes(int64(len(src)))
	for b.Loop() {
		decode24(dst, src, 0.03125, 0)
	}
}
