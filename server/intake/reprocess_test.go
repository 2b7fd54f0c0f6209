package intake_test

import (
	"math"
	"slices"
	"testing"
	"time"

	"longwave/metrics"
	"longwave/server/intake"
	"longwave/server/store"
	"longwave/trends"
)

// markersByKey reads a visit's stored markers by series key.
func markersByKey(t *testing.T, st *store.Store, id int64) (store.VisitRecord, map[string]metrics.Marker) {
	t.Helper()
	v, err := st.Visit(bg, id)
	if err != nil {
		t.Fatal(err)
	}
	out := map[string]metrics.Marker{}
	for _, m := range v.Markers {
		out[m.Key()] = m
	}
	return v, out
}

// TestReprocessV1DatabaseToV2 makes a database the way settings version 1
// left it, takes it to version 2 and checks the report against the store
// before and after: every moved marker is reported with its old and new
// value and interval, every marker not reported is unchanged, and the
// per-marker summary counts what the store shows. A visit ingested under v1
// afterwards makes the course mix versions: it is flagged as made by other
// settings, as before.
func TestReprocessV1DatabaseToV2(t *testing.T) {
	p, _ := newPipeline(t)
	p.Settings = metrics.V1()
	var ids []int64
	for i, date := range []string{"2022-05-02", "2023-05-08", "2024-05-06"} {
		out, err := p.IngestVisit(bg, intake.Request{PatientCode: "RS-0412", Date: date, BirthYear: 1950,
			Single: &intake.File{Data: shortFile(t, uint64(40+i)), Name: "r.edf"}})
		if err != nil {
			t.Fatal(err)
		}
		ids = append(ids, out.VisitID)
	}
	before := map[int64]map[string]metrics.Marker{}
	for _, id := range ids {
		v, ms := markersByKey(t, p.Store, id)
		if v.SettingsVersion != "1" {
			t.Fatalf("visit %d made by settings %s, want 1", id, v.SettingsVersion)
		}
		for k, m := range ms {
			if m.Uncertainty != nil {
				t.Errorf("v1 visit %d: %s has an interval %+v", id, k, m.Uncertainty)
			}
		}
		before[id] = ms
	}

	v2 := metrics.V2()
	p2 := &intake.Pipeline{Store: p.Store, Settings: v2}
	rep, err := p2.Reprocess(bg, nil)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Version != "2" || rep.Hash != v2.Hash() || len(rep.Visits) != len(ids) || len(rep.Failed) != 0 {
		t.Fatalf("report: version %s, %d visits, failed %v", rep.Version, len(rep.Visits), rep.Failed)
	}
	type tally struct{ changed, both, became, lost, gained int }
	want := map[string]*tally{}
	for _, vc := range rep.Visits {
		if vc.OldVersion != "1" {
			t.Errorf("visit %d: old version %q, want 1", vc.VisitID, vc.OldVersion)
		}
		v, after := markersByKey(t, p.Store, vc.VisitID)
		if v.SettingsVersion != "2" || v.SettingsHash != v2.Hash() {
			t.Errorf("visit %d now %s %s", vc.VisitID, v.SettingsVersion, v.SettingsHash)
		}
		old := before[vc.VisitID]
		reported := map[string]intake.MarkerChange{}
		for _, c := range vc.Changes {
			reported[c.Key] = c
		}
		for k, m := range after {
			o, had := old[k]
			c, moved := reported[k]
			if !had {
				if !slices.Contains(vc.Added, k) {
					t.Errorf("visit %d: %s is new but not reported as added", vc.VisitID, k)
				}
				continue
			}
			// The report's tolerance: float64 rounding of the stored value.
			same := o.Computable == m.Computable && math.Abs(o.Value-m.Value) <= 1e-12*math.Max(1, math.Abs(o.Value)) &&
				(m.Uncertainty == nil) == (o.Uncertainty == nil)
			if !moved {
				if !same {
					t.Errorf("visit %d: %s moved (%v → %v) but is not reported", vc.VisitID, k, o.Value, m.Value)
				}
				continue
			}
			if c.Old != o.Value || c.New != m.Value || c.OldComputable != o.Computable || c.NewComputable != m.Computable ||
				(c.NewInterval == nil) != (m.Uncertainty == nil) || c.OldInterval != nil {
				t.Errorf("visit %d: %s reported %+v, store had %+v and has %+v", vc.VisitID, k, c, o, m)
			}
			tl := want[k]
			if tl == nil {
				tl = &tally{}
				want[k] = tl
			}
			tl.changed++
			switch {
			case o.Computable && m.Computable:
				tl.both++
			case m.Computable:
				tl.became++
			case o.Computable:
				tl.lost++
			}
			if m.Uncertainty != nil {
				tl.gained++
			}
		}
	}
	sum := rep.Summary()
	if len(sum) != len(want) {
		t.Errorf("summary of %d series, the store shows %d that moved", len(sum), len(want))
	}
	for _, s := range sum {
		w := want[s.Key]
		if w == nil {
			t.Errorf("summary lists %s, which did not move", s.Key)
			continue
		}
		if s.Changed != w.changed || s.Both != w.both || s.BecameComputable != w.became || s.LostComputable != w.lost || s.GainedInterval != w.gained {
			t.Errorf("summary %s = %+v, store shows %+v", s.Key, s, *w)
		}
	}
	if ids, _ := p.Store.VisitsWithOtherSettings(bg, "2", v2.Hash()); len(ids) != 0 {
		t.Errorf("still on other settings: %v", ids)
	}

	// A visit added under v1 afterwards: the course mixes versions, and the
	// existing rule sets that visit apart.
	late, err := p.IngestVisit(bg, intake.Request{PatientCode: "RS-0412", Date: "2025-05-05",
		Single: &intake.File{Data: shortFile(t, 43), Name: "r.edf"}})
	if err != nil {
		t.Fatal(err)
	}
	pat, err := p.Store.PatientByCode(bg, "RS-0412")
	if err != nil {
		t.Fatal(err)
	}
	visits, err := p.Store.PatientVisits(bg, pat.ID)
	if err != nil {
		t.Fatal(err)
	}
	c := trends.BuildCourse(pat, visits, trends.CourseOptions{SettingsVersion: "2", SettingsHash: v2.Hash(),
		Today: time.Date(2025, 6, 1, 0, 0, 0, 0, time.UTC)})
	for _, v := range c.Visits {
		other := slices.ContainsFunc(v.Flags, func(f metrics.Flag) bool { return f.Rule == trends.RuleOtherSettings })
		if other != (v.VisitID == late.VisitID) || (v.VisitID == late.VisitID && v.Comparable) {
			t.Errorf("visit %d (settings %s): other-settings flag %v, comparable %v", v.VisitID, v.SettingsVersion, other, v.Comparable)
		}
	}
}

// TestReprocessSummary checks the per-marker summary on a report made by
// hand: medians, the largest change and its visit, computability and
// intervals gained.
func TestReprocessSummary(t *testing.T) {
	ci := &metrics.Uncertainty{SE: 0.05, Low: 9.3, High: 9.5, Level: 0.95, Method: "bootstrap", Resamples: 500}
	wide := &metrics.Uncertainty{SE: 0.1, Low: 9.0, High: 9.4, Level: 0.95, Method: "bootstrap", Resamples: 500}
	const pdr = "pdr_frequency/posterior/closed"
	const ta = "theta_alpha_ratio/posterior/closed"
	rep := intake.ReprocessReport{Version: "2", Visits: []intake.VisitChange{
		{VisitID: 1, PatientCode: "A", Date: "2022-01-03", OldVersion: "1", Changes: []intake.MarkerChange{
			{Key: pdr, Unit: "Hz", Old: 9.5, New: 9.4, OldComputable: true, NewComputable: true, NewInterval: ci},
			{Key: ta, Old: 0.3, New: 0.33, OldComputable: true, NewComputable: true},
		}},
		{VisitID: 2, PatientCode: "A", Date: "2023-01-02", OldVersion: "1", Changes: []intake.MarkerChange{
			{Key: pdr, Unit: "Hz", Old: 9.6, New: 9.2, OldComputable: true, NewComputable: true, NewInterval: wide},
		}},
		{VisitID: 3, PatientCode: "B", Date: "2023-02-06", OldVersion: "1", Changes: []intake.MarkerChange{
			{Key: pdr, Unit: "Hz", New: 9.1, OldComputable: false, NewComputable: true, NewInterval: ci},
			{Key: ta, Old: 0.5, OldComputable: true, NewComputable: false},
		}},
	}}
	got := rep.Summary()
	if len(got) != 2 || got[0].Key != pdr || got[1].Key != ta {
		t.Fatalf("summary keys: %+v", got)
	}
	p, q := got[0], got[1]
	near := func(a, b float64) bool { return a-b < 1e-12 && b-a < 1e-12 }
	// PDR: moved in 3 visits, computable both times in 2: old 9.5, 9.6 →
	// median 9.55; new 9.4, 9.2 → 9.3; changes −0.1, −0.4 → −0.25; the
	// largest −0.4 at visit 2; widths 0.2, 0.4, 0.2 → 0.2.
	if p.Changed != 3 || p.Both != 2 || !near(p.MedianOld, 9.55) || !near(p.MedianNew, 9.3) || !near(p.MedianChange, -0.25) ||
		!near(p.Largest, -0.4) || p.LargestAt != "A 2023-01-02, visit 2" || p.BecameComputable != 1 || p.LostComputable != 0 ||
		p.GainedInterval != 3 || !near(p.MedianWidth, 0.2) || p.Unit != "Hz" {
		t.Errorf("PDR summary %+v", p)
	}
	if q.Changed != 2 || q.Both != 1 || !near(q.MedianChange, 0.03) || q.LostComputable != 1 || q.GainedInterval != 0 || q.MedianWidth != 0 {
		t.Errorf("theta/alpha summary %+v", q)
	}
}
