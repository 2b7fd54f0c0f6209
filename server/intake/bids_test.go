package intake_test

import (
	"fmt"
	"math"
	"path/filepath"
	"strings"
	"sync/atomic"
	"testing"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/server/intake"
)

// bidsSession is one session of a test dataset.
type bidsSession struct {
	sub, ses, acq string // acq_time ("" leaves it out of sessions.tsv)
	data          []byte
}

// writeBIDS lays out a BIDS-EEG dataset (BIDS 1.9 EEG: sub-*/ses-*/eeg/
// *_eeg.edf, participants.tsv with age and sex, sub-*_sessions.tsv with
// acq_time) from the sessions given.
func writeBIDS(tb testing.TB, root string, people map[string][2]string, sessions []bidsSession) {
	tb.Helper()
	writeFile(tb, root, "dataset_description.json", []byte(`{"Name": "longwave test clinic (invented)", "BIDSVersion": "1.9.0"}`))
	var pt strings.Builder
	pt.WriteString("participant_id\tage\tsex\n")
	subs := map[string][]bidsSession{}
	var order []string
	for _, s := range sessions {
		if _, ok := subs[s.sub]; !ok {
			order = append(order, s.sub)
		}
		subs[s.sub] = append(subs[s.sub], s)
	}
	for _, sub := range order {
		p := people[sub]
		fmt.Fprintf(&pt, "%s\t%s\t%s\n", sub, p[0], p[1])
		var st strings.Builder
		st.WriteString("session_id\tacq_time\n")
		for _, s := range subs[sub] {
			acq := s.acq
			if acq == "" {
				acq = "n/a"
			}
			fmt.Fprintf(&st, "%s\t%s\n", s.ses, acq)
			writeFile(tb, root, filepath.Join(sub, s.ses, "eeg", sub+"_"+s.ses+"_task-rest_eeg.edf"), s.data)
		}
		writeFile(tb, root, filepath.Join(sub, sub+"_sessions.tsv"), []byte(st.String()))
	}
	writeFile(tb, root, "participants.tsv", []byte(pt.String()))
}

func TestIngestBIDSGoesOnPastBadVisits(t *testing.T) {
	p, db := newPipeline(t)
	root := t.TempDir()
	bad := shortFile(t, 32)[:900] // cut inside the signal headers
	writeBIDS(t, root, map[string][2]string{"sub-01": {"71", "F"}, "sub-02": {"64.5", "M"}, "sub-03": {"80", "n/a"}},
		[]bidsSession{
			{"sub-01", "ses-01", "2021-03-02T10:00:00", shortFile(t, 30)},
			{"sub-01", "ses-02", "2023-03-02T10:05:00", shortFile(t, 31)},
			{"sub-02", "ses-01", "2022-07-01T09:00:00", bad},
			{"sub-02", "ses-02", "2023-07-03T09:00:00", shortFile(t, 33)},
			{"sub-03", "ses-01", "", shortFile(t, 34)}, // no date
		})
	var calls atomic.Int32
	sum, err := p.IngestBIDS(bg, root, intake.BIDSOptions{Workers: 2, Cohort: "north",
		Progress: func(done, total int) { calls.Add(1) }})
	if err != nil {
		t.Fatal(err)
	}
	if sum.Visits != 5 || sum.Ingested != 3 || sum.Known != 0 || len(sum.Failed) != 2 || calls.Load() != 5 {
		t.Fatalf("summary %+v (progress calls %d), want 5 visits, 3 ingested, 2 failed", sum, calls.Load())
	}
	reasons := map[string]string{}
	for _, f := range sum.Failed {
		reasons[f.Visit] = f.Err.Error()
	}
	if !strings.Contains(reasons["sub-02/ses-01"], "sub-02_ses-01_task-rest_eeg.edf") {
		t.Errorf("bad file's reason %q does not name it", reasons["sub-02/ses-01"])
	}
	if !strings.Contains(reasons["sub-03/ses-01"], "no acquisition date") {
		t.Errorf("undated session's reason: %q", reasons["sub-03/ses-01"])
	}
	// Patients from participants.tsv; ages from it, no invented birth year.
	pat, err := p.Store.PatientByCode(bg, "sub-01")
	if err != nil {
		t.Fatal(err)
	}
	if pat.Sex != "F" || pat.BirthYear != 0 || pat.Cohort != "north" {
		t.Errorf("patient = %+v", pat)
	}
	vs, _ := p.Store.PatientVisits(bg, pat.ID)
	if len(vs) != 2 || vs[0].Visit.Date != "2021-03-02" || !vs[0].Visit.AgeKnown || vs[0].Visit.AgeYears != 71 {
		t.Fatalf("visits of sub-01: %+v", vs)
	}
	// Two years later (730 days): the age moves on with the dates.
	if want := 71 + 730/365.2425; math.Abs(vs[1].Visit.AgeYears-want) > 1e-9 {
		t.Errorf("second visit age %v, want %v", vs[1].Visit.AgeYears, want)
	}
	if c := rowCounts(t, db); c["visits"] != 3 || c["recordings"] != 3 {
		t.Errorf("counts %v", c)
	}
	if n := checkContentAddressed(t, p.Store.DataDir()); n != 3 {
		t.Errorf("%d stored files, want 3 (none of the failed visits)", n)
	}

	// Again: the stored ones are known, the bad ones fail again.
	before := rowCounts(t, db)
	sum, err = p.IngestBIDS(bg, root, intake.BIDSOptions{Workers: 1})
	if err != nil || sum.Known != 3 || sum.Ingested != 0 || len(sum.Failed) != 2 {
		t.Errorf("second run: %+v, %v", sum, err)
	}
	if after := rowCounts(t, db); fmt.Sprint(after) != fmt.Sprint(before) {
		t.Errorf("second run changed rows: %v -> %v", before, after)
	}
	if _, err := p.IngestBIDS(bg, filepath.Join(root, "nope"), intake.BIDSOptions{}); err == nil {
		t.Error("missing dataset folder: no error")
	}
}

// TestReprocessKeepsBIDSEvents: a plain EDF (no annotations) whose eye
// states come from its events.tsv keeps them when reprocessed, although only
// the EDF itself is stored.
func TestReprocessKeepsBIDSEvents(t *testing.T) {
	p, _ := newPipeline(t)
	root := t.TempDir()
	spec := shortSpec(50)
	spec.Format = ingest.FormatEDF // no annotations in the file
	writeBIDS(t, root, map[string][2]string{"sub-05": {"70", "M"}},
		[]bidsSession{{"sub-05", "ses-01", "2022-09-09T09:00:00", synthBytes(t, spec)}})
	writeFile(t, root, filepath.Join("sub-05", "ses-01", "eeg", "sub-05_ses-01_task-rest_events.tsv"),
		[]byte("onset\tduration\ttrial_type\n0\t65\teyes closed\n65\t55\teyes open\n"))
	sum, err := p.IngestBIDS(bg, root, intake.BIDSOptions{Workers: 1})
	if err != nil || sum.Ingested != 1 {
		t.Fatalf("ingest: %+v %v", sum, err)
	}
	pat, _ := p.Store.PatientByCode(bg, "sub-05")
	vs, _ := p.Store.PatientVisits(bg, pat.ID)
	if len(vs) != 1 || vs[0].Conditions.PeriodSource != ingest.FromEvents {
		t.Fatalf("visit period source %v, want events", vs[0].Conditions.PeriodSource)
	}
	before := vs[0]
	next := metrics.Current()
	next.Version = "v2-events-test"
	next.Peak.SmoothBins += 2
	rep, err := (&intake.Pipeline{Store: p.Store, Settings: next}).Reprocess(bg, nil)
	if err != nil || len(rep.Visits) != 1 || len(rep.Failed) != 0 {
		t.Fatalf("reprocess: %+v %v", rep, err)
	}
	after, _ := p.Store.Visit(bg, before.Visit.ID)
	if after.Conditions.PeriodSource != ingest.FromEvents {
		t.Errorf("after reprocess: period source %v, want events", after.Conditions.PeriodSource)
	}
	for _, key := range []string{"alpha_reactivity/posterior/open"} {
		var b, a metrics.Marker
		for _, m := range before.Markers {
			if m.Key() == key {
				b = m
			}
		}
		for _, m := range after.Markers {
			if m.Key() == key {
				a = m
			}
		}
		// Reactivity does not depend on the peak smoothing: unchanged, and
		// computable only because the eyes-open period was restored.
		if !a.Computable || a.Value != b.Value {
			t.Errorf("%s before %+v after %+v", key, b, a)
		}
	}
}
