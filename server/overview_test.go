package server

import (
	"testing"

	"longwave/trends"
	"longwave/web"
)

// TestRampColour pins the overlay's ramp at its stops and between them
// (linear in RGB; the stops are our own choice).
func TestRampColour(t *testing.T) {
	for _, tc := range []struct {
		t    float64
		want string
	}{
		{-1, "#c8a96e"}, {0, "#c8a96e"}, {0.25, "#9c9e83"}, {0.5, "#6f9398"}, {1, "#1c334d"}, {2, "#1c334d"},
	} {
		if got := rampColour(tc.t); got != tc.want {
			t.Errorf("rampColour(%v) = %s, want %s", tc.t, got, tc.want)
		}
	}
}

// TestSparkLine checks the cohort's small line: x by date between the
// paddings, y from the highest value (top) to the lowest (bottom), the
// latest point marked; one value sits in the middle; none gives no line.
func TestSparkLine(t *testing.T) {
	vs := []trends.ChangePoint{{Date: "2021-01-01", Value: 10}, {Date: "2022-01-01", Value: 9}, {Date: "2023-01-01", Value: 9.5}}
	sp := sparkLine(vs, "PDR")
	// 2021→2022 is 365 days of 730: x = 2.5 + 91·0.5 = 48.0.
	if sp == nil || sp.Points != "2.5,2.5 48.0,19.5 93.5,11.0" || sp.LastX != "93.5" || sp.LastY != "11.0" {
		t.Fatalf("sparkLine = %+v", sp)
	}
	if sp.Label != "PDR: 3 comparable visits, from 10 to 9.5" {
		t.Errorf("label %q", sp.Label)
	}
	if one := sparkLine(vs[:1], "PDR"); one == nil || one.Points != "48.0,11.0" {
		t.Errorf("one value: %+v", one)
	}
	if sparkLine(nil, "PDR") != nil {
		t.Error("no values drew a line")
	}
}

// TestNoteRepeats checks that a long explanation under two charts becomes
// one note with "see note 1" in both places, while a short or unique text
// stays, and a repeated advisory leaves nothing behind.
func TestNoteRepeats(t *testing.T) {
	long := "no control model: the clinic has no control participants yet"
	unique := "a reason that only one chart of the page gives, long enough"
	adv := "advisory: a comparison with this clinic's control participants"
	page := &web.CourseBody{
		Headline: []web.HeadlineCard{{Lines: []string{noVerdictLead + long, "Latest 9.3 Hz"},
			Chart: web.CourseChart{Figures: []web.Pair{{Label: "Slope", Value: "0.1 Hz/y"}}, Reference: unique, Norm: &web.NormView{Advisory: adv}}}},
		Groups: []web.ChartGroup{{Charts: []web.CourseChart{{Figures: []web.Pair{{Label: "Reliable change", Value: long}},
			Norm: &web.NormView{Advisory: adv}}}}},
	}
	notes := noteRepeats(page)
	if len(notes) != 2 || notes[0].N != 1 || notes[0].Text != "No control model: the clinic has no control participants yet" || notes[1].Text != "Advisory: a comparison with this clinic's control participants" {
		t.Fatalf("notes %+v", notes)
	}
	h := page.Headline[0]
	if h.Lines[0] != noVerdictLead+"see note 1" || h.Lines[1] != "Latest 9.3 Hz" || h.Chart.Reference != unique || h.Chart.Figures[0].Value != "0.1 Hz/y" {
		t.Errorf("headline after notes: %+v", h)
	}
	g := page.Groups[0].Charts[0]
	if g.Figures[0].Value != "see note 1" || g.Norm.Advisory != "" || h.Chart.Norm.Advisory != "" {
		t.Errorf("group chart after notes: %+v, advisories %q %q", g, g.Norm.Advisory, h.Chart.Norm.Advisory)
	}
}
