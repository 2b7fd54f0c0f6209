package server

import (
	"net/http"
	"strconv"
	"strings"
	"time"

	"longwave/metrics"
	"longwave/trends"
	"longwave/web"
)

// summaryPage is the one-page summary of a patient for the clinic letter
// (issue 11, point 7): the headline markers with their verdicts, every
// comparable visit's spectrum in one picture, the flags in words, the
// advisory and the settings version, laid out for an A4 page (the print
// rules of longwave.css). Each view is audited as a patient view.
func (s *Server) summaryPage(w http.ResponseWriter, r *http.Request) {
	c, err := s.auditedCourse(r, "summary")
	if err != nil {
		s.fail(w, r, err)
		return
	}
	spectra, err := s.courseSpectra(r, c)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	page := summaryView(c, spectra, s.now())
	page.Frame = s.frame(r, "Summary "+c.Patient.Code, "")
	s.render(w, r, http.StatusOK, page)
}

// summaryView lays out the summary of a course.
func summaryView(c trends.Course, spectra map[int64][]metrics.Spectrum, now time.Time) *web.SummaryPage {
	p := c.Patient
	comparable := 0
	for _, v := range c.Visits {
		if v.Comparable {
			comparable++
		}
	}
	born := bornText(p.BirthDate, p.BirthYear, "not given")
	span := "no visit yet"
	if n := len(c.Visits); n > 0 {
		span = c.Visits[0].Date + " to " + c.Visits[n-1].Date
	}
	due, _ := nextDueText(c)
	page := &web.SummaryPage{
		Code:      p.Code,
		CourseURL: courseURL(p.Code),
		Printed:   now.UTC().Format(time.DateOnly),
		Facts: []web.Pair{
			{Label: "Sex", Value: sexText(p.Sex)},
			{Label: "Born", Value: born},
			{Label: "Group", Value: orNone(p.Group)},
			{Label: "Visits", Value: strconv.Itoa(len(c.Visits)) + " (" + strconv.Itoa(comparable) + " comparable), " + span},
			{Label: "Next due", Value: due},
		},
		Settings:  "Processing settings version " + c.SettingsVersion + " (" + shortHash(c.SettingsHash) + ")",
		Advisory:  sentence(c.Advisory),
		Verdicts:  trends.AdvisoryVerdict,
		ChartData: map[string]web.Option{},
	}
	picked := chartSeries(c.Series)
	for _, name := range headlineMarkers {
		row := web.SummaryRow{Marker: markerTitle(name)}
		sr, ok := findSeries(picked, name)
		if !ok {
			row.Verdict = "not measured"
			page.Rows = append(page.Rows, row)
			continue
		}
		unit := displayUnit(sr.Unit)
		ch := sr.Change
		row.Where = seriesWhere(sr)
		if ch.Points > 0 {
			row.Values = sig(ch.BaselineValue) + " → " + withUnit(sig(ch.LatestValue), unit)
			row.Dates = ch.BaselineDate + " → " + ch.LatestDate
		} else {
			row.Values = "–"
		}
		verdict, known, concern, _ := headlineWords(sr)
		row.Concern = concern
		perYear := perYearUnit(unit)
		slope := ch.Slope
		if v := ch.Verdict; known && v.Patient.Known {
			// The slope the verdict judged (weighted by each visit's noise),
			// as the course's overview shows it.
			slope = trends.Slope{Known: true, PerYear: v.Patient.PerYear, CILow: v.Patient.CILow, CIHigh: v.Patient.CIHigh}
		}
		if slope.Known {
			row.Slope = sig(slope.PerYear) + " " + perYear
			row.Interval = "95 % " + sig(slope.CILow) + " to " + sig(slope.CIHigh)
		} else {
			row.Slope = "not yet"
			row.Interval = strconv.Itoa(ch.Points) + " comparable " + plural(ch.Points, "visit", "visits")
		}
		if known {
			row.Verdict = verdict
			row.Basis = ch.Verdict.Basis
			if ch.Expected.Known {
				row.Basis = "controls " + sig(ch.Expected.PerYear) + " " + perYear + ", range " +
					sig(ch.Verdict.ControlRangeLow) + " to " + sig(ch.Verdict.ControlRangeHigh)
			}
		} else {
			row.Verdict = "no verdict"
			row.Basis = sentence(peopleText(firstNonEmpty(ch.Verdict.Reason, ch.Verdict.Text)))
		}
		page.Rows = append(page.Rows, row)
	}
	// One reason for every missing verdict is said once, under the table.
	same := len(page.Rows) > 0
	for _, r := range page.Rows {
		same = same && r.Verdict == "no verdict" && r.Basis == page.Rows[0].Basis
	}
	if same && len(page.Rows) > 1 {
		page.NoVerdict = "No verdict against the clinic's controls for any of them: " + strings.ToLower(page.Rows[0].Basis[:1]) + page.Rows[0].Basis[1:]
		for i := range page.Rows {
			page.Rows[i].Basis = ""
		}
	}
	if opt, box, ok := spectraOverlay(c, spectra, true); ok {
		box.Key = "spectra"
		page.ChartData[box.Key] = opt
		page.Overlay = box
	}
	// One line per finding: the same rule, severity and markers at several
	// visits is one line naming their dates, so that a finding repeated at
	// every short visit does not push the letter onto a second page.
	seen := map[web.SummaryFlag]int{}
	for _, v := range c.Visits {
		for _, f := range groupIntervalFlags(v.Flags) {
			fv := flagView(f)
			if len(f.Markers) > 4 {
				fv.Markers = strconv.Itoa(len(f.Markers)) + " markers"
			}
			line := web.SummaryFlag{Severity: fv.Severity, SeverityKey: fv.SeverityKey, Text: ruleText(f.Rule), Markers: fv.Markers}
			if i, ok := seen[line]; ok {
				page.Flags[i].Date += ", " + v.Date
				continue
			}
			seen[line] = len(page.Flags)
			line.Date = v.Date
			page.Flags = append(page.Flags, line)
		}
	}
	if basis := firstBasis(c); basis != "" {
		page.Basis = "Verdicts against " + basis + "."
	}
	return page
}

// firstBasis is the basis of the first known verdict of a headline marker
// ("clinic controls: 26 persons, …"), "" when none is known.
func firstBasis(c trends.Course) string {
	for _, sr := range chartSeries(c.Series) {
		if contains(headlineMarkers, sr.Marker) && sr.Change.Verdict.Known && sr.Change.Verdict.Basis != "" {
			return sr.Change.Verdict.Basis
		}
	}
	return ""
}

func firstNonEmpty(s ...string) string {
	for _, x := range s {
		if x != "" {
			return x
		}
	}
	return ""
}

// shortHash is the first 12 hex digits of a settings hash.
func shortHash(h string) string {
	if len(h) > 12 {
		return h[:12]
	}
	return h
}
