package intake_test

import (
	"errors"
	"fmt"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"longwave/server/intake"
)

// dumpStore lists every stored visit as one line (patient, date, age,
// recordings, every marker) in code and date order: two stores hold the
// same visits exactly when their dumps are equal.
func dumpStore(tb testing.TB, p *intake.Pipeline) []string {
	tb.Helper()
	courses, err := p.Store.AllVisitRecords(bg)
	if err != nil {
		tb.Fatal(err)
	}
	var out []string
	for _, pc := range courses {
		for _, v := range pc.Visits {
			var b strings.Builder
			fmt.Fprintf(&b, "%s %s age %.6f", pc.Patient.Code, v.Visit.Date, v.Visit.AgeYears)
			for _, r := range v.Recordings {
				fmt.Fprintf(&b, " %s:%s:%s", r.Role, r.SHA256[:12], r.Format)
			}
			for _, m := range v.Markers {
				fmt.Fprintf(&b, " %s=%v/%v", m.Key(), m.Value, m.Computable)
			}
			for _, f := range v.Flags {
				fmt.Fprintf(&b, " flag:%s", f.Rule)
			}
			out = append(out, b.String())
		}
	}
	return out
}

// TestBIDSDuplicatesDoNotDependOnWorkers: sessions holding byte-identical
// files give the same database whatever the number of workers; the earlier
// session (by date, then label) is stored and the later one is reported as
// its duplicate. Dates come from sessions.tsv, or from scans.tsv where it
// gives none (BIDS: both carry an optional acq_time; FORMATS.md §2.5).
func TestBIDSDuplicatesDoNotDependOnWorkers(t *testing.T) {
	root := t.TempDir()
	same := [4][]byte{shortFile(t, 70), shortFile(t, 71), shortFile(t, 72), shortFile(t, 73)}
	writeBIDS(t, root, map[string][2]string{"sub-01": {"70", "F"}, "sub-02": {"66", "M"}, "sub-03": {"74", "F"},
		"sub-04": {"69", "M"}, "sub-05": {"72", "F"}, "sub-06": {"75", "M"}},
		[]bidsSession{
			{"sub-01", "ses-01", "2021-01-11T09:00:00", same[0]},
			{"sub-01", "ses-02", "2022-01-10T09:00:00", same[0]},
			{"sub-02", "ses-01", "2021-02-01T09:00:00", same[1]},
			{"sub-02", "ses-02", "2022-02-07T09:00:00", same[1]},
			// ses-02 was recorded first: acq_time decides, not the label.
			{"sub-03", "ses-01", "2022-03-07T09:00:00", same[2]},
			{"sub-03", "ses-02", "2021-03-01T09:00:00", same[2]},
			{"sub-04", "ses-01", "2021-04-05T09:00:00", same[3]},
			{"sub-04", "ses-02", "2022-04-04T09:00:00", shortFile(t, 74)},
			// Another subject's copy of sub-01's first file, the same day:
			// the label decides (sub-01 before sub-05).
			{"sub-05", "ses-01", "2021-01-11T08:00:00", same[0]},
			// No acq_time in sessions.tsv: the scans.tsv written below
			// dates them, ses-02 first.
			{"sub-06", "ses-01", "", shortFile(t, 75)},
			{"sub-06", "ses-02", "", shortFile(t, 75)},
		})
	for ses, at := range map[string]string{"ses-01": "2022-06-06T11:00:00", "ses-02": "2021-06-07T11:00:00"} {
		writeFile(t, root, filepath.Join("sub-06", ses, "sub-06_"+ses+"_scans.tsv"),
			[]byte("filename\tacq_time\neeg/sub-06_"+ses+"_task-rest_eeg.edf\t"+at+"\n"))
	}
	wantDup := map[string]string{"sub-01/ses-02": "sub-01/ses-01", "sub-02/ses-02": "sub-02/ses-01",
		"sub-03/ses-01": "sub-03/ses-02", "sub-05/ses-01": "sub-01/ses-01", "sub-06/ses-01": "sub-06/ses-02"}
	var first []string
	for _, workers := range []int{1, 2, 4} {
		p, _ := newPipeline(t)
		sum, err := p.IngestBIDS(bg, root, intake.BIDSOptions{Workers: workers})
		if err != nil || len(sum.Failed) != 0 {
			t.Fatalf("%d workers: %+v %v", workers, sum, err)
		}
		if sum.Ingested != 6 || len(sum.Duplicates) != 5 || sum.Known != 0 {
			t.Errorf("%d workers: %d ingested, %d duplicates, %d known; want 6, 5, 0", workers, sum.Ingested, len(sum.Duplicates), sum.Known)
		}
		for _, d := range sum.Duplicates {
			if wantDup[d.Visit] != d.Of || len(d.SHA256) != 64 {
				t.Errorf("%d workers: %s reported a duplicate of %s (%s), want of %s", workers, d.Visit, d.Of, d.SHA256, wantDup[d.Visit])
			}
		}
		got := dumpStore(t, p)
		if workers == 1 {
			first = got
			var dates []string
			for _, line := range got {
				f := strings.Fields(line)
				dates = append(dates, f[0]+" "+f[1])
			}
			want := []string{"sub-01 2021-01-11", "sub-02 2021-02-01", "sub-03 2021-03-01", "sub-04 2021-04-05", "sub-04 2022-04-04", "sub-06 2021-06-07"}
			if !slices.Equal(dates, want) {
				t.Errorf("stored visits %v, want %v", dates, want)
			}
			// Again: every session is known or a duplicate, nothing added.
			again, err := p.IngestBIDS(bg, root, intake.BIDSOptions{Workers: 3})
			if err != nil || again.Ingested != 0 || again.Known != 6 || len(again.Duplicates) != 5 {
				t.Errorf("second run: %+v %v", again, err)
			}
			continue
		}
		if !slices.Equal(got, first) {
			t.Errorf("%d workers stored another database than 1 worker", workers)
			for i := range max(len(got), len(first)) {
				if i >= len(got) || i >= len(first) || got[i] != first[i] {
					t.Logf("first difference at visit %d", i)
					break
				}
			}
		}
	}
}

// TestShardOfIsStable pins the partition: it must not change between
// releases, or shards made by two versions would overlap. The values are
// the first 8 bytes of SHA-256 of the label, big-endian, modulo n (checked
// with Python's hashlib: int.from_bytes(sha256(b"sub-01/ses-01").digest()[:8], "big") % 4).
func TestShardOfIsStable(t *testing.T) {
	for _, c := range []struct {
		label string
		n     int
		want  int
	}{
		{"sub-01/ses-01", 4, 2},
		{"sub-01/ses-02", 4, 3},
		{"sub-02/ses-01", 4, 1},
		{"sub-07", 3, 2},
		{"sub-10/ses-03", 16, 15},
		{"sub-10/ses-03", 1, 0},
	} {
		if got := intake.ShardOf(c.label, c.n); got != c.want {
			t.Errorf("ShardOf(%q, %d) = %d, want %d", c.label, c.n, got, c.want)
		}
	}
	// Every session lands in exactly one shard, and the shards are not
	// grossly uneven over 400 labels.
	counts := make([]int, 4)
	for s := 0; s < 100; s++ {
		for ses := 1; ses <= 4; ses++ {
			counts[intake.ShardOf(fmt.Sprintf("sub-%03d/ses-%02d", s, ses), 4)]++
		}
	}
	for k, n := range counts {
		if n < 70 || n > 130 {
			t.Errorf("shard %d holds %d of 400 sessions, want about 100", k, n)
		}
	}
}

// TestShardReportsOwnProblems: a problem inside a session folder is
// reported by that session's shard only, a dataset-wide one by shard 0, so
// that the shards' reports add up to the whole ingest's.
func TestShardReportsOwnProblems(t *testing.T) {
	root := t.TempDir()
	writeFile(t, root, "participants.tsv", []byte("participant_id\tage\nsub-01\told\n"))
	writeFile(t, root, "sub-01/ses-01/eeg/sub-01_ses-01_task-rest_eeg.vhdr", []byte("not read"))
	writeFile(t, root, "sub-02/eeg/sub-02_task-rest_eeg.set", []byte("not read"))
	want := map[string]int{"participants.tsv": 0,
		"sub-01/ses-01/eeg/sub-01_ses-01_task-rest_eeg.vhdr": intake.ShardOf("sub-01/ses-01", 4),
		"sub-02/eeg/sub-02_task-rest_eeg.set":                intake.ShardOf("sub-02", 4)}
	p, _ := newPipeline(t)
	seen := map[string]int{}
	for k := 0; k < 4; k++ {
		sum, err := p.IngestBIDS(bg, root, intake.BIDSOptions{Shard: k, Shards: 4})
		if err != nil {
			t.Fatal(err)
		}
		for _, f := range sum.Failed {
			if w, ok := want[f.Visit]; !ok || w != k {
				t.Errorf("shard %d reports %s (%v), want it in shard %d", k, f.Visit, f.Err, w)
			}
			seen[f.Visit]++
		}
	}
	for path := range want {
		if seen[path] != 1 {
			t.Errorf("%s reported by %d shards, want 1", path, seen[path])
		}
	}
	for _, bad := range []intake.BIDSOptions{{Shard: 4, Shards: 4}, {Shard: -1, Shards: 2}, {Shards: -1}} {
		if _, err := p.IngestBIDS(bg, root, bad); !errors.Is(err, intake.ErrRequest) {
			t.Errorf("shard %d of %d: err %v, want ErrRequest", bad.Shard, bad.Shards, err)
		}
	}
}
