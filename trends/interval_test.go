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

// withCI returns m with a 95 % interval [lo, hi].
func withCI(m metrics.Marker, lo, hi float64) metrics.Marker {
	m.Uncertainty = &metrics.Uncertainty{SE: (hi - lo) / 3.92, Low: lo, High: hi, Level: 0.95,
		Method: "percentile bootstrap over kept windows", Resamples: 1000}
	return m
}

func marker(name, region string, st ingest.EyeState, v float64, unit string) metrics.Marker {
	return metrics.Marker{Name: name, Region: region, State: st, Value: v, Unit: unit, Computable: true}
}

var (
	pdrM   = marker(metrics.PDRFrequency, metrics.RegionPosterior, ingest.EyesClosed, 9.5, metrics.UnitHz)
	taM    = marker(metrics.ThetaAlphaRatio, metrics.RegionPosterior, ingest.EyesClosed, 0.25, metrics.UnitRatio)
	expM   = marker(metrics.AperiodicExponent, metrics.RegionGlobal, ingest.EyesClosed, 1.3, metrics.UnitOne)
	reactM = marker(metrics.AlphaReactivity, metrics.RegionPosterior, "", 0.6, metrics.UnitShare)
)

// flagSummary lists rule:severity:markers for each flag of the
// enough-data rules.
func flagSummary(flags []metrics.Flag) []string {
	var out []string
	for _, f := range flags {
		if f.Rule != RuleLittleCleanClosed && f.Rule != RuleIntervalWide {
			continue
		}
		out = append(out, f.Rule+":"+string(f.Severity)+":"+strings.Join(f.Markers, ","))
	}
	return out
}

// TestEnoughDataByInterval: the limits are those of trends/thresholds.go
// (PDR 0.45 Hz, theta/alpha 40 % of the value, exponent 0.1, reactivity
// 0.2); each case sits just inside or just outside one of them.
func TestEnoughDataByInterval(t *testing.T) {
	pdrKey, taKey, expKey := pdrM.Key(), taM.Key(), expM.Key()
	notComp, caution := string(metrics.NotComparable), string(metrics.Caution)
	tests := []struct {
		name    string
		closed  float64
		markers []metrics.Marker
		want    []string
	}{
		// Settings v1: no intervals, today's rule on clean seconds.
		{"v1, enough data", 180, []metrics.Marker{pdrM, taM}, nil},
		{"v1, 59.9 s", 59.9, []metrics.Marker{pdrM, taM}, []string{RuleLittleCleanClosed + ":" + notComp + ":"}},
		{"v1, 60 s", 60, []metrics.Marker{pdrM, taM}, nil},
		{"no markers at all, 20 s", 20, nil, []string{RuleLittleCleanClosed + ":" + notComp + ":"}},
		// Intervals: each marker on its own.
		{"narrow intervals, enough data", 180,
			[]metrics.Marker{withCI(pdrM, 9.4, 9.6), withCI(taM, 0.23, 0.27), withCI(expM, 1.26, 1.34)}, nil},
		{"narrow intervals, 30 s: caution only", 30,
			[]metrics.Marker{withCI(pdrM, 9.4, 9.6), withCI(taM, 0.23, 0.27)},
			[]string{RuleLittleCleanClosed + ":" + caution + ":"}},
		{"PDR width 0.44 Hz", 180, []metrics.Marker{withCI(pdrM, 9.28, 9.72)}, nil},
		{"PDR width 0.46 Hz", 180, []metrics.Marker{withCI(pdrM, 9.27, 9.73)}, []string{RuleIntervalWide + ":" + notComp + ":" + pdrKey}},
		{"theta/alpha 39 % of the value", 180, []metrics.Marker{withCI(taM, 0.2015, 0.299)}, nil},
		{"theta/alpha 41 % of the value", 180, []metrics.Marker{withCI(taM, 0.1985, 0.301)}, []string{RuleIntervalWide + ":" + notComp + ":" + taKey}},
		{"exponent width 0.12", 180, []metrics.Marker{withCI(expM, 1.24, 1.36)}, []string{RuleIntervalWide + ":" + notComp + ":" + expKey}},
		{"reactivity width 0.19", 180, []metrics.Marker{withCI(reactM, 0.5, 0.69)}, nil},
		{"reactivity width 0.25", 180, []metrics.Marker{withCI(reactM, 0.48, 0.73)}, []string{RuleIntervalWide + ":" + notComp + ":" + reactM.Key()}},
		{"one wide, one narrow, short data", 40,
			[]metrics.Marker{withCI(pdrM, 9.0, 9.9), withCI(taM, 0.24, 0.26)},
			[]string{RuleLittleCleanClosed + ":" + caution + ":", RuleIntervalWide + ":" + notComp + ":" + pdrKey}},
		// A marker without an interval among markers with one keeps the
		// clean-seconds rule, for itself only.
		{"one marker without interval, short data", 40,
			[]metrics.Marker{withCI(pdrM, 9.4, 9.6), taM},
			[]string{RuleLittleCleanClosed + ":" + caution + ":", RuleLittleCleanClosed + ":" + notComp + ":" + taKey}},
		{"one marker without interval, enough data", 180, []metrics.Marker{withCI(pdrM, 9.4, 9.6), taM}, nil},
		// A marker that is not computable is judged by nothing here.
		{"not computable", 40, []metrics.Marker{withCI(pdrM, 9.4, 9.6),
			{Name: metrics.ThetaAlphaRatio, Region: metrics.RegionGlobal, State: ingest.EyesClosed, Reason: "no alpha"}},
			[]string{RuleLittleCleanClosed + ":" + caution + ":"}},
		{"relative limit at value 0", 180, []metrics.Marker{withCI(marker(metrics.RelBeta, metrics.RegionFrontal, ingest.EyesClosed, 0, metrics.UnitShare), 0, 0.01)},
			[]string{RuleIntervalWide + ":" + notComp + ":" + metrics.RelBeta + "/frontal/closed"}},
	}
	for _, tt := range tests {
		q := goodQuality()
		q.CleanSeconds[ingest.EyesClosed] = tt.closed
		got := flagSummary(CheckVisit(VisitQuality{Conditions: goodConditions(), Quality: q, Markers: tt.markers}))
		if !slices.Equal(got, tt.want) {
			t.Errorf("%s: flags %v, want %v", tt.name, got, tt.want)
		}
	}
}

func TestIntervalWideReasonAndScope(t *testing.T) {
	q := goodQuality()
	m := withCI(pdrM, 9.1, 9.8)
	flags := CheckVisit(VisitQuality{Conditions: goodConditions(), Quality: q, Markers: []metrics.Marker{m, withCI(taM, 0.24, 0.26)}})
	f, ok := hasRule(flags, RuleIntervalWide)
	if !ok {
		t.Fatalf("no %s flag in %v", RuleIntervalWide, rulesOf(flags))
	}
	for _, want := range []string{"posterior dominant rhythm (posterior region, eyes closed)", "95 % interval 9.1 to 9.8 Hz", "0.7 Hz wide", "wider than 0.45 Hz"} {
		if !strings.Contains(f.Reason, want) {
			t.Errorf("reason %q lacks %q", f.Reason, want)
		}
	}
	// A relative limit: theta/alpha 0.25, interval 0.18 to 0.32 (56 % of it).
	rel, ok := hasRule(CheckVisit(VisitQuality{Conditions: goodConditions(), Quality: q, Markers: []metrics.Marker{withCI(taM, 0.18, 0.32)}}), RuleIntervalWide)
	if want := "theta/alpha ratio (posterior region, eyes closed): 95 % interval 0.18 to 0.32 is 0.14 wide, 56 % of the value 0.25; wider than 40 % of the value"; !ok || !strings.HasPrefix(rel.Reason, want) {
		t.Errorf("relative reason %q, want it to start %q", rel.Reason, want)
	}
	// The flag concerns that series only.
	if !FlagAffects(f, m) || FlagAffects(f, taM) || FlagAffects(f, marker(metrics.PDRFrequency, metrics.RegionPosterior, ingest.EyesOpen, 9.9, "Hz")) {
		t.Errorf("flag markers %v: must concern %s alone", f.Markers, m.Key())
	}
	if strings.Contains(f.Reason, "_") {
		t.Errorf("reason %q has a key where words belong", f.Reason)
	}
}

// TestIntervalLimitsCoverEveryMarker: every marker name has a limit, once,
// positive, and the rules list names them.
func TestIntervalLimitsCoverEveryMarker(t *testing.T) {
	lims := IntervalLimits()
	var names []string
	for _, l := range lims {
		if l.Width <= 0 || l.Words == "" || strings.Contains(l.Words, "_") {
			t.Errorf("limit %+v: want a positive width and words", l)
		}
		names = append(names, l.Marker)
	}
	if !slices.Equal(names, MarkerNames()) {
		t.Errorf("limits for %v, want %v", names, MarkerNames())
	}
	var found bool
	for _, r := range Rules() {
		if r.Name == RuleIntervalWide {
			found = strings.Contains(r.Threshold, "posterior dominant rhythm 0.45;") && strings.Contains(r.Threshold, "theta/alpha ratio 40 % of the value")
		}
	}
	if !found {
		t.Errorf("Rules() does not list %s with its limits", RuleIntervalWide)
	}
}

// TestCourseCarriesIntervals: a course's points carry each visit's
// interval (none for a visit without), and a marker whose interval is too
// wide is apart for that series only.
func TestCourseCarriesIntervals(t *testing.T) {
	v := []clinic.VisitRecord{visitRec(21, "2024-02-01", 70.1, 9.6), visitRec(22, "2025-02-03", 71.1, 9.4)}
	m := v[1].Markers
	m[0] = withCI(m[0], 9.0, 9.9)   // PDR: 0.9 Hz wide, too wide
	m[1] = withCI(m[1], 0.48, 0.52) // theta/alpha: 8 % of 0.5
	v[1].Flags = CheckVisit(VisitQuality{Conditions: v[1].Conditions, Quality: v[1].Quality, Markers: m})
	c := BuildCourse(clinic.Patient{ID: 1, Code: "LH-0522", BirthYear: 1954}, v, CourseOptions{
		SettingsVersion: testVersion, SettingsHash: testHash, Today: time.Date(2025, 6, 1, 0, 0, 0, 0, time.UTC)})
	byKey := map[string]Series{}
	for _, s := range c.Series {
		byKey[s.Key] = s
	}
	pdr, ta := byKey[pdrM.Key()], byKey[taM.Key()]
	if len(pdr.Points) != 2 || len(ta.Points) != 2 {
		t.Fatalf("series: %v", byKey)
	}
	if pdr.Points[0].Uncertainty != nil {
		t.Errorf("first visit has no interval, got %+v", pdr.Points[0].Uncertainty)
	}
	if u := pdr.Points[1].Uncertainty; u == nil || u.Low != 9.0 || u.High != 9.9 {
		t.Errorf("second visit's PDR interval = %+v, want 9.0 to 9.9", u)
	}
	if pdr.Points[1].Comparable || !ta.Points[1].Comparable || !pdr.Points[0].Comparable {
		t.Errorf("comparable: PDR %v %v, theta/alpha %v; want true false, true",
			pdr.Points[0].Comparable, pdr.Points[1].Comparable, ta.Points[1].Comparable)
	}
	js, err := json.Marshal(pdr.Points)
	if err != nil {
		t.Fatal(err)
	}
	var back []map[string]any
	if err := json.Unmarshal(js, &back); err != nil {
		t.Fatal(err)
	}
	if _, has := back[0]["uncertainty"]; has {
		t.Errorf("JSON of a point without interval has one: %s", js)
	}
	u, _ := back[1]["uncertainty"].(map[string]any)
	for _, k := range []string{"se", "low", "high", "level", "method", "resamples"} {
		if _, ok := u[k]; !ok {
			t.Errorf("JSON interval lacks %q: %s", k, js)
		}
	}
}
