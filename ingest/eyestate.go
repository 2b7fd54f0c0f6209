package ingest

import (
	"sort"
	"strings"
)

// EyePhrases are the annotation texts that mark eyes closed and eyes open.
// Matching is case-insensitive and ignores the separators '-', '_', '/',
// ':', '.', ',' and repeated spaces, so "Eyes-Closed" matches "eyes closed".
type EyePhrases struct {
	Closed, Open []string
}

// DefaultEyePhrases returns longwave's list of common plain-English ways to
// write the two resting states, plus the short codes EC and EO (common
// practice in resting-state protocols). It is deliberately short: site
// specific wording is added by configuration through With.
func DefaultEyePhrases() EyePhrases {
	return EyePhrases{
		Closed: []string{
			"eyes closed", "eye closed", "eyes close", "closed eyes", "eyes shut", "eyesclosed",
			"ec", "rest ec", "resting ec", "close eyes", "closing eyes",
		},
		Open: []string{
			"eyes open", "eye open", "eyes opened", "open eyes", "eyesopen",
			"eo", "rest eo", "resting eo", "opening eyes",
		},
	}
}

// With returns p extended by the phrases of extra (p is not modified).
func (p EyePhrases) With(extra EyePhrases) EyePhrases {
	return EyePhrases{
		Closed: append(append([]string(nil), p.Closed...), extra.Closed...),
		Open:   append(append([]string(nil), p.Open...), extra.Open...),
	}
}

// Match reports the eye state an annotation text marks. A text matches a
// phrase when, after normalisation, it equals the phrase or contains it as
// whole words ("Eyes closed, rest" matches "eyes closed"; "recording" does
// not match "ec"). A text that contains phrases of both states is ambiguous
// and matches neither.
func (p EyePhrases) Match(text string) (EyeState, bool) {
	t := " " + normalizePhrase(text) + " "
	if strings.TrimSpace(t) == "" {
		return "", false
	}
	closed := containsPhrase(t, p.Closed)
	open := containsPhrase(t, p.Open)
	switch {
	case closed && !open:
		return EyesClosed, true
	case open && !closed:
		return EyesOpen, true
	}
	return "", false
}

func containsPhrase(padded string, phrases []string) bool {
	for _, ph := range phrases {
		n := normalizePhrase(ph)
		if n != "" && strings.Contains(padded, " "+n+" ") {
			return true
		}
	}
	return false
}

// normalizePhrase lower-cases s, turns separators into spaces and collapses runs.
func normalizePhrase(s string) string {
	s = strings.ToLower(s)
	s = strings.Map(func(r rune) rune {
		switch r {
		case '-', '_', '/', ':', '.', ',', ';', '\t', '\n', '\r', '(', ')', '[', ']':
			return ' '
		}
		return r
	}, s)
	return strings.Join(strings.Fields(s), " ")
}

// PeriodsFromEvents turns the events that p recognises into sorted,
// non-overlapping eye-state periods in [0, total) seconds. An event with a
// duration > 0 covers [onset, onset+duration); one without lasts until the
// next recognised event or the end. A period is cut where the next
// recognised event starts; touching periods of the same state are joined.
func PeriodsFromEvents(events []Annotation, total float64, p EyePhrases) []Period {
	type ev struct {
		a     Annotation
		state EyeState
	}
	var rec []ev
	for _, e := range events {
		if s, ok := p.Match(e.Text); ok {
			rec = append(rec, ev{e, s})
		}
	}
	sort.SliceStable(rec, func(i, j int) bool { return rec[i].a.Onset < rec[j].a.Onset })
	var out []Period
	for i, e := range rec {
		start := e.a.Onset
		end := total
		if e.a.Duration > 0 {
			end = start + e.a.Duration
		}
		if i+1 < len(rec) && rec[i+1].a.Onset < end {
			end = rec[i+1].a.Onset
		}
		if start < 0 {
			start = 0
		}
		if end > total {
			end = total
		}
		if !(end > start) {
			continue
		}
		if n := len(out); n > 0 && out[n-1].State == e.state && out[n-1].End >= start {
			out[n-1].End = end
			continue
		}
		if n := len(out); n > 0 && out[n-1].End > start {
			start = out[n-1].End
			if !(end > start) {
				continue
			}
		}
		out = append(out, Period{State: e.state, Start: start, End: end})
	}
	return out
}
