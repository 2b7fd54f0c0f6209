package server

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"net/http"
	"reflect"
	"strings"
	"testing"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/server/store"
	"longwave/trends"
)

// intervalMethod is how the test's intervals say they were made.
const intervalMethod = "percentile bootstrap over kept windows (Efron & Tibshirani 1993)"

// saveIntervalVisit stores an invented visit of patient code: a PDR with an
// interval and a theta/alpha ratio without one when withCI, neither
// otherwise (a visit of settings v1). Settings are the service's own, so
// that no other-settings flag gets in the way.
func saveIntervalVisit(t *testing.T, e *env, code, date string, withCI bool) int64 {
	t.Helper()
	pdr := metrics.Marker{Name: metrics.PDRFrequency, Region: metrics.RegionPosterior, State: ingest.EyesClosed,
		Value: 9.31, Unit: metrics.UnitHz, Computable: true}
	ta := metrics.Marker{Name: metrics.ThetaAlphaRatio, Region: metrics.RegionPosterior, State: ingest.EyesClosed,
		Value: 0.42, Unit: metrics.UnitRatio, Computable: true}
	if withCI {
		pdr.Uncertainty = &metrics.Uncertainty{SE: 0.061, Low: 9.19, High: 9.43, Level: 0.95, Method: intervalMethod, Resamples: 1000}
	}
	sum := sha256.Sum256([]byte(code + date))
	res := &metrics.Result{SettingsVersion: e.pipe.Settings.Version, SettingsHash: e.pipe.Settings.Hash(),
		Conditions: ingest.Conditions{Format: ingest.FormatEDFPlusC, SampleRate: 256, UVPerStep: 0.1, Bits: 16,
			ChannelsFound: ingest.Standard19[:], Duration: 300, PeriodSource: ingest.FromAnnotations},
		Quality: metrics.Quality{UsedChannels: ingest.Standard19[:],
			CleanSeconds: map[ingest.EyeState]float64{ingest.EyesClosed: 140, ingest.EyesOpen: 80}},
		Markers: []metrics.Marker{pdr, ta}}
	v, err := e.st.SaveVisit(context.Background(), store.NewVisit{
		Patient:    store.Patient{Code: code, Sex: "F", BirthYear: 1952},
		Visit:      store.Visit{Date: date},
		Recordings: []store.Recording{{SHA256: hex.EncodeToString(sum[:]), Format: "EDF+C", Size: 100, Role: store.RoleSingle}},
		Analysis:   store.Analysis{Result: res},
	})
	if err != nil {
		t.Fatal(err)
	}
	return v.ID
}

func TestIntervalsInAPIAndScreens(t *testing.T) {
	e := newEnv(t, "", Config{})
	c := e.signedIn(clinicianName)
	const code = "HV-0208"
	old := saveIntervalVisit(t, e, code, "2024-04-08", false)
	cur := saveIntervalVisit(t, e, code, "2025-04-14", true)

	// The visit API: each marker with its interval, none where it has none.
	status, body, _ := c.get(visitURLAPI(cur))
	var v struct {
		Markers []map[string]json.RawMessage `json:"markers"`
	}
	if status != http.StatusOK || json.Unmarshal([]byte(body), &v) != nil || len(v.Markers) != 2 {
		t.Fatalf("visit API: %d %s", status, body[:min(300, len(body))])
	}
	var u map[string]any
	if err := json.Unmarshal(v.Markers[0]["uncertainty"], &u); err != nil {
		t.Fatalf("PDR has no uncertainty object: %v", err)
	}
	want := map[string]any{"se": 0.061, "low": 9.19, "high": 9.43, "level": 0.95, "method": intervalMethod, "resamples": 1000.0}
	for k, w := range want {
		if u[k] != w {
			t.Errorf("visit API uncertainty.%s = %v, want %v", k, u[k], w)
		}
	}
	if _, has := v.Markers[1]["uncertainty"]; has {
		t.Errorf("theta/alpha without interval has one in the API: %s", v.Markers[1]["uncertainty"])
	}

	// The course API: each series' per-visit values carry the interval.
	status, body, _ = c.get("/api/v1/patients/" + code + "/course")
	var course struct {
		Series []struct {
			Key    string `json:"key"`
			Points []struct {
				VisitID     int64                `json:"visit_id"`
				Uncertainty *metrics.Uncertainty `json:"uncertainty"`
			} `json:"points"`
		} `json:"series"`
	}
	if status != http.StatusOK || json.Unmarshal([]byte(body), &course) != nil {
		t.Fatalf("course API: %d", status)
	}
	checked := 0
	for _, s := range course.Series {
		if s.Key != metrics.PDRFrequency+"/posterior/closed" {
			continue
		}
		for _, p := range s.Points {
			switch p.VisitID {
			case old:
				if p.Uncertainty != nil {
					t.Errorf("course: the visit without intervals has %+v", p.Uncertainty)
				}
			case cur:
				if p.Uncertainty == nil || p.Uncertainty.Low != 9.19 || p.Uncertainty.High != 9.43 {
					t.Errorf("course: interval %+v, want 9.19 to 9.43", p.Uncertainty)
				}
			}
			checked++
		}
	}
	if checked != 2 {
		t.Errorf("course: %d PDR points checked, want 2", checked)
	}

	// The visit page: value, interval and method in words.
	status, body, _ = c.get(visitURL(cur))
	if status != http.StatusOK {
		t.Fatalf("visit page: %d", status)
	}
	for _, w := range []string{"<th class=\"num\">95 % interval</th>", "9.19 to 9.43 Hz",
		"percentile bootstrap over kept windows (Efron &amp; Tibshirani 1993), 1000 resamples", "<span class=\"quiet\">none</span>"} {
		if !strings.Contains(body, w) {
			t.Errorf("visit page lacks %q", w)
		}
	}
	status, body, _ = c.get(visitURL(old))
	if status != http.StatusOK || strings.Contains(body, "95 % interval") ||
		!strings.Contains(body, "These markers carry no interval of their own: they were made by settings version "+e.pipe.Settings.Version) {
		t.Errorf("visit page without intervals: status %d, or no words saying why", status)
	}

	// The course chart's tooltip.
	status, body, _ = c.get(courseURL(code))
	if status != http.StatusOK {
		t.Fatalf("course page: %d", status)
	}
	for _, w := range []string{"95 % interval 9.19 to 9.43 Hz", "interval by percentile bootstrap over kept windows"} {
		if !strings.Contains(body, w) {
			t.Errorf("course chart tooltip lacks %q", w)
		}
	}
}

func TestIntervalWords(t *testing.T) {
	pdr := metrics.Marker{Name: metrics.PDRFrequency, Value: 9.3, Unit: metrics.UnitHz, Computable: true}
	ratio := metrics.Marker{Name: metrics.ThetaAlphaRatio, Value: 0.31, Unit: metrics.UnitRatio, Computable: true}
	ci := func(m metrics.Marker, lo, hi, level float64, method string, n int) metrics.Marker {
		m.Uncertainty = &metrics.Uncertainty{Low: lo, High: hi, Level: level, Method: method, Resamples: n}
		return m
	}
	tests := []struct {
		m                     metrics.Marker
		wantInterval, wantHow string
	}{
		{pdr, "", ""},
		{ci(pdr, 9.12, 9.47, 0.95, "percentile bootstrap over kept windows", 1000), "9.12 to 9.47 Hz", "percentile bootstrap over kept windows, 1000 resamples"},
		{ci(ratio, 0.27, 0.352, 0.95, "delta_method", 0), "0.27 to 0.352", "delta method"},
		{ci(pdr, 9.2, 9.4, 0.9, "normal approximation", 0), "90 %: 9.2 to 9.4 Hz", "normal approximation"},
		{ci(pdr, -0.31, 0.12, 0.95, "bootstrap", 200), "−0.31 to 0.12 Hz", "bootstrap, 200 resamples"},
	}
	for _, tt := range tests {
		if got := intervalText(tt.m); got != tt.wantInterval {
			t.Errorf("intervalText(%+v) = %q, want %q", tt.m.Uncertainty, got, tt.wantInterval)
		}
		if got := methodText(tt.m.Uncertainty); got != tt.wantHow {
			t.Errorf("methodText(%+v) = %q, want %q", tt.m.Uncertainty, got, tt.wantHow)
		}
	}
}

func TestVerdictText(t *testing.T) {
	all := metrics.Flag{Rule: "few_good_positions", Severity: metrics.NotComparable, Reason: "12 of the 19 positions good"}
	one := metrics.Flag{Rule: "interval_too_wide", Severity: metrics.NotComparable, Markers: []string{"pdr_frequency/posterior/closed"},
		Reason: "posterior dominant rhythm: interval too wide"}
	caution := metrics.Flag{Rule: "little_clean_closed", Severity: metrics.Caution, Reason: "40 s of clean eyes-closed data"}
	tests := []struct {
		flags []metrics.Flag
		want  string
	}{
		{nil, "Comparable"},
		{[]metrics.Flag{caution}, "Comparable, with caution: 40 s of clean eyes-closed data"},
		{[]metrics.Flag{caution, one}, "Not comparable for some markers: posterior dominant rhythm: interval too wide"},
		{[]metrics.Flag{one, all}, "Not comparable: 12 of the 19 positions good"},
	}
	for _, tt := range tests {
		if got := verdictText(tt.flags); got != tt.want {
			t.Errorf("verdictText(%v) = %q, want %q", tt.flags, got, tt.want)
		}
	}
}

func TestGroupIntervalFlags(t *testing.T) {
	wide := func(key string) metrics.Flag {
		return metrics.Flag{Rule: trends.RuleIntervalWide, Severity: metrics.NotComparable, Markers: []string{key},
			Reason: key + " too wide", Source: "design"}
	}
	caution := metrics.Flag{Rule: trends.RuleLittleCleanClosed, Severity: metrics.Caution, Reason: "40 s"}
	drowsy := metrics.Flag{Rule: trends.RuleDrowsy, Severity: metrics.NotComparable, Reason: "drowsy"}
	one := []metrics.Flag{caution, wide("a/x/closed"), drowsy}
	if got := groupIntervalFlags(one); !reflect.DeepEqual(got, one) {
		t.Errorf("one interval flag: %+v, want it unchanged", got)
	}
	got := groupIntervalFlags([]metrics.Flag{caution, wide("a/x/closed"), drowsy, wide("b/y/closed"), wide("c/z/open")})
	if len(got) != 3 || got[0].Rule != caution.Rule || got[1].Rule != trends.RuleIntervalWide || got[2].Rule != drowsy.Rule {
		t.Fatalf("grouped: %+v", got)
	}
	g := got[1]
	if !reflect.DeepEqual(g.Markers, []string{"a/x/closed", "b/y/closed", "c/z/open"}) || g.Severity != metrics.NotComparable ||
		g.Reason != "3 markers have an interval too wide to compare across visits: a/x/closed too wide; b/y/closed too wide; c/z/open too wide" {
		t.Errorf("grouped flag %+v", g)
	}
}
