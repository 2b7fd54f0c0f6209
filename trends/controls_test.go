package trends

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
	"time"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/metrics/clinic"
)

// ageingControls are n invented control participants with 4 yearly visits
// each from ages 58 to 80: PDR about 10 Hz, each person's own slope drawn
// around perYear with SD 0.02 Hz/year, visit noise 0.1 Hz (synthetic ground
// truth, seeded).
func ageingControls(n int, perYear float64) []clinic.PatientCourse {
	rng := rand.New(rand.NewPCG(10, 24))
	var out []clinic.PatientCourse
	id := int64(1000)
	for i := 0; i < n; i++ {
		age0 := 58 + 22*float64(i)/float64(n)
		level := 10 + 0.4*rng.NormFloat64()
		slope := perYear + 0.02*rng.NormFloat64()
		pc := clinic.PatientCourse{Patient: clinic.Patient{ID: int64(i + 1), Code: fmt.Sprintf("LH-C%02d", i+1), Group: clinic.ControlGroup}}
		for v := 0; v < 4; v++ {
			id++
			rec := visitRec(id, fmt.Sprintf("%d-04-02", 2019+v), age0+float64(v), level+slope*float64(v)+0.1*rng.NormFloat64())
			rec.Visit.PatientID = pc.Patient.ID
			rec.Markers[1].Value += 0.05 * rng.NormFloat64() // theta/alpha
			rec.Markers[2].Value += 0.05 * rng.NormFloat64() // exponent
			pc.Visits = append(pc.Visits, rec)
		}
		out = append(out, pc)
	}
	return out
}

func TestBuildControlNorms(t *testing.T) {
	today := time.Date(2026, 12, 3, 9, 0, 0, 0, time.UTC)
	ctl := ageingControls(24, -0.02)
	// A visit processed by other settings stays out; a patient is no control.
	ctl[0].Visits[3].SettingsVersion = "v0"
	pat := clinic.PatientCourse{Patient: clinic.Patient{ID: 99, Code: "LH-P01", Group: "patient"},
		Visits: []clinic.VisitRecord{visitRec(1, "2020-01-01", 70, 3)}}
	norms := BuildControlNorms(append(ctl, pat), ControlNormOptions{SettingsVersion: testVersion, SettingsHash: testHash, Today: today})
	if norms.Controls != 24 || norms.FittedOn != "2026-12-03" {
		t.Fatalf("controls %d fitted %q", norms.Controls, norms.FittedOn)
	}
	n := norms.Find(metrics.PDRFrequency, metrics.RegionPosterior, "closed")
	if !n.Known || n.Persons != 24 || n.Visits != 95 {
		t.Fatalf("PDR norm: known %v, %d persons, %d visits (%s), want 24 and 95", n.Known, n.Persons, n.Visits, n.Reason)
	}
	if !strings.HasPrefix(n.Basis(), "clinic controls: 24 persons, 95 visits, fitted 2026-12-03") {
		t.Errorf("basis %q", n.Basis())
	}
	// The drawn truth: slope −0.02 Hz/year, residual SD 0.1 Hz. With 24
	// persons the estimates land near it (loose bounds: a check that the
	// observations reached the model, not of the fit, which lw-model's
	// tests hold against statsmodels).
	if n.PerYear.CILow > -0.02 || n.PerYear.CIHigh < -0.02 || math.Abs(n.ResidualSD-0.1) > 0.04 {
		t.Errorf("PDR norm per year %+v, residual SD %v", n.PerYear, n.ResidualSD)
	}
	if got := norms.Find("no_such_marker", "x", "closed"); got.Known || !strings.Contains(got.Reason, "24 control participants") {
		t.Errorf("missing series: %+v", got)
	}
	var none *ControlNorms
	if got := none.Find(metrics.PDRFrequency, metrics.RegionPosterior, "closed"); got.Known || got.Reason == "" {
		t.Errorf("nil norms: %+v", got)
	}
	if got := BuildControlNorms([]clinic.PatientCourse{pat}, ControlNormOptions{}).Find(metrics.PDRFrequency, metrics.RegionPosterior, "closed"); got.Known || !strings.Contains(got.Reason, "no control participants") {
		t.Errorf("no controls: %+v", got)
	}
	// Too few controls: not known, with the minimum in words.
	few := BuildControlNorms(ctl[:8], ControlNormOptions{SettingsVersion: testVersion, SettingsHash: testHash, Today: today})
	if got := few.Find(metrics.PDRFrequency, metrics.RegionPosterior, "closed"); got.Known || !strings.Contains(got.Reason, "at least 20") {
		t.Errorf("8 controls: %+v", got)
	}
	// Series limits the fit.
	only := BuildControlNorms(ctl, ControlNormOptions{SettingsVersion: testVersion, SettingsHash: testHash,
		Series: []SeriesRef{{Marker: metrics.PDRFrequency}}})
	if len(only.Norms) != 1 || only.Norms[0].Marker != metrics.PDRFrequency {
		t.Errorf("series filter: %d norms", len(only.Norms))
	}
}

// A course against the control norms: the expected change, the reliable
// change index's noise and the verdict come from the norm where it exists,
// from the literature table (RCI) or not at all where it does not.
func TestCourseWithControlNorms(t *testing.T) {
	today := time.Date(2026, 12, 3, 9, 0, 0, 0, time.UTC)
	norms := BuildControlNorms(ageingControls(24, -0.02), ControlNormOptions{SettingsVersion: testVersion, SettingsHash: testHash, Today: today})
	slowing := []clinic.VisitRecord{
		visitRec(1, "2021-05-01", 70.2, 9.9), visitRec(2, "2022-05-03", 71.2, 9.6),
		visitRec(3, "2023-05-02", 72.2, 9.3), visitRec(4, "2024-05-06", 73.2, 9.0),
	}
	// A marker none of the controls has: no norm for it.
	for i := range slowing {
		slowing[i].Markers = append(slowing[i].Markers, metrics.Marker{Name: metrics.AlphaReactivity, Region: metrics.RegionPosterior,
			State: ingest.EyesOpen, Value: 0.6 - 0.05*float64(i), Computable: true})
	}
	c := BuildCourse(clinic.Patient{ID: 7, Code: "LH-0007", Group: "patient"}, slowing,
		CourseOptions{SettingsVersion: testVersion, SettingsHash: testHash, Today: today, Norms: norms})
	var pdr, react Series
	for _, s := range c.Series {
		switch s.Marker {
		case metrics.PDRFrequency:
			pdr = s
		case metrics.AlphaReactivity:
			react = s
		}
	}
	ch := pdr.Change
	if !ch.Expected.Known || ch.Expected.Basis != BasisClinic || ch.Expected.Persons != 24 || ch.Expected.Visits != 96 ||
		!(ch.Expected.CILow < ch.Expected.PerYear && ch.Expected.PerYear < ch.Expected.CIHigh) || ch.Expected.ResidualSD <= 0 {
		t.Errorf("PDR expected %+v", ch.Expected)
	}
	// −0.3 Hz a year against controls around −0.02: declines faster.
	if v := ch.Verdict; !v.Known || v.Text != SlopeDeclinesFaster || v.Direction != DirectionDown || !v.Concern || v.Basis != ch.Expected.BasisText {
		t.Errorf("PDR verdict %+v", v)
	}
	if r := ch.Reliable; !r.Known || r.SEBasis != BasisClinic || r.SE != ch.Expected.ResidualSD || !strings.Contains(r.SESource, "residual SD") ||
		math.Abs(r.RC-(9.0-9.9)/(math.Sqrt2*r.SE)) > 1e-12 {
		t.Errorf("PDR reliable change %+v", r)
	}
	if len(pdr.LiteratureNotes) == 0 || pdr.LiteratureNotes[0].Source == "" || pdr.LiteratureNotes[0].Advisory == "" {
		t.Errorf("PDR literature notes %+v", pdr.LiteratureNotes)
	}
	// Reactivity: no control has it, so no norm, no verdict, and no RCI
	// (no literature row either), each saying why.
	if e := react.Change; e.Expected.Known || !strings.Contains(e.Expected.Reason, "no control model: none of the 24 control participants") || e.Verdict.Known ||
		!strings.HasPrefix(e.Verdict.Text, "no verdict: no control model") || e.Reliable.Known || !strings.Contains(e.Reliable.Reason, "no control model") {
		t.Errorf("reactivity: expected %+v verdict %+v reliable %+v", e.Expected, e.Verdict, e.Reliable)
	}
	// Without norms the PDR falls back to the literature r, marked so.
	c = BuildCourse(clinic.Patient{Code: "LH-0007"}, slowing, CourseOptions{SettingsVersion: testVersion, SettingsHash: testHash, Today: today})
	for _, s := range c.Series {
		if s.Marker != metrics.PDRFrequency {
			continue
		}
		if r := s.Change.Reliable; !r.Known || r.SEBasis != BasisLiterature || !r.Provisional {
			t.Errorf("no norms: reliable %+v", r)
		}
		if v := s.Change.Verdict; v.Known || !strings.Contains(v.Reason, "no control model") {
			t.Errorf("no norms: verdict %+v", v)
		}
	}
	// Two comparable visits: no verdict, and it says why.
	c = BuildCourse(clinic.Patient{Code: "LH-0008"}, slowing[:2], CourseOptions{SettingsVersion: testVersion, SettingsHash: testHash, Today: today, Norms: norms})
	if v := c.Series[0].Change.Verdict; v.Known || !strings.Contains(v.Reason, "at least 3") {
		t.Errorf("two visits: verdict %+v", v)
	}
}

// TestCohortVerdictMatchesCourse checks that a cohort row carries the same
// verdict against the controls as the patient's course, with the comparable
// values for its small line, and that the rows sort and filter by it
// (declines faster first). Synthetic ground truth: one slowing patient
// (−0.3 Hz a year), one steady, one with two visits only.
func TestCohortVerdictMatchesCourse(t *testing.T) {
	today := time.Date(2026, 12, 3, 9, 0, 0, 0, time.UTC)
	norms := BuildControlNorms(ageingControls(24, -0.02), ControlNormOptions{SettingsVersion: testVersion, SettingsHash: testHash, Today: today})
	slowing := []clinic.VisitRecord{
		visitRec(1, "2021-05-01", 70.2, 9.9), visitRec(2, "2022-05-03", 71.2, 9.6),
		visitRec(3, "2023-05-02", 72.2, 9.3), visitRec(4, "2024-05-06", 73.2, 9.0),
	}
	steady := []clinic.VisitRecord{
		visitRec(11, "2021-05-01", 70.2, 9.9), visitRec(12, "2022-05-03", 71.2, 9.95),
		visitRec(13, "2023-05-02", 72.2, 9.85), visitRec(14, "2024-05-06", 73.2, 9.9),
	}
	short := []clinic.VisitRecord{visitRec(21, "2023-05-02", 72.2, 9.3), visitRec(22, "2024-05-06", 73.2, 9.0)}
	patients := []clinic.PatientCourse{
		{Patient: clinic.Patient{ID: 3, Code: "LH-S"}, Visits: short},
		{Patient: clinic.Patient{ID: 2, Code: "LH-T"}, Visits: steady},
		{Patient: clinic.Patient{ID: 1, Code: "LH-D"}, Visits: slowing},
	}
	c := BuildCohort(patients, CohortOptions{Today: today, SettingsVersion: testVersion, SettingsHash: testHash, Norms: norms})
	course := BuildCourse(patients[2].Patient, slowing, CourseOptions{SettingsVersion: testVersion, SettingsHash: testHash, Today: today, Norms: norms})
	var want SlopeVerdict
	for _, s := range course.Series {
		if s.Marker == metrics.PDRFrequency && s.Region == metrics.RegionPosterior && s.State == "closed" {
			want = s.Change.Verdict
		}
	}
	got := RowVerdict(c.Rows[2])
	if !want.Known || got.Text != want.Text || math.Abs(got.Patient.PerYear-want.Patient.PerYear) > 1e-12 || got.Direction != DirectionDown {
		t.Errorf("cohort verdict %+v, course verdict %+v", got, want)
	}
	if vs := c.Rows[2].Markers[0].Values; len(vs) != 4 || vs[0].Date != "2021-05-01" || vs[3].Value != 9.0 {
		t.Errorf("row values %+v, want the 4 comparable visits in date order", vs)
	}
	if v := RowVerdict(c.Rows[1]); !v.Known || v.Direction != DirectionSteady {
		t.Errorf("steady patient: %+v", v)
	}
	if v := RowVerdict(c.Rows[0]); v.Known || !strings.Contains(v.Reason, "at least 3") {
		t.Errorf("two visits: %+v", v)
	}
	rows := slices.Clone(c.Rows)
	if err := SortRows(rows, SortByVerdict, false); err != nil {
		t.Fatal(err)
	}
	var order []string
	for _, r := range rows {
		order = append(order, r.Code)
	}
	if !slices.Equal(order, []string{"LH-D", "LH-T", "LH-S"}) {
		t.Errorf("sorted by verdict: %v, want declines faster, within, no verdict", order)
	}
	for dir, code := range map[Direction]string{DirectionDown: "LH-D", DirectionSteady: "LH-T", DirectionUnknown: "LH-S"} {
		if f := FilterRows(c.Rows, RowFilter{Verdict: dir}); len(f) != 1 || f[0].Code != code {
			t.Errorf("filter verdict %s: %d rows, want %s", dir, len(f), code)
		}
	}
	if f := FilterRows(c.Rows, RowFilter{Verdict: DirectionUp}); len(f) != 0 {
		t.Errorf("filter rises faster: %d rows, want none", len(f))
	}
}
