package server

import (
	"strings"
	"testing"

	"longwave/metrics"
	"longwave/trends"
)

// TestWordsForPeople: every rule of trends.Rules and every artefact rule
// has words, and a sentence holding keys reads in words.
func TestWordsForPeople(t *testing.T) {
	rules := []string{metrics.RuleAmplitude, metrics.RuleFlat, metrics.RuleMuscle, metrics.RuleVariance, trends.RuleBadDate}
	for _, r := range trends.Rules() {
		rules = append(rules, r.Name)
	}
	for _, r := range rules {
		if _, ok := ruleWords[r]; !ok {
			t.Errorf("rule %q has no words for people", r)
		}
	}
	for _, tc := range []struct{ in, want string }{
		{"affected: pdr_frequency, alpha_open_closed_ratio", "affected: posterior dominant rhythm, alpha eyes-open / eyes-closed"},
		{"see hardware_filters_changed", "see hardware filters changed since the previous visit"},
		{"over left_occipital only", "over left occipital only"},
		{"an unknown_new_key", "an unknown new key"},
		{"no keys here", "no keys here"},
	} {
		if got := peopleText(tc.in); got != tc.want {
			t.Errorf("peopleText(%q) = %q, want %q", tc.in, got, tc.want)
		}
		if got := keysIn(peopleText(tc.in)); len(got) > 0 {
			t.Errorf("peopleText(%q) leaves keys %q", tc.in, got)
		}
	}
	if got := keysIn("affects pdr_frequency and drowsy"); len(got) != 1 || got[0] != "pdr_frequency" {
		t.Errorf("keysIn finds %q, want the marker key", got)
	}
	if got := markersText([]string{metrics.AlphaReactivity + "/" + metrics.RegionPosterior}); got != "Alpha reactivity (attenuation) (posterior)" {
		t.Errorf("markersText = %q", got)
	}
	if !strings.Contains(ruleText(trends.RuleFiltersChange), "since the previous visit") {
		t.Errorf("filters rule reads %q", ruleText(trends.RuleFiltersChange))
	}
}
