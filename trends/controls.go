package trends

import (
	"fmt"
	"slices"
	"time"

	"longwave/metrics/clinic"
)

// The clinic's control norms as the course and the cohort use them: one
// control model (FitControlNorm) per marker series found among the control
// participants, fitted once over their comparable visits and shared by every
// course built from the same data.

// ControlNorms are the control models of every marker series of a clinic's
// control participants (clinic.Patient.IsControl), in series order.
type ControlNorms struct {
	// Controls is the number of control participants seen (with or
	// without comparable visits); FittedOn the date of the fit.
	Controls        int           `json:"controls"`
	FittedOn        string        `json:"fitted_on"`
	SettingsVersion string        `json:"settings_version"`
	Norms           []ControlNorm `json:"norms"`
	// index finds a series' model in Norms, bases holds each model's
	// Basis() (the cohort asks for the same few thousands of times).
	index map[seriesID]int
	bases []string
}

// seriesNorm is a series' control model with its basis text made once.
type seriesNorm struct {
	ControlNorm
	basis string
}

// ControlNormOptions are what BuildControlNorms needs beside the patients.
type ControlNormOptions struct {
	// SettingsVersion and SettingsHash of the current processing settings:
	// a control visit made by other settings is not comparable and stays
	// out of the fit, so a norm never mixes versions.
	SettingsVersion string
	SettingsHash    string
	// Today dates the fit ("fitted 2026-12-03").
	Today time.Time
	// Min: zero fields take DefaultNormMinimums.
	Min NormMinimums
	// Series, when not nil, limits the fit to these series (an empty Region
	// or State matches any), as the cohort needs only its main markers.
	Series []SeriesRef
}

// BuildControlNorms fits the control model of every marker series over the
// comparable visits of the control participants among patients (others are
// skipped): a visit counts for a series when its date and the person's age
// are known, the marker is computable and no not_comparable flag concerns it
// (the same rules as the course: stored flags, settings, and against the
// person's previous visit). A visit's own standard error, where the marker
// carries an interval, goes with its value.
func BuildControlNorms(patients []clinic.PatientCourse, opt ControlNormOptions) *ControlNorms {
	out := &ControlNorms{FittedOn: dateOf(opt.Today).String(), SettingsVersion: opt.SettingsVersion, Norms: []ControlNorm{}}
	obs := map[seriesID][]ControlObservation{}
	var ids []seriesID
	for _, pc := range patients {
		if !pc.Patient.IsControl() {
			continue
		}
		out.Controls++
		person := pc.Patient.Code
		if person == "" {
			person = fmt.Sprint("#", pc.Patient.ID)
		}
		as := assess(pc.Visits, opt.SettingsVersion, opt.SettingsHash)
		for i := range as {
			a := &as[i]
			if !a.dateOK || !a.rec.Visit.AgeKnown {
				continue
			}
			for _, m := range a.rec.Markers {
				id := seriesID{m.Name, m.Region, string(m.State)}
				if opt.Series != nil && !slices.ContainsFunc(opt.Series, func(r SeriesRef) bool { return r.matches(id) }) {
					continue
				}
				v, _, ok := comparableValue(a, id)
				if !ok {
					continue
				}
				if _, seen := obs[id]; !seen {
					ids = append(ids, id)
				}
				o := ControlObservation{Person: person, AgeYears: a.rec.Visit.AgeYears, Value: v}
				if u := m.Uncertainty; u != nil && u.SE > 0 {
					o.SE = u.SE
				}
				obs[id] = append(obs[id], o)
			}
		}
	}
	sortSeriesIDs(ids)
	out.index = make(map[seriesID]int, len(ids))
	for i, id := range ids {
		out.index[id] = i
		n := FitControlNorm(obs[id], NormOptions{Marker: id.name, Region: id.region, State: id.state, Min: opt.Min, FittedOn: out.FittedOn})
		out.Norms = append(out.Norms, n)
		out.bases = append(out.bases, n.Basis())
	}
	return out
}

// matches reports whether the series id is the one ref names.
func (r SeriesRef) matches(id seriesID) bool {
	return r.Marker == id.name && (r.Region == "" || r.Region == id.region) && (r.State == "" || r.State == id.state)
}

// Find returns the control model of one series. Without one (no norms
// built, no controls, or no control with a comparable value of the series)
// the model is not Known and its Reason says why.
func (n *ControlNorms) Find(marker, region, state string) ControlNorm {
	return n.find(marker, region, state).ControlNorm
}

func (n *ControlNorms) find(marker, region, state string) seriesNorm {
	none := seriesNorm{ControlNorm: ControlNorm{Marker: marker, Region: region, State: state}}
	switch {
	case n == nil:
		none.Reason = "none was built for this course"
		return none
	case n.Controls == 0:
		none.Reason = "the clinic has no control participants (patients of group \"" + clinic.ControlGroup + "\")"
		return none
	}
	if i, ok := n.index[seriesID{marker, region, state}]; ok {
		return seriesNorm{n.Norms[i], n.bases[i]}
	}
	for _, m := range n.Norms { // norms made without BuildControlNorms
		if n.index == nil && m.Marker == marker && m.Region == region && m.State == state {
			return seriesNorm{m, m.Basis()}
		}
	}
	none.Reason = fmt.Sprintf("none of the %d control %s has a comparable value of this marker", n.Controls, plural(n.Controls, "participant", "participants"))
	return none
}

// patientVerdict judges the patient's comparable points of one series
// (those with a known age) against the series' control model: the
// patient's slope by FitPatientSlope, compared at the mean age of those
// visits by CompareSlope. ses holds each point's own standard error (0
// without one).
func patientVerdict(points []SeriesPoint, ses []float64, norm ControlNorm) SlopeVerdict {
	var pv []PatientVisit
	var age float64
	for i, p := range points {
		if !p.Comparable || !p.AgeKnown {
			continue
		}
		pv = append(pv, PatientVisit{AgeYears: p.AgeYears, Value: p.Value, SE: ses[i]})
		age += p.AgeYears
	}
	if len(pv) > 0 {
		age /= float64(len(pv))
	}
	return CompareSlope(FitPatientSlope(pv, norm), norm, age)
}
