package server

import (
	"net/http"
	"strings"
	"sync"
	"time"
	"unicode"
	"unicode/utf8"

	"longwave/metrics/clinic"
	"longwave/trends"
	"longwave/web"
)

// The clinic's control norms are fitted once and kept until the controls'
// data change. A fit reads every visit of every control and fits one
// mixed-effects model per marker series (about a second for the demo's 26
// controls and 35 series on a loaded machine), and every course and the
// cohort use the same norms; so instead of a timer the cache compares the
// store's stamp of the control group (one query of aggregates) and the date
// of the fit, and refits only when either moved.

// normsCache holds the last fitted control norms with the stamp and day
// they were fitted for.
type normsCache struct {
	mu    sync.Mutex
	stamp string
	day   string
	n     *trends.ControlNorms
}

// controlNorms returns the control norms of the current settings, fitted
// from the controls as they are now. Concurrent callers wait for one fit.
func (s *Server) controlNorms(r *http.Request) (*trends.ControlNorms, error) {
	nc := &s.norms
	nc.mu.Lock()
	defer nc.mu.Unlock()
	now := s.now()
	stamp, err := s.st.GroupStamp(r.Context(), clinic.ControlGroup)
	if err != nil {
		return nil, err
	}
	day := now.Format(time.DateOnly)
	if nc.n != nil && nc.stamp == stamp && nc.day == day {
		return nc.n, nil
	}
	controls, err := s.st.GroupVisitRecords(r.Context(), clinic.ControlGroup)
	if err != nil {
		return nil, err
	}
	nc.n = trends.BuildControlNorms(controls, trends.ControlNormOptions{
		SettingsVersion: s.settingsVersion, SettingsHash: s.settingsHash, Today: now})
	nc.stamp, nc.day = stamp, day
	return nc.n, nil
}

// normView lays out a series against the clinic's control norm for the
// course screen: the verdict in words, the patient's slope beside the
// controls' expected slope and the range a control's slope falls in, the
// visit-to-visit noise, the basis, and the published ageing notes.
func normView(sr trends.Series) *web.NormView {
	unit := displayUnit(sr.Unit)
	perYear := perYearUnit(unit)
	ch := sr.Change
	v := ch.Verdict
	nv := &web.NormView{Verdict: sentence(v.Text), Known: v.Known, Concern: v.Concern, Basis: v.Basis, Note: v.Note,
		Advisory: trends.AdvisoryVerdict}
	if v.Advisory != "" {
		nv.Advisory = v.Advisory
	}
	if v.Patient.Known {
		nv.Figures = append(nv.Figures, web.Pair{Label: "Patient's slope",
			Value: sig(v.Patient.PerYear) + " " + perYear + " (95 % " + sig(v.Patient.CILow) + " to " + sig(v.Patient.CIHigh) + ")"})
		if v.Patient.Noise != "" {
			// This interval can differ from the least-squares one beside the
			// chart: its noise is at least the clinic's.
			nv.Note = strings.TrimSpace("The patient's slope here takes its noise from " + v.Patient.Noise + ". " + nv.Note)
		}
	}
	if e := ch.Expected; e.Known && e.Basis == trends.BasisClinic {
		nv.Figures = append(nv.Figures,
			web.Pair{Label: "Controls' expected slope", Value: sig(e.PerYear) + " " + perYear + " (95 % " + sig(e.CILow) + " to " + sig(e.CIHigh) + ")"},
			web.Pair{Label: "A control's slope lies in", Value: sig(v.ControlRangeLow) + " to " + sig(v.ControlRangeHigh) + " " + perYear + " (95 %)"},
			web.Pair{Label: "Visit-to-visit noise", Value: withUnit(sig(e.ResidualSD), unit) + " (SD, controls)"})
		if nv.Basis == "" {
			nv.Basis = e.BasisText
		}
	}
	for _, n := range sr.LiteratureNotes {
		lv := web.LiteratureView{Text: sentence(n.Text), Source: n.Source}
		if n.HasPerYear {
			lv.PerYear = n.PerYearNote // the figure, labelled as longwave's arithmetic
		}
		nv.Literature = append(nv.Literature, lv)
	}
	return nv
}

// sentence starts s with a capital letter.
func sentence(s string) string {
	if s == "" {
		return s
	}
	r, n := utf8.DecodeRuneInString(s)
	return string(unicode.ToUpper(r)) + s[n:]
}
