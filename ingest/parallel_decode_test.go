package ingest

import (
	"bytes"
	"reflect"
	"runtime"
	"testing"
)

// TestParallelDecodeEqualsSerial decodes files above parallelDecodeBytes
// (where the second half of the records is converted on a second
// goroutine) with GOMAXPROCS 2 and 1 and wants the same recording, sample
// for sample, for EDF+C, BDF+C and a plain EDF (no annotation signal);
// and the same recording, read as far as it goes, from each file cut short
// in its second half.
func TestParallelDecodeEqualsSerial(t *testing.T) {
	build := func(bdf, plain bool, records int) []byte {
		f := testFile{Reserved: "EDF+C", NRecords: records, BDF: bdf}
		if bdf {
			f.Reserved = "BDF+C"
		}
		if plain {
			f.Reserved = ""
		}
		for i, l := range Standard19 {
			s := eegSignal("EEG "+l+"-REF", 500)
			k := i
			s.Digital = func(r, j int) int { return (r*7919+j*104729+k*31)%60000 - 30000 }
			f.Signals = append(f.Signals, s)
		}
		if !plain { // a plain EDF has no annotation signal: the first goroutine stops half way
			ann := annotationSignal(30, 1, nil)
			if bdf {
				ann.Label = "BDF Annotations"
			}
			f.Signals = append(f.Signals, ann)
		}
		return f.build()
	}
	decodeWith := func(procs int, data []byte) (*Recording, error) {
		defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
		return Decode(bytes.NewReader(data), int64(len(data)), "big.edf", Options{})
	}
	for _, tt := range []struct {
		name    string
		bdf     bool
		plain   bool
		records int
	}{{"EDF+C", false, false, 460}, {"BDF+C", true, false, 310}, {"EDF", false, true, 460}} {
		t.Run(tt.name, func(t *testing.T) {
			data := build(tt.bdf, tt.plain, tt.records)
			if len(data) < parallelDecodeBytes {
				t.Fatalf("test file of %d bytes is below the parallel threshold %d", len(data), parallelDecodeBytes)
			}
			two, err := decodeWith(2, data)
			if err != nil {
				t.Fatal(err)
			}
			one, err := decodeWith(1, data)
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(one, two) {
				t.Fatal("the two-goroutine decode differs from the one-goroutine decode")
			}
			if got := two.Channels[3].Samples[len(two.Channels[3].Samples)-1]; got == 0 {
				t.Fatalf("last sample of the second half not converted (0)")
			}
			// A file cut short in its second half is read as far as it goes
			// (with a caution), the same way on both paths.
			cut := data[:len(data)-len(data)/5]
			two, err2 := decodeWith(2, cut)
			one, err1 := decodeWith(1, cut)
			if err2 != nil || err1 != nil {
				t.Fatalf("cut file: %v, %v", err2, err1)
			}
			if len(two.Channels[0].Samples) >= tt.records*500 {
				t.Fatalf("cut file: %d samples per channel, want fewer than the whole file's", len(two.Channels[0].Samples))
			}
			if !reflect.DeepEqual(one, two) {
				t.Fatal("cut file: the two-goroutine decode differs from the one-goroutine decode")
			}
		})
	}
}
