package trends

import (
	"encoding/json"
	"slices"
	"strings"
	"testing"
	"time"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/metrics/clinic"
)

// courseVisits is an invented patient of an invented clinic: five yearly
// visits. Visit 2 has O1 bad (the PDR is not comparable, the global exponent
// is); visit 3 comes from other equipment (a caution against visit 2);
// visit 4 was processed with settings v0 (not comparable at all).
func courseVisits() []clinic.VisitRecord {
	v := []clinic.VisitRecord{
		visitRec(11, "2019-04-02", 68.3, 9.6),
		visitRec(12, "2020-04-14", 69.3, 9.5),
		visitRec(13, "2021-04-06", 70.3, 9.2),
		visitRec(14, "2022-03-29", 71.3, 8.9),
		visitRec(15, "2023-04-11", 72.3, 8.8),
	}
	v[1].Quality.BadChannels = []string{"O1"}
	v[1].Quality.UsedChannels = slices.DeleteFunc(slices.Clone(v[1].Quality.UsedChannels), func(s string) bool { return s == "O1" })
	v[2].Conditions.Equipment = "Amp-9"
	v[3].SettingsVersion = "v0"
	v[3].Conditions.Equipment = "Amp-9"
	v[4].Conditions.Equipment = "Amp-9"
	for i := range v {
		v[i].Flags = CheckVisit(VisitQuality{Conditions: v[i].Conditions, Quality: v[i].Quality, Markers: v[i].Markers})
	}
	// Stored out of order: BuildCourse sorts by date.
	v[0], v[4] = v[4], v[0]
	return v
}

func literatureRanges(t *testing.T) *Ranges {
	t.Helper()
	r, err := NewRanges(loadMigrationRows(t))
	if err != nil {
		t.Fatal(err)
	}
	return r
}

func TestBuildCourse(t *testing.T) {
	p := clinic.Patient{ID: 1, Code: "LH-0417", Sex: "F", BirthYear: 1951, Group: "patient", Cohort: "Lindenhof memory clinic"}
	c := BuildCourse(p, courseVisits(), CourseOptions{
		Ranges: literatureRanges(t), SettingsVersion: testVersion, SettingsHash: testHash,
		Today: time.Date(2024, 6, 1, 9, 0, 0, 0, time.UTC),
	})
	var dates, verdicts []string
	for _, v := range c.Visits {
		dates = append(dates, v.Date)
		verdicts = append(verdicts, v.Verdict)
	}
	if want := []string{"2019-04-02", "2020-04-14", "2021-04-06", "2022-03-29", "2023-04-11"}; !slices.Equal(dates, want) {
		t.Fatalf("visit dates %v, want %v", dates, want)
	}
	if want := []string{VerdictComparable, VerdictPartly, VerdictCautions, VerdictNotComparable, VerdictComparable}; !slices.Equal(verdicts, want) {
		t.Errorf("verdicts %v, want %v", verdicts, want)
	}
	if _, ok := hasRule(c.Visits[2].Flags, RuleEquipmentChange); !ok {
		t.Errorf("visit 3 flags %v: no equipment change", rulesOf(c.Visits[2].Flags))
	}
	if _, ok := hasRule(c.Visits[3].Flags, RuleOtherSettings); !ok || c.Visits[3].Comparable {
		t.Errorf("visit 4 flags %v: want other settings, not comparable", rulesOf(c.Visits[3].Flags))
	}
	// Visit 5 uses the same equipment as visit 4: no caution although it
	// differs from visit 1.
	if len(c.Visits[4].Flags) != 0 {
		t.Errorf("visit 5 flags %v, want none", rulesOf(c.Visits[4].Flags))
	}
	if c.NextDue != "2024-04-11" || c.DaysOverdue != 51 {
		t.Errorf("next due %s overdue %d, want 2024-04-11 and 51 days", c.NextDue, c.DaysOverdue)
	}

	series := map[string]Series{}
	var keys []string
	for _, s := range c.Series {
		series[s.Key] = s
		keys = append(keys, s.Key)
	}
	if want := []string{"pdr_frequency/posterior/closed", "theta_alpha_ratio/posterior/closed", "aperiodic_exponent/global/closed"}; !slices.Equal(keys, want) {
		t.Fatalf("series %v, want %v", keys, want)
	}
	pdr := series["pdr_frequency/posterior/closed"]
	var comparable []bool
	for _, pt := range pdr.Points {
		comparable = append(comparable, pt.Comparable)
	}
	if want := []bool{true, false, true, false, true}; !slices.Equal(comparable, want) {
		t.Errorf("PDR comparable %v, want %v", comparable, want)
	}
	if r := pdr.Points[1].Reasons; len(r) != 1 || !strings.Contains(r[0], "O1") {
		t.Errorf("PDR visit 2 reasons %v", r)
	}
	if r := pdr.Points[2].Cautions; len(r) != 1 || !strings.Contains(r[0], "equipment") {
		t.Errorf("PDR visit 3 cautions %v", r)
	}
	ch := pdr.Change
	if ch.Points != 3 || ch.BaselineVisitID != 11 || ch.LatestVisitID != 15 || !near(ch.FromBaseline, -0.8, 1e-12) {
		t.Errorf("PDR change %+v", ch)
	}
	// RCI with the provisional default: −0.8/0.32244 = −2.481, reliable.
	if !ch.Reliable.Known || !ch.Reliable.Reliable || !near(ch.Reliable.RC, -0.8/0.322441, 1e-4) || !ch.Reliable.Provisional {
		t.Errorf("PDR RCI %+v", ch.Reliable)
	}
	if !ch.Slope.Known || ch.Slope.N != 3 || ch.Slope.PerYear >= 0 {
		t.Errorf("PDR slope %+v", ch.Slope)
	}
	if ch.Expected.Known || ch.Expected.Reason == "" {
		t.Errorf("PDR expected change %+v: the literature gives none", ch.Expected)
	}
	// Ranges at the visit's age: at 72.3 y four PDR sources apply.
	if l := pdr.Points[4].Literature; len(l.Matches) != 4 || l.Advisory != AdvisoryLiterature || !l.Matches[0].Placed {
		t.Errorf("PDR visit 5 literature %+v", l)
	}
	if l := pdr.Points[4].Local; l.Known || l.Reason == "" || l.Label != LocalLabel {
		t.Errorf("PDR visit 5 local %+v, want none with a reason", l)
	}
	// The exponent is unaffected by O1: four comparable points.
	exp := series["aperiodic_exponent/global/closed"]
	if exp.Change.Points != 4 {
		t.Errorf("exponent comparable points %d, want 4", exp.Change.Points)
	}
	if l := exp.Points[0].Literature; len(l.Matches) != 0 || !strings.Contains(l.NoRange, "course only") {
		t.Errorf("exponent literature %+v", l)
	}
	if r := exp.Change.Reliable; r.Known || !strings.Contains(r.Reason, "not computed") {
		t.Errorf("exponent RCI %+v", r)
	}
	// JSON-ready: no NaN, no maps needed.
	b, err := json.Marshal(c)
	if err != nil {
		t.Fatalf("json: %v", err)
	}
	if !strings.Contains(string(b), `"advisory":"advisory, literature reference, not a diagnosis"`) {
		t.Error("course JSON lacks the advisory text")
	}
}

func TestBuildCourseEdgeCases(t *testing.T) {
	// No visits.
	c := BuildCourse(clinic.Patient{Code: "LH-0001"}, nil, CourseOptions{SettingsVersion: testVersion, Today: time.Now()})
	if len(c.Visits) != 0 || len(c.Series) != 0 || c.NextDue != "" || c.Visits == nil || c.Series == nil {
		t.Errorf("empty course %+v", c)
	}
	// A bad date, a marker that is not computable, a visit lacking a marker,
	// an unknown age.
	v := []clinic.VisitRecord{visitRec(1, "2020-02-30", 70, 9.5), visitRec(2, "2021-02-01", 71, 9.4), visitRec(3, "2022-02-01", 72, 9.3)}
	v[1].Markers[0].Computable, v[1].Markers[0].Value, v[1].Markers[0].Reason = false, 0, "no distinct rhythm: peak 1.1 × the aperiodic fit"
	v[2].Markers = v[2].Markers[1:]
	v[2].Visit.AgeKnown = false
	c = BuildCourse(clinic.Patient{Code: "LH-0002", FollowUpMonths: 6}, v, CourseOptions{SettingsVersion: testVersion, SettingsHash: testHash, Today: time.Date(2022, 3, 1, 0, 0, 0, 0, time.UTC)})
	if c.Visits[2].Date != "2020-02-30" || c.Visits[2].Comparable {
		t.Errorf("bad date visit: %+v", c.Visits[2])
	}
	if _, ok := hasRule(c.Visits[2].Flags, RuleBadDate); !ok {
		t.Error("bad date: no flag")
	}
	pdr := c.Series[0]
	if pdr.Points[0].Computable || !strings.Contains(pdr.Points[0].Reasons[0], "no distinct rhythm") {
		t.Errorf("not computable point %+v", pdr.Points[0])
	}
	if pdr.Points[1].Computable || pdr.Points[1].Reasons[0] != "not among this visit's markers" || !strings.Contains(pdr.Points[1].Literature.NoRange, "age unknown") {
		t.Errorf("missing marker point %+v", pdr.Points[1])
	}
	if pdr.Change.Points != 0 || pdr.Change.Direction != DirectionUnknown {
		t.Errorf("change %+v", pdr.Change)
	}
	if c.NextDue != "2022-08-01" || c.DaysOverdue != 0 || c.Patient.FollowUpMonths != 6 {
		t.Errorf("six-month follow-up: next due %s overdue %d", c.NextDue, c.DaysOverdue)
	}
}

// A flag concerns only its markers: an eyes-open gap makes reactivity
// not comparable and leaves the PDR alone.
func TestCourseFlagScope(t *testing.T) {
	v := []clinic.VisitRecord{visitRec(1, "2020-01-01", 70, 9.5)}
	v[0].Markers = append(v[0].Markers, metrics.Marker{Name: metrics.AlphaReactivity, Region: metrics.RegionPosterior, State: ingest.EyesOpen, Value: 0.6, Computable: true})
	v[0].Quality.CleanSeconds[ingest.EyesOpen] = 0
	v[0].Flags = CheckVisit(VisitQuality{Conditions: v[0].Conditions, Quality: v[0].Quality})
	c := BuildCourse(clinic.Patient{Code: "LH-0003"}, v, CourseOptions{SettingsVersion: testVersion, SettingsHash: testHash, Today: time.Now()})
	for _, s := range c.Series {
		want := s.Marker != metrics.AlphaReactivity
		if s.Points[0].Comparable != want {
			t.Errorf("%s comparable %v, want %v", s.Key, s.Points[0].Comparable, want)
		}
	}
}

// A clinic file that gives an expected yearly change for age (here −0.03 Hz
// a year from 70 y, invented): a decline whose CI lies entirely below it is
// "faster than expected for age".
func TestCourseExpectedChangeFromClinicFile(t *testing.T) {
	rows, err := ParseRangesTSV(strings.NewReader(clinicTSV), "lindenhof")
	if err != nil {
		t.Fatal(err)
	}
	r, err := NewRanges(rows)
	if err != nil {
		t.Fatal(err)
	}
	v := []clinic.VisitRecord{
		visitRec(1, "2020-01-10", 71, 9.6), visitRec(2, "2021-01-12", 72, 9.3),
		visitRec(3, "2022-01-11", 73, 9.0), visitRec(4, "2023-01-10", 74, 8.75),
	}
	c := BuildCourse(clinic.Patient{Code: "LH-0420"}, v, CourseOptions{Ranges: r, SettingsVersion: testVersion, SettingsHash: testHash, Today: time.Now()})
	e := c.Series[0].Change.Expected
	if !e.Known || !e.Faster || e.Verdict != ExpectedFaster || e.PerYear != -0.03 || !strings.Contains(e.Source, "Lindenhof") {
		t.Errorf("expected for age %+v (slope %+v)", e, c.Series[0].Change.Slope)
	}
	if a := c.Series[0].Points[0].Literature.Advisory; a != AdvisoryClinic {
		t.Errorf("clinic range advisory %q", a)
	}
}
