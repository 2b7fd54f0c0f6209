package metrics

import (
	"bytes"
	"longwave/ingest/testenv"
	"testing"

	"longwave/ingest"
	"longwave/ingest/synth"
)

// mustRecording writes spec with the synthetic writer and decodes it with
// the project's decoder, as a visit's file would be.
func mustRecording(tb testing.TB, spec synth.Spec, opt ingest.Options) *ingest.Recording {
	tb.Helper()
	b, err := synth.Bytes(spec)
	if err != nil {
		tb.Fatalf("synth: %v", err)
	}
	rec, err := ingest.Decode(bytes.NewReader(b), int64(len(b)), "synthetic.edf", opt)
	if err != nil {
		tb.Fatalf("decode: %v", err)
	}
	return rec
}

// mustCompute runs V1 over rec.
func mustCompute(tb testing.TB, rec *ingest.Recording) *Result {
	tb.Helper()
	res, err := Compute(rec, V1())
	if err != nil {
		tb.Fatalf("compute: %v", err)
	}
	return res
}

// marker returns the named marker or fails.
func marker(tb testing.TB, res *Result, name, region string, st ingest.EyeState) Marker {
	tb.Helper()
	m, ok := res.Marker(name, region, st)
	if !ok {
		tb.Fatalf("no marker %s/%s/%s", name, region, st)
	}
	return m
}

// moduleRoot is the folder holding go.mod.
func moduleRoot(tb testing.TB) string {
	tb.Helper()
	return testenv.ModuleRoot(tb)
}

// sharedData returns ../shared/data/<parts…> beside the module root, or
// skips the test with a message naming what it needs (fails under
// LONGWAVE_REQUIRE_DATA=1).
func sharedData(tb testing.TB, parts ...string) string {
	tb.Helper()
	return testenv.SharedData(tb, parts...)
}
