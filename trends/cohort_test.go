package trends

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
	"time"

	"longwave/metrics/clinic"
)

// cohortPatients is an invented cohort seen on 2024-06-01.
func cohortPatients() []clinic.PatientCourse {
	a := []clinic.VisitRecord{visitRec(1, "2021-05-01", 70, 9.8), visitRec(2, "2022-05-10", 71, 9.3), visitRec(3, "2023-05-01", 72, 8.9)}
	b := []clinic.VisitRecord{visitRec(4, "2024-01-10", 66, 9.9)}
	d := []clinic.VisitRecord{visitRec(5, "2021-03-01", 75, 9.4), visitRec(6, "2023-02-15", 77, 9.3)}
	d[1].Quality.Drowsiness = 0.4
	d[1].Flags = CheckVisit(VisitQuality{Conditions: d[1].Conditions, Quality: d[1].Quality})
	return []clinic.PatientCourse{
		{Patient: clinic.Patient{ID: 1, Code: "LH-A", Group: "patient"}, Visits: a},
		{Patient: clinic.Patient{ID: 2, Code: "LH-B", Group: "patient"}, Visits: b},
		{Patient: clinic.Patient{ID: 3, Code: "=LH-C", Group: "patient"}},
		{Patient: clinic.Patient{ID: 4, Code: "LH-D", Group: "control", FollowUpMonths: 24}, Visits: d},
	}
}

func TestBuildCohort(t *testing.T) {
	today := time.Date(2024, 6, 1, 12, 0, 0, 0, time.UTC)
	c := BuildCohort(cohortPatients(), CohortOptions{Today: today, SettingsVersion: testVersion, SettingsHash: testHash})
	if c.Patients != 4 || c.Visits != 6 || c.NonComparable != 1 || !near(c.NonComparableShare, 1.0/6, 1e-12) {
		t.Errorf("cohort totals %d patients %d visits %d non-comparable share %v", c.Patients, c.Visits, c.NonComparable, c.NonComparableShare)
	}
	type want struct {
		visits, comparable int
		first, last, due   string
		overdue            int
		flagged, reliable  bool
		pdr                Direction
	}
	wants := []want{
		{3, 3, "2021-05-01", "2023-05-01", "2024-05-01", 31, false, true, DirectionDown},
		{1, 1, "2024-01-10", "2024-01-10", "2025-01-10", 0, false, false, DirectionUnknown},
		{0, 0, "", "", "", 0, false, false, DirectionUnknown},
		{2, 1, "2021-03-01", "2023-02-15", "2025-02-15", 0, true, false, DirectionUnknown},
	}
	for i, w := range wants {
		r := c.Rows[i]
		got := want{r.Visits, r.ComparableVisits, r.FirstVisit, r.LastVisit, r.NextDue, r.DaysOverdue, r.Flagged, r.ReliableChange, r.Markers[0].Direction}
		if got != w {
			t.Errorf("row %s: %+v, want %+v", r.Code, got, w)
		}
		if r.Overdue != (w.overdue > 0) {
			t.Errorf("row %s: overdue %v with %d days", r.Code, r.Overdue, r.DaysOverdue)
		}
		if len(r.Markers) != len(DefaultMainMarkers()) {
			t.Errorf("row %s: %d main markers", r.Code, len(r.Markers))
		}
	}
	// Patient D's only comparable PDR point is the first: one point.
	if m := c.Rows[3].Markers[0]; m.Points != 1 {
		t.Errorf("row D pdr points %d, want 1", m.Points)
	}
	// Reactivity is not among the test visits' markers.
	if m := c.Rows[0].Markers[1]; m.Direction != DirectionUnknown || !strings.Contains(m.DirectionBasis, "not found") {
		t.Errorf("row A reactivity %+v", m)
	}
	// Retention: A (baseline 2021-05-01) has visits in years 1 and 2, D
	// (2021-03-01) in year 2 only; B's baseline is under a year ago.
	wantRet := []RetentionYear{{1, 2, 1, 0.5}, {2, 2, 2, 1}, {3, 2, 0, 0}}
	if !slices.Equal(c.Retention, wantRet) {
		t.Errorf("retention %+v, want %+v", c.Retention, wantRet)
	}
	// A cohort interval of 6 months for patients without their own.
	c6 := BuildCohort(cohortPatients(), CohortOptions{Today: today, FollowUpMonths: 6, SettingsVersion: testVersion, SettingsHash: testHash})
	if r := c6.Rows[1]; r.NextDue != "2024-07-10" || r.FollowUpMonths != 6 {
		t.Errorf("six-month cohort, row B: %s %d", r.NextDue, r.FollowUpMonths)
	}
	if r := c6.Rows[3]; r.NextDue != "2025-02-15" {
		t.Errorf("six-month cohort, row D keeps its 24 months: %s", r.NextDue)
	}
}

func TestSortAndFilterRows(t *testing.T) {
	c := BuildCohort(cohortPatients(), CohortOptions{Today: time.Date(2024, 6, 1, 0, 0, 0, 0, time.UTC), SettingsVersion: testVersion, SettingsHash: testHash})
	codes := func(rows []CohortRow) []string {
		var out []string
		for _, r := range rows {
			out = append(out, r.Code)
		}
		return out
	}
	tests := []struct {
		key  string
		desc bool
		want []string
	}{
		{SortByCode, false, []string{"=LH-C", "LH-A", "LH-B", "LH-D"}},
		{SortByOverdue, true, []string{"LH-A", "=LH-C", "LH-B", "LH-D"}},
		{SortByLastVisit, true, []string{"LH-B", "LH-A", "LH-D", "=LH-C"}},
		{SortByNextDue, false, []string{"=LH-C", "LH-A", "LH-B", "LH-D"}},
		{SortByVisits, true, []string{"LH-A", "LH-D", "LH-B", "=LH-C"}},
		{SortByComparable, false, []string{"=LH-C", "LH-B", "LH-D", "LH-A"}},
	}
	for _, tt := range tests {
		rows := slices.Clone(c.Rows)
		if err := SortRows(rows, tt.key, tt.desc); err != nil {
			t.Fatal(err)
		}
		if got := codes(rows); !slices.Equal(got, tt.want) {
			t.Errorf("sort %s desc %v: %v, want %v", tt.key, tt.desc, got, tt.want)
		}
	}
	if err := SortRows(c.Rows, "colour", false); !errors.Is(err, ErrSortKey) {
		t.Errorf("unknown key: %v", err)
	}
	for _, tt := range []struct {
		f    RowFilter
		want []string
	}{
		{RowFilter{}, []string{"LH-A", "LH-B", "=LH-C", "LH-D"}},
		{RowFilter{Overdue: true}, []string{"LH-A"}},
		{RowFilter{Flagged: true}, []string{"LH-D"}},
		{RowFilter{ReliableChange: true}, []string{"LH-A"}},
		{RowFilter{Overdue: true, Flagged: true}, nil},
	} {
		if got := codes(FilterRows(c.Rows, tt.f)); !slices.Equal(got, tt.want) {
			t.Errorf("filter %+v: %v, want %v", tt.f, got, tt.want)
		}
	}
}

func TestWriteCohortCSV(t *testing.T) {
	c := BuildCohort(cohortPatients(), CohortOptions{Today: time.Date(2024, 6, 1, 0, 0, 0, 0, time.UTC), SettingsVersion: testVersion, SettingsHash: testHash})
	var buf bytes.Buffer
	if err := WriteCohortCSV(&buf, c.Rows); err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(&buf).ReadAll()
	if err != nil {
		t.Fatalf("written CSV does not read back: %v", err)
	}
	if len(recs) != 5 {
		t.Fatalf("%d records, want header + 4", len(recs))
	}
	head := recs[0]
	col := func(name string) int {
		i := slices.Index(head, name)
		if i < 0 {
			t.Fatalf("no column %q in %v", name, head)
		}
		return i
	}
	a, cRow, d := recs[1], recs[3], recs[4]
	if a[col("code")] != "LH-A" || a[col("days_overdue")] != "31" || a[col("pdr_frequency/posterior/closed_direction")] != "down" ||
		a[col("reliable_change")] != "true" || a[col("pdr_frequency/posterior/closed_slope_per_year")] == "" {
		t.Errorf("row A %v", a)
	}
	if cRow[col("code")] != "'=LH-C" {
		t.Errorf("formula-looking code written as %q", cRow[col("code")])
	}
	if d[col("latest_flags")] != RuleDrowsy || d[col("pdr_frequency/posterior/closed_rc")] != "" {
		t.Errorf("row D %v", d)
	}
	// An empty cohort writes the header only.
	buf.Reset()
	if err := WriteCohortCSV(&buf, nil); err != nil || strings.Count(buf.String(), "\n") != 1 {
		t.Errorf("empty cohort: %q %v", buf.String(), err)
	}
}

// benchCohort is 5,000 invented patients with 2–8 yearly visits each.
func benchCohort() []clinic.PatientCourse {
	rng := rand.New(rand.NewPCG(2026, 12))
	out := make([]clinic.PatientCourse, 5000)
	id := int64(0)
	for i := range out {
		n := 2 + rng.IntN(7)
		vs := make([]clinic.VisitRecord, n)
		age := 55 + 30*rng.Float64()
		pdr := 9 + rng.Float64()
		for k := range vs {
			id++
			date := time.Date(2015+k, time.Month(1+rng.IntN(12)), 1+rng.IntN(28), 0, 0, 0, 0, time.UTC).Format("2006-01-02")
			vs[k] = visitRec(id, date, age+float64(k), pdr-0.05*float64(k)+0.2*rng.NormFloat64())
			if rng.IntN(10) == 0 {
				vs[k].Quality.Drowsiness = 0.5
				vs[k].Flags = CheckVisit(VisitQuality{Conditions: vs[k].Conditions, Quality: vs[k].Quality})
			}
		}
		out[i] = clinic.PatientCourse{Patient: clinic.Patient{ID: int64(i + 1), Code: fmt.Sprintf("LH-%05d", i+1)}, Visits: vs}
	}
	return out
}

func BenchmarkBuildCohort5000(b *testing.B) {
	ps := benchCohort()
	opt := CohortOptions{Today: time.Date(2024, 6, 1, 0, 0, 0, 0, time.UTC), SettingsVersion: testVersion, SettingsHash: testHash}
	b.ResetTimer()
	for b.Loop() {
		c := BuildCohort(ps, opt)
		if len(c.Rows) != 5000 {
			b.Fatal("rows")
		}
	}
}

// The same cohort with the control norms of 100 controls: the reliable
// change of each row's main markers takes its noise from them.
func BenchmarkBuildCohort5000Norms(b *testing.B) {
	ps := benchCohort()
	today := time.Date(2024, 6, 1, 0, 0, 0, 0, time.UTC)
	norms := BuildControlNorms(ageingControls(100, -0.02), ControlNormOptions{SettingsVersion: testVersion, SettingsHash: testHash, Today: today})
	opt := CohortOptions{Today: today, SettingsVersion: testVersion, SettingsHash: testHash, Norms: norms}
	b.ResetTimer()
	for b.Loop() {
		c := BuildCohort(ps, opt)
		if len(c.Rows) != 5000 {
			b.Fatal("rows")
		}
	}
}

// Fitting the control norms of 100 controls with 4 visits (three marker
// series), as the server does when the controls' data changed.
func BenchmarkBuildControlNorms100(b *testing.B) {
	ps := ageingControls(100, -0.02)
	opt := ControlNormOptions{SettingsVersion: testVersion, SettingsHash: testHash, Today: time.Date(2024, 6, 1, 0, 0, 0, 0, time.UTC)}
	for b.Loop() {
		if n := BuildControlNorms(ps, opt); len(n.Norms) != 3 {
			b.Fatal("norms")
		}
	}
}

func BenchmarkWriteCohortCSV5000(b *testing.B) {
	c := BuildCohort(benchCohort(), CohortOptions{Today: time.Date(2024, 6, 1, 0, 0, 0, 0, time.UTC), SettingsVersion: testVersion, SettingsHash: testHash})
	var buf bytes.Buffer
	for b.Loop() {
		buf.Reset()
		if err := WriteCohortCSV(&buf, c.Rows); err != nil {
			b.Fatal(err)
		}
	}
}
