package demo

import (
	"context"
	"path/filepath"
	"slices"
	"testing"
	"time"

	"gonum.org/v1/gonum/stat"

	"longwave/metrics"
	"longwave/metrics/clinic"
	"longwave/server/intake"
	"longwave/server/store"
	"longwave/trends"
)

var planDay = time.Date(2026, time.December, 1, 0, 0, 0, 0, time.UTC)

// demoHealthyCalledFaster is the number of the demo's healthy agers (26
// controls and 8 healthy patients) whose PDR the verdict calls "declines
// faster than the clinic's controls", as the README states it.
const demoHealthyCalledFaster = 1

func TestPlanShape(t *testing.T) {
	plan := Plan(planDay)
	if got := len(plan); got != patientCount+ControlCount {
		t.Fatalf("people: got %d, want %d", got, patientCount+ControlCount)
	}
	seen := map[Oddity]int{}
	controls, slowing := 0, 0
	var slopes []float64 // controls' planned PDR slopes
	for _, p := range plan {
		if n := len(p.Visits); n < 3 || n > 8 {
			t.Errorf("%s: %d visits, want 3 to 8", p.Code, n)
		}
		if p.Group == clinic.ControlGroup {
			// Issue 10: controls have 3–6 visits, aged about 55–85.
			if n := len(p.Visits); n > 6 {
				t.Errorf("control %s: %d visits, want 3 to 6", p.Code, n)
			}
			for _, v := range p.Visits {
				if age := float64(v.Date.Year()-p.BirthYear) - 0.5; age < 54 || age > 86 {
					t.Errorf("control %s: about %.0f years old on %s, want 55 to 85", p.Code, age, v.Date.Format(time.DateOnly))
				}
			}
			slopes = append(slopes, plannedSlope(p))
		}
		first, last := p.Visits[0].Date, p.Visits[len(p.Visits)-1].Date
		if span := last.Sub(first).Hours() / 24 / 365.25; span > 8 {
			t.Errorf("%s: visits span %.1f years, want at most 8", p.Code, span)
		}
		if last.After(planDay) {
			t.Errorf("%s: last visit %s after today", p.Code, last.Format(time.DateOnly))
		}
		for _, v := range p.Visits {
			if v.Oddity != Plain {
				seen[v.Oddity]++
			}
		}
		if p.Group == clinic.ControlGroup {
			controls++
		}
		if p.Course == SteadySlowing {
			slowing++
			// The invented slowing is about 0.3 Hz a year.
			if rate := plannedSlope(p); rate > -0.2 || rate < -0.4 {
				t.Errorf("%s: planned PDR change %.2f Hz/year, want about -0.3", p.Code, rate)
			}
		}
	}
	if controls < 24 || slowing < 5 {
		t.Errorf("controls %d, slowing %d: want at least 24 controls (issue 10) and several slowing patients", controls, slowing)
	}
	// The controls age slowly and differ from one another: their planned
	// slopes (truth plus visit noise, least squares) centre near the drawn
	// −0.02 Hz/year and spread.
	if m, sd := stat.MeanStdDev(slopes, nil); m < -0.08 || m > 0.04 || sd < 0.01 {
		t.Errorf("controls' planned PDR slopes: mean %.3f SD %.3f Hz/year, want about -0.02 with a spread", m, sd)
	}
	for _, o := range []Oddity{LowSampleRate, HardwareLowPass, HighHighPass, NoEyesOpen, Drowsy, MissingO2,
		ShortClean, CoarseResolution, FewChannels, UnknownEyeState, LineChange, NewEquipment, EarReference, OldSettings} {
		if seen[o] != 1 {
			t.Errorf("oddity %q on %d visits, want 1", o, seen[o])
		}
	}
	if !slices.EqualFunc(plan, Plan(planDay), func(a, b Patient) bool { return a.Code == b.Code && len(a.Visits) == len(b.Visits) }) {
		t.Error("the same day gave another plan")
	}
}

// TestBuildShowsEveryRule builds the whole demo clinic through the real
// pipeline and checks that every comparability rule the demo is meant to
// show fires on at least one visit (issue: the demo shows each rule).
func TestBuildShowsEveryRule(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the whole demo clinic (about 130 recordings)")
	}
	ctx := context.Background()
	st, err := store.Open(filepath.Join(t.TempDir(), "demo.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	start := time.Now()
	sum, err := Build(ctx, intake.New(st), Options{Today: planDay}, nil)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("demo: %d patients, %d visits in %v", sum.Patients, sum.Visits, time.Since(start).Round(time.Millisecond))

	pats, err := st.Patients(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if len(pats) != patientCount+ControlCount {
		t.Fatalf("patients stored: %d, want %d", len(pats), patientCount+ControlCount)
	}
	v1 := metrics.V1()
	controls, err := st.GroupVisitRecords(ctx, clinic.ControlGroup)
	if err != nil {
		t.Fatal(err)
	}
	norms := trends.BuildControlNorms(controls, trends.ControlNormOptions{SettingsVersion: v1.Version, SettingsHash: v1.Hash(), Today: planDay})
	course := map[string]Course{}
	for _, p := range Plan(planDay) {
		course[p.Code] = p.Course
	}
	fired := map[string]int{}
	var faster, healthyFaster []string
	healthy := 0
	for _, ps := range pats {
		visits, err := st.PatientVisits(ctx, ps.Patient.ID)
		if err != nil {
			t.Fatal(err)
		}
		c := trends.BuildCourse(ps.Patient, visits, trends.CourseOptions{SettingsVersion: v1.Version, SettingsHash: v1.Hash(), Today: planDay, Norms: norms})
		for _, v := range c.Visits {
			for _, f := range v.Flags {
				fired[f.Rule]++
			}
		}
		// The verdict on the posterior dominant rhythm against the controls.
		for _, sr := range c.Series {
			if sr.Marker != metrics.PDRFrequency || sr.Region != metrics.RegionPosterior || sr.State != "closed" {
				continue
			}
			v := sr.Change.Verdict
			t.Logf("%s %-7s %-14s %d comparable: %s (slope %.3f Hz/y, z %.2f)", ps.Patient.Code, ps.Patient.Group, course[ps.Patient.Code],
				sr.Change.Points, v.Text, v.Patient.PerYear, v.Z)
			if course[ps.Patient.Code] == HealthyAgeing {
				healthy++
			}
			switch {
			case v.Text == trends.SlopeDeclinesFaster && course[ps.Patient.Code] == HealthyAgeing:
				healthyFaster = append(healthyFaster, ps.Patient.Code)
			case v.Text == trends.SlopeDeclinesFaster:
				faster = append(faster, ps.Patient.Code)
			case course[ps.Patient.Code] == SteadySlowing:
				t.Errorf("%s slows 0.3 Hz a year but is %q", ps.Patient.Code, v.Text)
			}
		}
	}
	n := norms.Find(metrics.PDRFrequency, metrics.RegionPosterior, "closed")
	t.Logf("PDR norm: %s; %.4f Hz/y (%.4f to %.4f), slope SD %.4f, residual SD %.4f", n.Basis(), n.PerYear.Value, n.PerYear.CILow, n.PerYear.CIHigh, n.SlopeSD, n.ResidualSD)
	t.Logf("declines faster: %v; healthy agers called so: %d of %d %v", faster, len(healthyFaster), healthy, healthyFaster)
	// Issue 10, point 6: the model runs out of the box, and the README's
	// figures ("How sure is a verdict?" and the demo section) are these.
	if !n.Known || n.Persons < 24 {
		t.Errorf("PDR norm of the demo: %+v", n)
	}
	if len(faster) != patientCount-healthyPatients {
		t.Errorf("%d patients called faster than the controls, want the %d who slow", len(faster), patientCount-healthyPatients)
	}
	if len(healthyFaster) != demoHealthyCalledFaster {
		t.Errorf("healthy agers called faster: %v, the README says %d: update it", healthyFaster, demoHealthyCalledFaster)
	}
	t.Logf("rules fired: %v", fired)
	for _, rule := range []string{
		trends.RuleSampleRateBelow3x, trends.RuleLowPassInBand, trends.RuleHighPassAbove1Hz, trends.RuleCoarseResolution,
		trends.RuleOccipitalMissing, trends.RuleFewGoodPositions, trends.RuleLittleCleanClosed,
		trends.RuleNoEyesOpen, trends.RuleEyeStateUnknown, trends.RuleDrowsy, trends.RuleOtherSettings,
		trends.RuleLineFrequencyChange, trends.RuleReferenceChange, trends.RuleEquipmentChange,
	} {
		if fired[rule] == 0 {
			t.Errorf("rule %s never fired in the demo", rule)
		}
	}
}

// plannedSlope is the least-squares slope of a person's planned PDR truth
// over years since the first visit.
func plannedSlope(p Patient) float64 {
	var years, hz []float64
	for _, v := range p.Visits {
		years = append(years, v.Date.Sub(p.Visits[0].Date).Hours()/24/365.25)
		hz = append(hz, v.AlphaHz)
	}
	_, slope := stat.LinearRegression(years, hz, nil, false)
	return slope
}
