package ingest

import (
	"bytes"
	"runtime"
	"testing"
)

// allocatedBy returns the bytes allocated while fn runs.
func allocatedBy(fn func()) uint64 {
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	fn()
	runtime.ReadMemStats(&after)
	return after.TotalAlloc - before.TotalAlloc
}

// smallAllocation is the most a tiny hostile file may make the decoder
// allocate: the header (≤ 257 KiB for MaxSignals), one read buffer of whole
// records and the samples that the file really holds. 2 MiB is far above
// what these few-hundred-byte files need and far below what their headers
// claim (gigabytes).
const smallAllocation = 2 << 20

func TestHugeClaimsDoNotAllocate(t *testing.T) {
	tests := []struct {
		name   string
		change func(f *testFile)
		ok     bool
	}{
		{"1e9 records declared", func(f *testFile) { f.Records = "1000000000" }, true},
		{"huge samples per record", func(f *testFile) { f.Signals[0].Samples = "524288" }, false},
		{"samples per record at the limit", func(f *testFile) { f.Signals[0].Samples = "1048576"; f.Duration = "2" }, false},
		{"samples over the limit", func(f *testFile) { f.Signals[0].Samples = "99999999" }, false},
		{"4000 signals", func(f *testFile) { f.NumSignals = "4000" }, false},
		{"1024 signals in a small file", func(f *testFile) { f.NumSignals = "1024" }, false},
		{"records -1", func(f *testFile) { f.Records = "-1" }, true},
	}
	for _, tt := range tests {
		f := smallEDFPlus()
		tt.change(&f)
		b := f.build()
		var err error
		got := allocatedBy(func() {
			_, err = Decode(bytes.NewReader(b), int64(len(b)), "claim.edf", Options{})
		})
		if (err == nil) != tt.ok {
			t.Errorf("%s: error %v, want ok=%v", tt.name, err, tt.ok)
		}
		t.Logf("%s: %d bytes allocated for a %d-byte file (err %v)", tt.name, got, len(b), err)
		if got > smallAllocation {
			t.Errorf("%s: %d bytes allocated for a %d-byte file, want at most %d", tt.name, got, len(b), smallAllocation)
		}
	}
}

func TestAllocsPerRunHugeRecordCount(t *testing.T) {
	f := smallEDFPlus()
	f.Records = "999999999"
	b := f.build()
	allocs := testing.AllocsPerRun(20, func() {
		if _, err := Decode(bytes.NewReader(b), int64(len(b)), "claim.edf", Options{}); err != nil {
			t.Fatal(err)
		}
	})
	// A few hundred small allocations (header strings, channels, cautions);
	// nothing scales with the declared count.
	t.Logf("%v allocations per decode of a 3-record file declaring 999999999 records", allocs)
	if allocs > 400 {
		t.Errorf("%v allocations per decode of a 3-record file", allocs)
	}
}
