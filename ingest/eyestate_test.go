package ingest

import (
	"reflect"
	"testing"
)

func TestEyePhrasesMatch(t *testing.T) {
	p := DefaultEyePhrases()
	tests := []struct {
		text  string
		state EyeState
		ok    bool
	}{
		{"eyes closed", EyesClosed, true},
		{"Eyes Closed", EyesClosed, true},
		{"EYES-CLOSED", EyesClosed, true},
		{"eyes_closed", EyesClosed, true},
		{"Closed eyes", EyesClosed, true},
		{"eyes shut", EyesClosed, true},
		{"EC", EyesClosed, true},
		{"rest: eyes closed, 3 min", EyesClosed, true},
		{"eyes open", EyesOpen, true},
		{"Eyes Opened", EyesOpen, true},
		{"EO", EyesOpen, true},
		{"open eyes", EyesOpen, true},
		{"eyes closed then eyes open", "", false}, // both: ambiguous
		{"Recording starts", "", false},
		{"ECG lead off", "", false}, // "ec" only as a whole word
		{"Sleep stage W", "", false},
		{"T0", "", false},
		{"", "", false},
	}
	for _, tt := range tests {
		s, ok := p.Match(tt.text)
		if s != tt.state || ok != tt.ok {
			t.Errorf("Match(%q) = %q, %v; want %q, %v", tt.text, s, ok, tt.state, tt.ok)
		}
	}
	ext := p.With(EyePhrases{Closed: []string{"Augen zu"}, Open: []string{"augen auf"}})
	if s, ok := ext.Match("AUGEN ZU"); !ok || s != EyesClosed {
		t.Errorf("extended Match(AUGEN ZU) = %q, %v", s, ok)
	}
	if _, ok := p.Match("augen zu"); ok {
		t.Error("With modified the receiver")
	}
}

func TestPeriodsFromEvents(t *testing.T) {
	p := DefaultEyePhrases()
	tests := []struct {
		name   string
		events []Annotation
		total  float64
		want   []Period
	}{
		{"until next and end", []Annotation{{Onset: 10, Text: "eyes open"}, {Onset: 2, Text: "eyes closed"}}, 30,
			[]Period{{EyesClosed, 2, 10}, {EyesOpen, 10, 30}}},
		{"durations leave gaps", []Annotation{{Onset: 0, Duration: 5, Text: "EC"}, {Onset: 8, Duration: 4, Text: "EO"}}, 30,
			[]Period{{EyesClosed, 0, 5}, {EyesOpen, 8, 12}}},
		{"overlap cut at next onset", []Annotation{{Onset: 0, Duration: 20, Text: "EC"}, {Onset: 8, Duration: 4, Text: "EO"}}, 30,
			[]Period{{EyesClosed, 0, 8}, {EyesOpen, 8, 12}}},
		{"unrecognised ignored", []Annotation{{Onset: 1, Text: "photic 10 Hz"}, {Onset: 3, Text: "eyes closed"}}, 9,
			[]Period{{EyesClosed, 3, 9}}},
		{"same state joined", []Annotation{{Onset: 0, Duration: 5, Text: "EC"}, {Onset: 5, Text: "eyes closed"}}, 9,
			[]Period{{EyesClosed, 0, 9}}},
		{"clipped to total and zero", []Annotation{{Onset: -2, Duration: 4, Text: "EC"}, {Onset: 7, Duration: 10, Text: "EO"}}, 9,
			[]Period{{EyesClosed, 0, 2}, {EyesOpen, 7, 9}}},
		{"after the end dropped", []Annotation{{Onset: 12, Text: "EC"}}, 9, nil},
		{"none", nil, 9, nil},
	}
	for _, tt := range tests {
		got := PeriodsFromEvents(tt.events, tt.total, p)
		if !reflect.DeepEqual(got, tt.want) {
			t.Errorf("%s: PeriodsFromEvents = %v, want %v", tt.name, got, tt.want)
		}
	}
}

func TestEyeStateWords(t *testing.T) {
	for _, tt := range []struct {
		s    EyeState
		want string
	}{
		{EyesClosed, "eyes closed"}, {EyesOpen, "eyes open"}, {EyesUnknown, "eye state unknown"},
		{"", ""}, {"drowsy", ""},
	} {
		if got := tt.s.Words(); got != tt.want {
			t.Errorf("EyeState(%q).Words() = %q, want %q", tt.s, got, tt.want)
		}
	}
}
