package trends

import (
	"errors"
	"fmt"
	"math"
	"strings"

	"gonum.org/v1/gonum/stat"

	"longwave/metrics/clinic"
)

// MinLocalControls is the fewest control participants for a local range.
// Source: longwave design (with 20 controls the t quantile of the interval,
// t(0.975; 18) = 2.101, is within 7 % of the normal 1.96, and one unusual
// control moves the line little).
const MinLocalControls = 20

// LocalLabel labels every local range.
const LocalLabel = "local"

// ErrTooFewPoints is returned by FitPrediction with fewer than 3 points or
// no spread of ages.
var ErrTooFewPoints = errors.New("trends: too few points for a prediction interval")

// Prediction is an ordinary least-squares line of value on age with what a
// 95 % prediction interval needs:
//
//	ŷ(x₀) = a + b·x₀,
//	PI = ŷ ± t(0.975; n − 2)·s·√(1 + 1/n + (x₀ − x̄)²/Sxx),
//
// s² = Σ(y − a − b·x)²/(n − 2), Sxx = Σ(x − x̄)² (the interval for one new
// observation; Draper & Smith's standard result, common practice).
type Prediction struct {
	N          int     `json:"n"`
	Intercept  float64 `json:"intercept"`
	Slope      float64 `json:"slope_per_year"`
	ResidualSD float64 `json:"residual_sd"` // s
	MeanAge    float64 `json:"mean_age"`    // x̄
	Sxx        float64 `json:"sxx"`
	T          float64 `json:"t"`
	AgeMin     float64 `json:"age_min"`
	AgeMax     float64 `json:"age_max"`
}

// FitPrediction fits value on age (gonum stat.LinearRegression).
func FitPrediction(ages, values []float64) (Prediction, error) {
	n := len(ages)
	if n != len(values) {
		panic("trends: FitPrediction with slices of different length")
	}
	if n < 3 {
		return Prediction{}, fmt.Errorf("%w: %d points, need at least 3", ErrTooFewPoints, n)
	}
	p := Prediction{N: n, MeanAge: stat.Mean(ages, nil), AgeMin: ages[0], AgeMax: ages[0]}
	for _, x := range ages {
		p.Sxx += (x - p.MeanAge) * (x - p.MeanAge)
		p.AgeMin, p.AgeMax = math.Min(p.AgeMin, x), math.Max(p.AgeMax, x)
	}
	if p.Sxx <= 0 {
		return Prediction{}, fmt.Errorf("%w: every age is %s", ErrTooFewPoints, num(ages[0]))
	}
	p.Intercept, p.Slope = stat.LinearRegression(ages, values, nil, false)
	var sse float64
	for i, x := range ages {
		r := values[i] - p.Intercept - p.Slope*x
		sse += r * r
	}
	p.ResidualSD = math.Sqrt(sse / float64(n-2))
	p.T = TQuantile975(n - 2)
	return p, nil
}

// At returns ŷ and the 95 % prediction interval at age x0.
func (p Prediction) At(x0 float64) (yhat, lower, upper float64) {
	yhat = p.Intercept + p.Slope*x0
	d := x0 - p.MeanAge
	h := p.T * p.ResidualSD * math.Sqrt(1+1/float64(p.N)+d*d/p.Sxx)
	return yhat, yhat - h, yhat + h
}

// LocalModel is the local range of one marker series.
type LocalModel struct {
	Marker string `json:"marker"`
	Region string `json:"region"`
	State  string `json:"state"`
	// Controls with a comparable value of this marker and a known age.
	Controls int `json:"controls"`
	// Enough is true with at least MinLocalControls; Reason says otherwise.
	Enough     bool       `json:"enough"`
	Reason     string     `json:"reason,omitempty"`
	Prediction Prediction `json:"prediction"`
}

// LocalRanges are the local ranges from a clinic's control participants.
type LocalRanges struct {
	Label string `json:"label"` // LocalLabel
	// Controls is the number of patients in the control group.
	Controls int          `json:"controls"`
	Models   []LocalModel `json:"models"`
	Advisory string       `json:"advisory"`
	Method   string       `json:"method"`
}

// LocalOptions are what BuildLocalRanges needs.
type LocalOptions struct {
	SettingsVersion string
	SettingsHash    string
}

// localMethod describes the local ranges for people.
const localMethod = "ordinary least-squares regression of value on age over the clinic's control participants (one value each: their first comparable visit, so that observations are independent), with the 95 % prediction interval ŷ ± t(0.975; n−2)·s·√(1 + 1/n + (x₀ − x̄)²/Sxx)"

// BuildLocalRanges fits, for every marker series found among the control
// participants (Patient.Group "control"), value on age over one value per
// control: the first visit (by date) at which the marker is comparable and
// the age known. Repeated visits of one person are not independent, and
// taking the first keeps every control's weight equal. A series with fewer
// than MinLocalControls controls gets a model that says so.
func BuildLocalRanges(patients []clinic.PatientCourse, opt LocalOptions) *LocalRanges {
	out := &LocalRanges{Label: LocalLabel, Advisory: AdvisoryLocal, Method: localMethod, Models: []LocalModel{}}
	type acc struct{ ages, values []float64 }
	var ids []seriesID
	data := map[seriesID]*acc{}
	for _, cp := range patients {
		if !cp.Patient.IsControl() {
			continue
		}
		out.Controls++
		as := assess(cp.Visits, opt.SettingsVersion, opt.SettingsHash)
		taken := map[seriesID]bool{}
		for i := range as {
			if !as[i].dateOK || !as[i].rec.Visit.AgeKnown {
				continue
			}
			for _, m := range as[i].rec.Markers {
				id := seriesID{m.Name, m.Region, string(m.State)}
				if taken[id] {
					continue
				}
				pt, _ := pointOf(&as[i], id.name, id.region, id.state)
				if !pt.Comparable {
					continue
				}
				taken[id] = true
				d := data[id]
				if d == nil {
					d = &acc{}
					data[id] = d
					ids = append(ids, id)
				}
				d.ages = append(d.ages, as[i].rec.Visit.AgeYears)
				d.values = append(d.values, pt.Value)
			}
		}
	}
	sortSeriesIDs(ids)
	for _, id := range ids {
		d := data[id]
		m := LocalModel{Marker: id.name, Region: id.region, State: id.state, Controls: len(d.ages)}
		if m.Controls < MinLocalControls {
			m.Reason = fmt.Sprintf("only %d %s: at least %d needed", m.Controls, plural(m.Controls, "control", "controls"), MinLocalControls)
		} else if p, err := FitPrediction(d.ages, d.values); err != nil {
			m.Reason = "no local range: " + strings.TrimPrefix(err.Error(), "trends: ")
		} else {
			m.Enough, m.Prediction = true, p
		}
		out.Models = append(out.Models, m)
	}
	return out
}

// LocalCheck is a local range at one age and, when a value is given, its
// position.
type LocalCheck struct {
	Known    bool    `json:"known"`
	Reason   string  `json:"reason,omitempty"`
	Label    string  `json:"label"`
	Advisory string  `json:"advisory"`
	Controls int     `json:"controls"`
	Age      float64 `json:"age"`
	// Predicted value and 95 % prediction interval at Age.
	Predicted float64 `json:"predicted"`
	Lower     float64 `json:"lower"`
	Upper     float64 `json:"upper"`
	// Extrapolated is true when Age lies outside the controls' ages.
	Extrapolated bool     `json:"extrapolated"`
	Note         string   `json:"note,omitempty"`
	Placed       bool     `json:"placed"`
	Value        float64  `json:"value"`
	Position     Position `json:"position,omitempty"`
}

// Check returns the local range of a marker series at an age and places the
// value when computable. A nil *LocalRanges has none.
func (l *LocalRanges) Check(marker, region, state string, age float64, ageKnown bool, value float64, computable bool) LocalCheck {
	out := LocalCheck{Label: LocalLabel, Advisory: AdvisoryLocal, Age: age}
	if l == nil {
		out.Reason = "no local ranges built"
		return out
	}
	var m *LocalModel
	for i := range l.Models {
		if l.Models[i].Marker == marker && l.Models[i].Region == region && l.Models[i].State == state {
			m = &l.Models[i]
			break
		}
	}
	switch {
	case m == nil:
		out.Reason = fmt.Sprintf("no control has a comparable value of this marker (%d %s)", l.Controls, plural(l.Controls, "control", "controls"))
		return out
	case !m.Enough:
		out.Controls, out.Reason = m.Controls, m.Reason
		return out
	case !ageKnown:
		out.Controls, out.Reason = m.Controls, "age unknown: no age-adjusted range"
		return out
	}
	out.Known, out.Controls = true, m.Controls
	out.Predicted, out.Lower, out.Upper = m.Prediction.At(age)
	if age < m.Prediction.AgeMin || age > m.Prediction.AgeMax {
		out.Extrapolated = true
		out.Note = fmt.Sprintf("age %s y outside the controls' ages %s–%s y: extrapolated", num(age), num(m.Prediction.AgeMin), num(m.Prediction.AgeMax))
	}
	if computable {
		out.Placed, out.Value = true, value
		switch {
		case value < out.Lower:
			out.Position = PositionBelow
		case value > out.Upper:
			out.Position = PositionAbove
		default:
			out.Position = PositionWithin
		}
	}
	return out
}
