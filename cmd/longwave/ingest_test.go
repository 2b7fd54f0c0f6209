package main

import (
	"strings"
	"testing"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/server/intake"
	"longwave/trends"
)

// TestPrintOutcomeIntervals: a main marker prints with its interval, and
// the interval rule's per-marker flags print as one line.
func TestPrintOutcomeIntervals(t *testing.T) {
	pdr := metrics.Marker{Name: metrics.PDRFrequency, Region: metrics.RegionPosterior, State: ingest.EyesClosed,
		Value: 10.05, Unit: metrics.UnitHz, Computable: true,
		Uncertainty: &metrics.Uncertainty{SE: 0.1, Low: 9.876, High: 10.28, Level: 0.95, Method: "bootstrap", Resamples: 200}}
	ta := metrics.Marker{Name: metrics.ThetaAlphaRatio, Region: metrics.RegionPosterior, State: ingest.EyesClosed,
		Value: 0.068, Unit: metrics.UnitRatio, Computable: true}
	var flags []metrics.Flag
	for _, k := range []string{"rel_delta/posterior/closed", "rel_beta/global/closed", "slowing_ratio/global/closed"} {
		flags = append(flags, metrics.Flag{Rule: trends.RuleIntervalWide, Severity: metrics.NotComparable, Markers: []string{k}, Reason: k + " too wide"})
	}
	flags = append(flags, metrics.Flag{Rule: trends.RuleLittleCleanClosed, Severity: metrics.Caution, Reason: "58 s of clean eyes-closed data"})
	out := intake.Outcome{VisitID: 4, Result: &metrics.Result{SettingsVersion: "2",
		Quality: metrics.Quality{CleanSeconds: map[ingest.EyeState]float64{ingest.EyesClosed: 58}},
		Markers: []metrics.Marker{pdr, ta}}, Flags: flags}
	var b strings.Builder
	printOutcome(&b, intake.Request{PatientCode: "EM-0001", Date: "2024-01-01"}, out)
	text := b.String()
	for _, want := range []string{
		"posterior dominant rhythm            10.050 Hz  (95 % interval 9.876 to 10.280)\n",
		"theta/alpha ratio, posterior          0.068\n",
		"flag little_clean_closed (caution): 58 s of clean eyes-closed data\n",
		"flag interval_too_wide (not comparable): 3 markers with an interval too wide to compare across visits: rel_delta/posterior/closed, rel_beta/global/closed, slowing_ratio/global/closed\n",
	} {
		if !strings.Contains(text, want) {
			t.Errorf("output lacks %q:\n%s", want, text)
		}
	}
	if n := strings.Count(text, "interval_too_wide"); n != 1 {
		t.Errorf("interval flags on %d lines, want 1:\n%s", n, text)
	}
}
