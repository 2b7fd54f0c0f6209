package trends

import (
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/stat"
)

// The patient's own slope against the clinic's control norm.

// MinVerdictVisits is the fewest comparable visits for a verdict against the
// control norm: a slope with one degree of freedom for the patient's own
// residual (as MinSlopePoints).
const MinVerdictVisits = MinSlopePoints

// Verdict texts of CompareSlope.
const (
	SlopeDeclinesFaster = "declines faster than the clinic's controls"
	SlopeWithinControls = "within the controls' range"
	SlopeRisesFaster    = "rises faster than the clinic's controls"
)

// AdvisoryVerdict is shown with every verdict against the control norm.
const AdvisoryVerdict = "advisory: a comparison with this clinic's control participants, not a diagnosis; local practice and licensed clinicians decide"

// WorryingDirection is the direction of change of a marker that clinical EEG
// reads as slowing or loss of reactivity, DirectionUnknown where neither
// sign is (and for a name that is no marker); the table is the markers'
// own (markerSpans): down for the PDR frequencies and centre of gravity,
// alpha reactivity and relative alpha and beta power; up for the
// eyes-open/closed alpha ratio, theta/alpha, relative delta and theta power
// and the slowing ratio. Source: common practice (EEG slowing moves the posterior dominant
// rhythm down and power from alpha and beta to delta and theta); alpha
// reactivity is lower in mild Alzheimer's disease than in normal elderly
// (Babiloni et al. 2010, REFERENCES.md section 1, abstract). The aperiodic
// exponent flattens with age (Voytek et al. 2015, abstract) but no sign of
// it is established as a sign of disease; the asymmetry is signed (left −
// right), the fit quality and the drowsiness index describe the recording.
func WorryingDirection(marker string) Direction {
	for _, m := range markerSpans {
		if m.name == marker {
			return m.worrying
		}
	}
	return DirectionUnknown
}

// PatientVisit is one comparable visit of the patient for the verdict.
type PatientVisit struct {
	AgeYears float64 // age at the visit in years
	Value    float64
	// SE is the visit's own standard error of Value, 0 when it has none.
	SE float64
}

// PatientSlope is the patient's own yearly slope for the verdict, by
// weighted least squares over the comparable visits:
//
//	vⱼ = σ_b² + sⱼ²,  wⱼ = 1/vⱼ,
//	b = Σwⱼ(tⱼ − t̄)(yⱼ − ȳ) / Sxx,  Sxx = Σwⱼ(tⱼ − t̄)² (weighted means),
//	φ = Σwⱼ rⱼ² / (n − 2),  SE(b)² = max(1, φ) / Sxx,
//
// with σ_b² = max(0, σ² − s̄²) the controls' visit-to-visit variance beyond
// their own within-visit error (σ = ControlNorm.ResidualSD, s̄ =
// ControlNorm.VisitSE, 0 when the controls have no per-visit SEs) and sⱼ the
// visit's own SE (s̄ when it has none). The noise the clinic measured is
// thus the floor of the patient's, and a patient whose residuals φ show
// more noise gets the wider SE (the larger of the two, which errs on the
// side of "within"). Without a norm every vⱼ = 1 and SE² = φ/Sxx (ordinary
// least squares). CILow–CIHigh is b ± 1.96·SE with a norm, b ± t(0.975;
// n − 2)·SE without.
type PatientSlope struct {
	Known   bool    `json:"known"`
	Reason  string  `json:"reason,omitempty"`
	N       int     `json:"n"`
	PerYear float64 `json:"per_year"`
	SE      float64 `json:"se"`
	CILow   float64 `json:"ci_low"`
	CIHigh  float64 `json:"ci_high"`
	// Weighted is true when per-visit SEs entered the weights.
	Weighted bool `json:"weighted"`
	// Phi is φ, the patient's residual scale against the clinic's noise.
	Phi float64 `json:"phi"`
	// Noise says where the SE's noise came from.
	Noise string `json:"noise"`
	// FirstAge and LastAge span the visits.
	FirstAge float64 `json:"first_age"`
	LastAge  float64 `json:"last_age"`
}

// FitPatientSlope fits the patient's slope over comparable visits (any
// order) with the noise of the control norm when it is Known. Visits with a
// non-finite age or value are left out.
func FitPatientSlope(visits []PatientVisit, norm ControlNorm) PatientSlope {
	visits = slices.DeleteFunc(slices.Clone(visits), func(v PatientVisit) bool {
		return !finiteValue(v.AgeYears) || !finiteValue(v.Value)
	})
	p := PatientSlope{N: len(visits)}
	if p.N < MinVerdictVisits {
		p.Reason = fmt.Sprintf("%d comparable %s: a verdict needs at least %d", p.N, plural(p.N, "visit", "visits"), MinVerdictVisits)
		return p
	}
	w := make([]float64, p.N)
	withNorm := norm.Known && norm.ResidualSD > 0
	var between, fallback float64
	if withNorm {
		fallback = norm.VisitSE
		between = math.Max(0, norm.Scale-norm.VisitSE*norm.VisitSE)
	}
	p.FirstAge, p.LastAge = visits[0].AgeYears, visits[0].AgeYears
	for j, v := range visits {
		p.FirstAge, p.LastAge = math.Min(p.FirstAge, v.AgeYears), math.Max(p.LastAge, v.AgeYears)
		w[j] = 1
		if !withNorm {
			continue
		}
		s := fallback
		if v.SE > 0 && finiteValue(v.SE) {
			s, p.Weighted = v.SE, true
		}
		vj := between + s*s
		if !(vj > 0) {
			vj = norm.Scale
		}
		w[j] = 1 / vj
	}
	ages := make([]float64, p.N)
	values := make([]float64, p.N)
	for j, v := range visits {
		ages[j], values[j] = v.AgeYears, v.Value
	}
	mt := stat.Mean(ages, w)
	var sxx float64
	for j, t := range ages {
		sxx += w[j] * (t - mt) * (t - mt)
	}
	if !(sxx > 0) || p.LastAge-p.FirstAge < 1/DaysPerYear {
		p.Reason = "all comparable visits on one date: no slope"
		return p
	}
	// Weighted least squares by gonum's stat.LinearRegression.
	a, b := stat.LinearRegression(ages, values, w, false)
	p.PerYear = b
	var q float64
	for j, t := range ages {
		r := values[j] - a - b*t
		q += w[j] * r * r
	}
	p.Phi = q / float64(p.N-2)
	p.Known = true
	if withNorm {
		p.SE = math.Sqrt(math.Max(1, p.Phi) / sxx)
		if p.Phi > 1 {
			p.Noise = fmt.Sprintf("the patient's own residuals (%s times the clinic's visit-to-visit variance)", num(p.Phi))
		} else {
			p.Noise = fmt.Sprintf("the clinic's visit-to-visit noise (residual SD %s of the control norm)", num(norm.ResidualSD))
		}
		if p.Weighted {
			p.Noise += ", visits weighted by their own intervals"
		}
		p.CILow, p.CIHigh = p.PerYear-ReliableZ*p.SE, p.PerYear+ReliableZ*p.SE
		return p
	}
	p.SE = math.Sqrt(p.Phi / sxx)
	p.Noise = "the patient's own residuals (no control norm)"
	t := TQuantile975(p.N - 2)
	p.CILow, p.CIHigh = p.PerYear-t*p.SE, p.PerYear+t*p.SE
	return p
}

// SlopeVerdict is the patient's slope against the control norm. Under the
// norm, a healthy person's observed slope is β₁ + b₁ + e with b₁ ~ N(0,
// SlopeSD²) and e the patient's own estimation error, so
//
//	z = (b − β̂₁) / √(SlopeSD² + SE(β̂₁)² + SE(b)²),
//
// and the verdict is SlopeDeclinesFaster for z < −1.96, SlopeRisesFaster
// for z > 1.96 and SlopeWithinControls between (each side 2.5 % for a
// healthy person). The model is linear in age, so a control's expected
// slope is the same at every age; an age outside the controls' ages is
// extrapolation and the Note says so.
type SlopeVerdict struct {
	Known  bool   `json:"known"`
	Text   string `json:"text"`
	Reason string `json:"reason"`
	// Direction: DirectionDown (declines faster), DirectionUp (rises
	// faster), DirectionSteady (within); DirectionUnknown without a verdict.
	Direction Direction `json:"direction"`
	// Worrying is the marker's worrying direction (WorryingDirection);
	// Concern is true when Direction is it.
	Worrying Direction `json:"worrying"`
	Concern  bool      `json:"concern"`
	Basis    string    `json:"basis"`
	Advisory string    `json:"advisory"`
	// The figures: the patient's slope and interval, the controls' expected
	// slope and its interval, and the range a control's slope falls in.
	Patient          PatientSlope `json:"patient"`
	ExpectedPerYear  float64      `json:"expected_per_year"`
	ExpectedCILow    float64      `json:"expected_ci_low"`
	ExpectedCIHigh   float64      `json:"expected_ci_high"`
	ControlRangeLow  float64      `json:"control_range_low"`
	ControlRangeHigh float64      `json:"control_range_high"`
	Z                float64      `json:"z"`
	Age              float64      `json:"age"`
	Extrapolated     bool         `json:"extrapolated"`
	Note             string       `json:"note,omitempty"`
}

// CompareSlope judges the patient's slope p (from FitPatientSlope with the
// same norm) against the control norm at the patient's age (the mean age of
// the visits, for the extrapolation note).
func CompareSlope(p PatientSlope, norm ControlNorm, age float64) SlopeVerdict {
	basis := ""
	if norm.Known {
		basis = norm.Basis()
	}
	return compareSlope(p, norm, basis, age)
}

// compareSlope is CompareSlope with the norm's Basis worked out already
// (the cohort judges thousands of patients against one norm).
func compareSlope(p PatientSlope, norm ControlNorm, basis string, age float64) SlopeVerdict {
	v := SlopeVerdict{Direction: DirectionUnknown, Worrying: WorryingDirection(norm.Marker), Advisory: AdvisoryVerdict, Patient: p, Age: age}
	if norm.Known {
		v.Basis = basis
		v.ExpectedPerYear, v.ExpectedCILow, v.ExpectedCIHigh = norm.PerYear.Value, norm.PerYear.CILow, norm.PerYear.CIHigh
		v.ControlRangeLow, v.ControlRangeHigh = norm.ControlSlopeRange()
	}
	switch {
	case !norm.Known:
		v.Reason = "no control model: " + norm.Reason
		if norm.Reason == "" {
			v.Reason = "no control model"
		}
		v.Text = "no verdict: " + v.Reason
		return v
	case !p.Known:
		v.Reason = p.Reason
		v.Text = "no verdict: " + p.Reason
		return v
	}
	if age < norm.AgeMin || age > norm.AgeMax {
		v.Extrapolated = true
		v.Note = fmt.Sprintf("age %s y outside the controls' ages %s–%s y: the norm is extrapolated", num(age), num(norm.AgeMin), num(norm.AgeMax))
	}
	sd := math.Sqrt(norm.SlopeSD*norm.SlopeSD + norm.PerYear.SE*norm.PerYear.SE + p.SE*p.SE)
	v.Known = true
	v.Z = (p.PerYear - norm.PerYear.Value) / sd
	switch {
	case v.Z < -ReliableZ:
		v.Text, v.Direction = SlopeDeclinesFaster, DirectionDown
	case v.Z > ReliableZ:
		v.Text, v.Direction = SlopeRisesFaster, DirectionUp
	default:
		v.Text, v.Direction = SlopeWithinControls, DirectionSteady
	}
	v.Concern = v.Worrying != DirectionUnknown && v.Direction == v.Worrying
	return v
}
