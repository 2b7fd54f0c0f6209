package bids

import (
	"errors"
	"io"
	"longwave/ingest/testenv"
	"math"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"longwave/ingest"
)

// sharedData returns ../shared/data/<name> beside the module root, or skips
// the test (fails under LONGWAVE_REQUIRE_DATA=1) when it is absent.
func sharedData(t *testing.T, name string) string {
	t.Helper()
	return testenv.SharedData(t, name)
}

// link makes dst point at src (a copy where symbolic links are refused).
func link(t *testing.T, src, dst string) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(dst), 0o755); err != nil {
		t.Fatal(err)
	}
	if os.Symlink(src, dst) == nil {
		return
	}
	in, err := os.Open(src)
	if err != nil {
		t.Fatal(err)
	}
	defer in.Close()
	out, err := os.Create(dst)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := io.Copy(out, in); err != nil {
		t.Fatal(err)
	}
	if err := out.Close(); err != nil {
		t.Fatal(err)
	}
}

// TestReadEEGMMIDB lays the shared eegmmidb baseline runs out as a BIDS
// dataset (R01 = eyes open, R02 = eyes closed, by the PhysioNet protocol)
// with the dataset's own participants.tsv (OpenNeuro ds004362), and checks
// the facts of ../shared/data/eegmmidb/PROVENANCE.md.
func TestReadEEGMMIDB(t *testing.T) {
	src := sharedData(t, "eegmmidb")
	root := t.TempDir()
	link(t, filepath.Join(src, "participants.tsv"), filepath.Join(root, "participants.tsv"))
	// Facts from PROVENANCE.md: sex/age and the samples with data of R02
	// (the eyes-closed run) and R01, at 160 Hz.
	subjects := []struct {
		id, file       string
		sex            string
		age            float64
		closed, opened int
	}{
		{"sub-001", "S001", "F", 49, 9632, 9632},
		{"sub-002", "S002", "F", 51, 9616, 9616},
		{"sub-003", "S003", "M", 53, 9632, 9632},
		{"sub-004", "S004", "M", 47, 9632, 9632},
		{"sub-038", "S038", "F", 50, 9632, 9632},
		{"sub-040", "S040", "M", 36, 9632, 9632},
	}
	for _, s := range subjects {
		dir := filepath.Join(root, s.id, "eeg")
		link(t, filepath.Join(src, s.file+"R01.edf"), filepath.Join(dir, s.id+"_task-eyesopen_run-1_eeg.edf"))
		link(t, filepath.Join(src, s.file+"R02.edf"), filepath.Join(dir, s.id+"_task-eyesclosed_run-2_eeg.edf"))
	}
	// Dataset-wide sidecars at the root (inheritance): BCI2000 at 160 Hz;
	// recorded in New York State, so 60 Hz mains (common practice for the
	// USA). sub-001's closed run marks its first channel bad.
	put(t, root, map[string]string{
		"task-eyesopen_eeg.json":                                 `{"TaskName": "eyesopen", "SamplingFrequency": 160, "PowerLineFrequency": 60, "EEGReference": "n/a", "SoftwareFilters": "n/a"}`,
		"task-eyesclosed_eeg.json":                               `{"TaskName": "eyesclosed", "SamplingFrequency": 160, "PowerLineFrequency": 60, "EEGReference": "n/a", "SoftwareFilters": "n/a"}`,
		"sub-001/eeg/sub-001_task-eyesclosed_run-2_channels.tsv": "name\ttype\tunits\tstatus\nFc5.\tEEG\tuV\tbad\n",
	})
	d, err := Read(root, ingest.Options{})
	if err != nil {
		t.Fatal(err)
	}

	// participants.tsv: 109 rows; sub-044 has "M" in the Age column (line 45).
	if len(d.Participants) != 109 {
		t.Errorf("%d participants, want 109", len(d.Participants))
	}
	if len(d.Problems) != 1 || d.Problems[0].Path != "participants.tsv" {
		t.Fatalf("problems %v, want one in participants.tsv", d.Problems)
	}
	var fe *ingest.FormatError
	if !errors.As(d.Problems[0].Err, &fe) || fe.Line != 45 || fe.Field != "Age" {
		t.Errorf("problem %v: want the Age column of line 45", d.Problems[0].Err)
	}
	byID := map[string]Participant{}
	for _, p := range d.Participants {
		byID[p.ID] = p
	}
	if p := byID["sub-044"]; p.AgeKnown || p.Sex != "" {
		t.Errorf("sub-044 %+v: want age and sex unknown", p)
	}
	if p := byID["sub-010"]; p.AgeKnown || p.Sex != "F" {
		t.Errorf("sub-010 %+v: want F, age n/a", p)
	}

	if len(d.Visits) != len(subjects) {
		t.Fatalf("%d visits, want %d", len(d.Visits), len(subjects))
	}
	for i, s := range subjects {
		v := d.Visits[i]
		if v.Subject != s.id || v.Session != "" {
			t.Errorf("visit %d is %s %q, want %s without session", i, v.Subject, v.Session, s.id)
		}
		if p := byID[s.id]; p.Sex != s.sex || !p.AgeKnown || p.Age != s.age {
			t.Errorf("%s: %+v, want %s aged %v", s.id, p, s.sex, s.age)
		}
		rec, err := v.Load(ingest.Options{})
		if err != nil {
			t.Errorf("%s: %v", s.id, err)
			continue
		}
		c := rec.Conditions
		if c.Format != ingest.FormatCombined || c.PeriodSource != ingest.FromRuns || c.SampleRate != 160 || len(rec.Channels) != 64 {
			t.Errorf("%s: %s, periods from %q, %v Hz, %d channels; want combined, separate runs, 160 Hz, 64",
				s.id, c.Format, c.PeriodSource, c.SampleRate, len(rec.Channels))
		}
		d1, d2 := float64(s.closed)/160, float64(s.opened)/160
		wantPer := []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: d1}, {State: ingest.EyesOpen, Start: d1, End: d1 + d2}}
		// durationTolerance: sample counts divided by the rate, not rounded.
		const durationTolerance = 1e-9
		if len(rec.Periods) != 2 || math.Abs(rec.Periods[0].End-d1) > durationTolerance || math.Abs(rec.Periods[1].End-(d1+d2)) > durationTolerance {
			t.Errorf("%s: periods %v, want %v", s.id, rec.Periods, wantPer)
		}
		if math.Abs(c.Duration-(d1+d2)) > durationTolerance {
			t.Errorf("%s: duration %v s, want %v (both runs with their zero padding cut)", s.id, c.Duration, d1+d2)
		}
		if wantSeg := []ingest.Segment{{Onset: 0, First: 0, Count: s.closed}, {Onset: d1, First: s.closed, Count: s.opened}}; !slices.Equal(rec.Segments, wantSeg) {
			t.Errorf("%s: segments %v, want %v", s.id, rec.Segments, wantSeg)
		}
		if c.LineFrequency != 60 {
			t.Errorf("%s: line frequency %v Hz, want 60 Hz from the sidecars", s.id, c.LineFrequency)
		}
		// The only cautions: each run's zero-padded last record (PROVENANCE.md);
		// the sidecars' 160 Hz agree with the files.
		for _, k := range c.Cautions {
			if k.Code != "zero_padding_cut" {
				t.Errorf("%s: caution %v", s.id, k)
			}
		}
		wantBad := []string(nil)
		if s.id == "sub-001" {
			wantBad = []string{"FC5"}
		}
		if !slices.Equal(c.BadChannels, wantBad) {
			t.Errorf("%s: bad channels %v, want %v", s.id, c.BadChannels, wantBad)
		}
		if len(c.ChannelsMissing) != 0 || c.UVPerStep != 1 {
			t.Errorf("%s: missing %v, %v µV per step; want none missing, 1 µV", s.id, c.ChannelsMissing, c.UVPerStep)
		}
	}
}
