package server

import (
	"regexp"
	"strings"

	"longwave/metrics"
	"longwave/server/store"
	"longwave/trends"
)

// Words for people. Rule, marker, region and state keys stay in the JSON
// API and the CSV; every screen shows these words instead (issue 11, point
// 4). A key without words here is shown as its words by keyWords, never as
// the key itself.

// ruleWords says what each comparability rule (package trends) and each
// artefact rule (package metrics) found, in a few words.
var ruleWords = map[string]string{
	trends.RuleSampleRateUnknown:   "sampling rate not stated",
	trends.RuleSampleRateNyquist:   "sampling rate too low for the analysed band",
	trends.RuleSampleRateBelow3x:   "sampling rate under three times the top of the analysed band",
	trends.RuleSampleRateIFCN:      "sampling rate under 200 Hz",
	trends.RuleLowPassInBand:       "hardware low-pass filter inside the analysed band",
	trends.RuleLowPassBelowRoutine: "hardware low-pass filter under 70 Hz",
	trends.RuleHighPassAbove1Hz:    "hardware high-pass filter above 1 Hz",
	trends.RuleCoarseResolution:    "amplitude resolution too coarse",
	trends.RuleOccipitalMissing:    "O1 or O2 missing or bad",
	trends.RuleFewGoodPositions:    "too few good electrode positions",
	trends.RuleLittleCleanClosed:   "too little clean eyes-closed data",
	trends.RuleIntervalWide:        "the value's own interval too wide to compare",
	trends.RuleNoEyesOpen:          "no clean eyes-open data",
	trends.RuleEyeStateUnknown:     "eye state not known",
	trends.RuleDrowsy:              "drowsy during the recording",
	trends.RuleOtherSettings:       "made with other processing settings",
	trends.RuleLineFrequencyChange: "line frequency changed since the previous visit",
	trends.RuleReferenceChange:     "recording reference changed since the previous visit",
	trends.RuleEquipmentChange:     "equipment changed since the previous visit",
	trends.RuleSampleRateChange:    "sampling rate changed since the previous visit",
	trends.RuleFiltersChange:       "hardware filters changed since the previous visit",
	trends.RuleBadDate:             "visit date is not a calendar date",

	metrics.RuleAmplitude: "swing too large (movement, electrode pop or blink)",
	metrics.RuleFlat:      "signal flat",
	metrics.RuleMuscle:    "too much fast activity (muscle)",
	metrics.RuleVariance:  "far more power than the other windows",
}

// ruleText returns a rule's words.
func ruleText(key string) string {
	if w, ok := ruleWords[key]; ok {
		return w
	}
	return keyWords(key)
}

// keyWords turns an unknown snake_case key into words ("a_b" → "a b"), so
// that no key reaches a screen even when a later rule has no words yet.
func keyWords(key string) string { return strings.ReplaceAll(key, "_", " ") }

// markersText names the markers a flag affects, in words ("all markers"
// when it names none).
func markersText(keys []string) string {
	if len(keys) == 0 {
		return "all markers"
	}
	out := make([]string, 0, len(keys))
	for _, k := range keys {
		// A flag may name a marker with its region ("alpha_reactivity/posterior").
		name, region, _ := strings.Cut(k, "/")
		w := markerTitle(name)
		if region != "" {
			w += " (" + regionName(region) + ")"
		}
		out = append(out, w)
	}
	return strings.Join(out, ", ")
}

// snakeKey finds snake_case keys inside a sentence.
var snakeKey = regexp.MustCompile(`\b[a-z][a-z0-9]*(?:_[a-z0-9]+)+\b`)

// peopleText rewrites the keys inside a sentence made by another stage (a
// flag's reason lists the markers it affects by key) into words: marker
// keys become their names, rule and region keys their words. The stored
// sentence and the API keep the keys.
func peopleText(s string) string {
	return snakeKey.ReplaceAllStringFunc(s, func(k string) string {
		if t, ok := markerTitles[k]; ok {
			return strings.ToLower(t[:1]) + t[1:]
		}
		if w, ok := ruleWords[k]; ok {
			return w
		}
		return regionName(k)
	})
}

// auditWords names each action of the audit log for the users screen.
var auditWords = map[string]string{
	store.AuditSignIn:                "signed in",
	store.AuditSignInFailed:          "sign-in refused",
	store.AuditSignOut:               "signed out",
	store.AuditPatientView:           "opened a patient",
	store.AuditVisitView:             "opened a visit",
	store.AuditIngest:                "added a recording",
	store.AuditIngestFailed:          "recording refused",
	store.AuditExport:                "exported",
	store.AuditUserCreated:           "added a user",
	store.AuditUserChanged:           "changed a user",
	store.AuditUserDisabled:          "disabled a user",
	store.AuditUserEnabled:           "enabled a user",
	store.AuditPasswordReset:         "reset a password",
	store.AuditPasswordChanged:       "changed own password",
	store.AuditPasswordChangeRefused: "password change refused",
}

// auditText returns an audit action's words.
func auditText(action string) string {
	if w, ok := auditWords[action]; ok {
		return w
	}
	return keyWords(action)
}
