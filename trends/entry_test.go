package trends

import (
	"bytes"
	"errors"
	"reflect"
	"testing"
	"time"

	"longwave/metrics/clinic"
)

// entryPatients are the invented cohort, a patient without visits, one
// with an undated visit, and the first 300 of the benchmark cohort.
func entryPatients() []clinic.PatientCourse {
	ps := cohortPatients()
	odd := []clinic.VisitRecord{visitRec(900, "2023-13-40", 70, 9.5), visitRec(901, "2023-02-01", 70, 9.4)}
	ps = append(ps, clinic.PatientCourse{Patient: clinic.Patient{ID: 90, Code: "LH-ODD", Cohort: "pilot"}, Visits: odd})
	return append(ps, benchCohort()[:300]...)
}

func entriesOf(ps []clinic.PatientCourse) []CohortEntry {
	out := make([]CohortEntry, len(ps))
	for i, p := range ps {
		out[i] = SummarisePatient(p.Patient, p.Visits, EntryOptions{SettingsVersion: testVersion, SettingsHash: testHash})
	}
	return out
}

// Every entry comes back from its binary form deep-equal, nil lists nil.
func TestEntryRoundTrip(t *testing.T) {
	for _, e := range entriesOf(entryPatients()) {
		b := AppendEntry(nil, &e)
		got, err := DecodeEntry(b)
		if err != nil {
			t.Fatalf("%s: %v", e.Code, err)
		}
		if !reflect.DeepEqual(got, e) {
			t.Fatalf("%s: decoded\n%+v\nwant\n%+v", e.Code, got, e)
		}
	}
}

// The cohort built from decoded entries is the cohort BuildCohort makes
// from the visits, with and without control norms.
func TestCohortFromDecodedEntries(t *testing.T) {
	ps := entryPatients()
	today := time.Date(2024, 6, 1, 12, 0, 0, 0, time.UTC)
	norms := BuildControlNorms(ageingControls(40, -0.02), ControlNormOptions{SettingsVersion: testVersion, SettingsHash: testHash, Today: today})
	for _, n := range []*ControlNorms{nil, norms} {
		opt := CohortOptions{Today: today, SettingsVersion: testVersion, SettingsHash: testHash, Norms: n}
		want := BuildCohort(ps, opt)
		var decoded []CohortEntry
		for _, e := range entriesOf(ps) {
			d, err := DecodeEntry(AppendEntry(nil, &e))
			if err != nil {
				t.Fatal(err)
			}
			decoded = append(decoded, d)
		}
		got, err := CohortFromEntries(decoded, opt)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(got, want) {
			t.Errorf("norms %v: cohort from decoded entries differs from BuildCohort", n != nil)
		}
		if n != nil && !got.Rows[len(got.Rows)-1].Markers[0].Verdict.Known {
			t.Errorf("with norms the last bench patient has no verdict: %+v", got.Rows[len(got.Rows)-1].Markers[0].Verdict)
		}
	}
}

func TestCohortFromEntriesRefusesOtherMarkers(t *testing.T) {
	es := entriesOf(cohortPatients())
	es[1].Series[2].Ref.Region = "frontal"
	if _, err := CohortFromEntries(es, CohortOptions{Today: time.Now()}); !errors.Is(err, ErrEntryMarkers) {
		t.Errorf("entry with another series: %v, want ErrEntryMarkers", err)
	}
	es = entriesOf(cohortPatients())
	es[0].Series = es[0].Series[:2]
	if _, err := CohortFromEntries(es, CohortOptions{Today: time.Now()}); !errors.Is(err, ErrEntryMarkers) {
		t.Errorf("entry with two series: %v, want ErrEntryMarkers", err)
	}
}

func TestDecodeEntryBad(t *testing.T) {
	e := entriesOf(cohortPatients())[0]
	good := AppendEntry(nil, &e)
	// A list of 2^40 flags declared right after the fixed fields.
	huge := AppendEntry(nil, &CohortEntry{Code: "LH-X"})
	huge = append(huge[:len(huge)-2], 0x81, 0x80, 0x80, 0x80, 0x80, 0x20)
	cases := []struct {
		name string
		b    []byte
		want error
	}{
		{"empty", nil, ErrEntryCorrupt},
		{"other format", append([]byte{EntryFormat + 1}, good[1:]...), ErrEntryVersion},
		{"trailing byte", append(bytes.Clone(good), 0), ErrEntryCorrupt},
		{"huge list", huge, ErrEntryCorrupt},
		{"bad yes/no", bytes.Replace(bytes.Clone(good), []byte("closed\x01"), []byte("closed\x07"), 1), ErrEntryCorrupt},
	}
	for n := 1; n < len(good); n++ {
		cases = append(cases, struct {
			name string
			b    []byte
			want error
		}{"cut at " + string(rune('0'+n%10)), good[:n], ErrEntryCorrupt})
	}
	for _, c := range cases {
		if _, err := DecodeEntry(c.b); !errors.Is(err, c.want) {
			t.Errorf("%s (%d bytes): %v, want %v", c.name, len(c.b), err, c.want)
		}
	}
}

// FuzzDecodeEntry: any bytes decode or fail without a panic, and what
// decodes encodes back to the same bytes.
func FuzzDecodeEntry(f *testing.F) {
	for _, e := range entriesOf(entryPatients()[:8]) {
		f.Add(AppendEntry(nil, &e))
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		e, err := DecodeEntry(b)
		if err != nil {
			return
		}
		if again := AppendEntry(nil, &e); !bytes.Equal(again, b) {
			t.Errorf("round trip changed the bytes:\n%x\n%x", b, again)
		}
	})
}

// The norm-dependent half of the cohort over 5,000 kept entries with the
// norms of 100 controls: what every cohort build after a start pays.
func BenchmarkCohortFromEntries5000(b *testing.B) {
	today := time.Date(2024, 6, 1, 0, 0, 0, 0, time.UTC)
	norms := BuildControlNorms(ageingControls(100, -0.02), ControlNormOptions{SettingsVersion: testVersion, SettingsHash: testHash, Today: today})
	es := entriesOf(benchCohort())
	opt := CohortOptions{Today: today, SettingsVersion: testVersion, SettingsHash: testHash, Norms: norms}
	for b.Loop() {
		c, err := CohortFromEntries(es, opt)
		if err != nil || len(c.Rows) != 5000 {
			b.Fatal(err)
		}
	}
}

// Decoding 5,000 kept entries.
func BenchmarkDecodeEntry5000(b *testing.B) {
	var blobs [][]byte
	size := 0
	for _, e := range entriesOf(benchCohort()) {
		blobs = append(blobs, AppendEntry(nil, &e))
		size += len(blobs[len(blobs)-1])
	}
	for b.Loop() {
		for _, blob := range blobs {
			if _, err := DecodeEntry(blob); err != nil {
				b.Fatal(err)
			}
		}
	}
	b.ReportMetric(float64(size)/5000, "bytes/entry")
}
