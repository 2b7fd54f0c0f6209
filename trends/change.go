package trends

import (
	"fmt"
	"math"
	"sync"

	"longwave/ingest"
	"longwave/metrics"

	"gonum.org/v1/gonum/stat"
	"gonum.org/v1/gonum/stat/distuv"
)

// DaysPerYear turns day counts between civil dates into fractional years
// (the Julian year; common practice).
const DaysPerYear = 365.25

// MinSlopePoints is the fewest comparable points for a slope with a
// confidence interval: n − 2 ≥ 1 degrees of freedom for the residual variance.
const MinSlopePoints = 3

// ReliableZ is the two-sided 5 % normal quantile that Jacobson & Truax (1991)
// compare the reliable change index with.
const ReliableZ = 1.96

// ConfidenceLevel of the slope and prediction intervals.
const ConfidenceLevel = 0.95

// Direction of a marker's change.
type Direction string

// Directions.
const (
	DirectionUp      Direction = "up"
	DirectionDown    Direction = "down"
	DirectionSteady  Direction = "steady"
	DirectionUnknown Direction = "unknown"
)

// Expected-for-age verdicts.
const (
	ExpectedFaster     = "faster than expected for age"
	ExpectedSlower     = "slower than expected for age"
	ExpectedConsistent = "consistent with the expected change for age"
)

// tTable holds t(0.975; ν) for ν = 1…len−1, filled once: the cohort asks
// for the same few quantiles thousands of times.
var tTable = sync.OnceValue(func() []float64 {
	out := make([]float64, 129)
	for nu := 1; nu < len(out); nu++ {
		out[nu] = distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(nu)}.Quantile(0.5 + ConfidenceLevel/2)
	}
	return out
})

// TQuantile975 returns the 0.975 quantile of Student's t with df degrees of
// freedom (the two-sided 95 % critical value), from gonum's
// distuv.StudentsT{Mu: 0, Sigma: 1, Nu: df}. It panics for df < 1, a
// programmer error.
func TQuantile975(df int) float64 {
	if df < 1 {
		panic("trends: t quantile with df < 1")
	}
	if t := tTable(); df < len(t) {
		return t[df]
	}
	return distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(df)}.Quantile(0.5 + ConfidenceLevel/2)
}

// Slope is the least-squares line through a marker's comparable points,
// value against years since the first of them, with a 95 % confidence
// interval for the slope:
//
//	b = Sxy/Sxx, a = ȳ − b·x̄, s² = Σ(y − a − b·x)²/(n − 2),
//	SE(b) = s/√Sxx, CI = b ± t(0.975; n − 2)·SE(b).
//
// Known is false, with a Reason, under MinSlopePoints points or when all
// points fall on one day.
type Slope struct {
	Known     bool    `json:"known"`
	Reason    string  `json:"reason,omitempty"`
	N         int     `json:"n"`
	PerYear   float64 `json:"per_year"`  // marker unit per year
	Intercept float64 `json:"intercept"` // value at the first comparable visit
	SE        float64 `json:"se"`
	DF        int     `json:"df"`
	T         float64 `json:"t"` // t(0.975; n − 2)
	CILow     float64 `json:"ci_low"`
	CIHigh    float64 `json:"ci_high"`
}

// FitSlope fits value against years (any origin) by ordinary least squares
// (gonum stat.LinearRegression) and adds the slope's 95 % interval.
func FitSlope(years, values []float64) Slope {
	n := len(years)
	s := Slope{N: n}
	if n != len(values) {
		panic("trends: FitSlope with slices of different length")
	}
	if n < MinSlopePoints {
		s.Reason = fmt.Sprintf("%d comparable %s: a slope with a confidence interval needs at least %d", n, plural(n, "point", "points"), MinSlopePoints)
		return s
	}
	xbar := stat.Mean(years, nil)
	var sxx float64
	for _, x := range years {
		sxx += (x - xbar) * (x - xbar)
	}
	if sxx <= 0 {
		s.Reason = "all comparable points on one date: no slope"
		return s
	}
	a, b := stat.LinearRegression(years, values, nil, false)
	var sse float64
	for i, x := range years {
		r := values[i] - a - b*x
		sse += r * r
	}
	s.Known, s.PerYear, s.Intercept = true, b, a
	s.DF = n - 2
	s.SE = math.Sqrt(sse/float64(s.DF)) / math.Sqrt(sxx)
	s.T = TQuantile975(s.DF)
	s.CILow, s.CIHigh = b-s.T*s.SE, b+s.T*s.SE
	return s
}

// Reliability is the test–retest reliability r and the between-person SD of
// a marker for the reliable change index, with their sources. Region or
// State empty match every region or state.
type Reliability struct {
	Marker      string  `json:"marker"`
	Region      string  `json:"region"`
	State       string  `json:"state"`
	SD          float64 `json:"sd"`
	SDSource    string  `json:"sd_source"`
	R           float64 `json:"r"`
	RSource     string  `json:"r_source"`
	Provisional bool    `json:"provisional"`
	Note        string  `json:"note"`
}

// DefaultReliability is longwave's table for the reliable change index. No
// test–retest reliability of the PDR in older adults over a year or more has
// been found (REFERENCES.md section 2), so the PDR row is provisional: r from
// broad-band spectral features over 12–16 weeks in 19 healthy adults, SD from
// 50 healthy elderly controls. Other markers have no row: their RCI is not
// computed and says why.
func DefaultReliability() []Reliability {
	return []Reliability{{
		Marker: metrics.PDRFrequency, Region: metrics.RegionPosterior, State: string(ingest.EyesClosed),
		SD:          0.57,
		SDSource:    "SD of 9.48 ± 0.57 Hz in 50 healthy elderly controls: Dominant occipital (alpha) rhythm frequency in early stage Alzheimer's disease and depression. Electroencephalogr Clin Neurophysiol 1989;73(5):427–432. doi:10.1016/0013-4694(89)90092-8 (abstract)",
		R:           0.84,
		RSource:     "r = 0.84 for broad-band spectral features at 12–16 weeks in 19 healthy adults: Salinsky MC, Oken BS, Morehead L (1991). Test-retest reliability in EEG frequency analysis. Electroencephalogr Clin Neurophysiol 79(5):382–392. doi:10.1016/0013-4694(91)90203-g (abstract)",
		Provisional: true,
		Note:        "provisional: no test–retest reliability of the PDR in older adults over a year or more was found; r comes from broad-band features over 12–16 weeks",
	}}
}

func findReliability(table []Reliability, marker, region, state string) (Reliability, bool) {
	for _, r := range table {
		if r.Marker == marker && (r.Region == "" || r.Region == region) && (r.State == "" || r.State == state) {
			return r, true
		}
	}
	return Reliability{}, false
}

// ReliableChange is the reliable change index of the latest comparable visit
// against the baseline after Jacobson NS, Truax P (1991), J Consult Clin
// Psychol 59(1):12–19, doi:10.1037/0022-006X.59.1.12:
//
//	SE = SD·√(1 − r), S_diff = √2·SE, RC = (x₂ − x₁)/S_diff,
//
// reliable at the 5 % level when |RC| > 1.96. Threshold = 1.96·S_diff is the
// smallest reliable change in the marker's unit.
//
// The standard error of measurement SE comes from the clinic's control
// model where one exists (SEBasis BasisClinic: SE = the model's residual
// SD σ, the visit-to-visit noise of a control about their own line, measured
// in this clinic; SD and r are then 0), else from the borrowed literature SD
// and test–retest r (SEBasis BasisLiterature, marked provisional where the
// table says so). SESource says which, in words.
type ReliableChange struct {
	Known       bool    `json:"known"`
	Reason      string  `json:"reason,omitempty"`
	SEBasis     string  `json:"se_basis,omitempty"`
	SESource    string  `json:"se_source,omitempty"`
	SD          float64 `json:"sd"`
	SDSource    string  `json:"sd_source,omitempty"`
	R           float64 `json:"r"`
	RSource     string  `json:"r_source,omitempty"`
	Provisional bool    `json:"provisional"`
	Note        string  `json:"note,omitempty"`
	SE          float64 `json:"se"`
	SDiff       float64 `json:"s_diff"`
	RC          float64 `json:"rc"`
	Threshold   float64 `json:"threshold"`
	Reliable    bool    `json:"reliable"`
}

// ReliableChangeIndex computes the Jacobson–Truax index of x2 against x1 with
// the SD and reliability of rel. It is not Known, with a reason, unless
// SD > 0 and 0 ≤ r < 1.
func ReliableChangeIndex(x1, x2 float64, rel Reliability) ReliableChange {
	out := ReliableChange{SD: rel.SD, SDSource: rel.SDSource, R: rel.R, RSource: rel.RSource, Provisional: rel.Provisional, Note: rel.Note}
	if !(rel.SD > 0) || math.IsInf(rel.SD, 0) {
		out.Reason = fmt.Sprintf("SD %s: must be above 0", num(rel.SD))
		return out
	}
	if !(rel.R >= 0 && rel.R < 1) {
		out.Reason = fmt.Sprintf("reliability r = %s: must be at least 0 and below 1", num(rel.R))
		return out
	}
	out.Known = true
	out.SEBasis = BasisLiterature
	out.SESource = "SE = SD·√(1 − r) from the literature SD and test–retest r"
	out.SE = rel.SD * math.Sqrt(1-rel.R)
	out.finish(x1, x2)
	return out
}

// seFromNorm says where a clinic-based SE comes from (the model's figures
// and basis are in Change.Expected).
const seFromNorm = "SE = the residual SD of the clinic's control model: the visit-to-visit noise of its controls about their own lines"

// reliableFromNorm is the reliable change index with the standard error of
// measurement taken from the control model: SE = σ, its residual SD.
func reliableFromNorm(x1, x2 float64, norm seriesNorm) ReliableChange {
	out := ReliableChange{Known: true, SEBasis: BasisClinic, SE: norm.ResidualSD, SESource: seFromNorm}
	out.finish(x1, x2)
	return out
}

// finish fills S_diff, RC, the threshold and the verdict from SE.
func (out *ReliableChange) finish(x1, x2 float64) {
	out.SDiff = math.Sqrt2 * out.SE
	out.RC = (x2 - x1) / out.SDiff
	out.Threshold = ReliableZ * out.SDiff
	out.Reliable = math.Abs(out.RC) > ReliableZ
}

// Bases of an expected change and of a reliable change index's noise.
const (
	BasisClinic     = "clinic controls"
	BasisLiterature = "literature"
)

// ExpectedForAge is the expected yearly change for age of a marker. With a
// control model (Basis BasisClinic) it is the model's fixed slope on age
// β̂₁ with its 95 % interval, the between-person SD of slopes and the
// residual SD, and the persons and visits fitted (BasisText names them:
// "clinic controls: 24 persons, 96 visits, fitted 2026-12-03"); the
// patient's slope is judged against it in Change.Verdict. Without one, a
// reference row's expected change (Basis BasisLiterature, no interval: CILow
// and CIHigh equal PerYear) is compared with the slope's interval: Verdict
// is ExpectedFaster only when the slope's confidence interval excludes the
// expected rate on the far side from zero (for an expected rate of zero: on
// either side). Known false says why in Reason.
type ExpectedForAge struct {
	Known      bool    `json:"known"`
	Basis      string  `json:"basis"`
	BasisText  string  `json:"basis_text,omitempty"`
	PerYear    float64 `json:"per_year"`
	CILow      float64 `json:"ci_low"`
	CIHigh     float64 `json:"ci_high"`
	SlopeSD    float64 `json:"slope_sd"`
	ResidualSD float64 `json:"residual_sd"`
	Persons    int     `json:"persons"`
	Visits     int     `json:"visits"`
	Reason     string  `json:"reason"`
	Source     string  `json:"source,omitempty"`
	Verdict    string  `json:"verdict,omitempty"`
	Faster     bool    `json:"faster"`
}

// expectedFromNorm is the expected change of a known control model.
func expectedFromNorm(n seriesNorm) ExpectedForAge {
	return ExpectedForAge{Known: true, Basis: BasisClinic, BasisText: n.basis,
		PerYear: n.PerYear.Value, CILow: n.PerYear.CILow, CIHigh: n.PerYear.CIHigh,
		SlopeSD: n.SlopeSD, ResidualSD: n.ResidualSD, Persons: n.Persons, Visits: n.Visits, Source: n.Method}
}

// ChangePoint is one comparable value of a marker series.
type ChangePoint struct {
	VisitID int64
	Date    string // YYYY-MM-DD
	Value   float64
}

// Change is what changed in one marker over a patient's comparable visits:
// change from baseline (the first comparable visit), the yearly slope with
// its interval, the reliable change of the latest visit against baseline,
// the comparison with the expected change for age, and a direction.
type Change struct {
	Points          int     `json:"points"`
	BaselineVisitID int64   `json:"baseline_visit_id"`
	BaselineDate    string  `json:"baseline_date"`
	BaselineValue   float64 `json:"baseline_value"`
	LatestVisitID   int64   `json:"latest_visit_id"`
	LatestDate      string  `json:"latest_date"`
	LatestValue     float64 `json:"latest_value"`
	// HasFromBaseline is true with two or more points: FromBaseline =
	// latest − baseline over Years = days/365.25 between them.
	HasFromBaseline bool           `json:"has_from_baseline"`
	FromBaseline    float64        `json:"from_baseline"`
	Years           float64        `json:"years"`
	Reason          string         `json:"reason,omitempty"`
	Slope           Slope          `json:"slope"`
	Reliable        ReliableChange `json:"reliable"`
	Expected        ExpectedForAge `json:"expected"`
	// Verdict is the patient's own slope against the clinic's control
	// model (CompareSlope), or why there is none.
	Verdict SlopeVerdict `json:"verdict"`
	// Direction: from the slope's interval with three or more points (up
	// when it lies above 0, down below 0, steady when it holds 0); with two
	// points from the reliable change index (up or down when reliable,
	// steady when not; unknown when no index can be computed); unknown with
	// fewer. DirectionBasis says which.
	Direction      Direction `json:"direction"`
	DirectionBasis string    `json:"direction_basis"`
}

// ExpectedRate is an expected yearly change for age and its source.
type ExpectedRate struct {
	Known   bool
	PerYear float64
	Source  string
}

// ComputeChange works out a Change over comparable points sorted by date.
// rel is the marker's reliability row (ok false: none); exp the expected
// yearly change for age. A point whose date does not parse is skipped.
func ComputeChange(points []ChangePoint, rel Reliability, relOK bool, exp ExpectedRate) Change {
	return computeChange(points, rel, relOK, exp, seriesNorm{})
}

// computeChange is ComputeChange with the series' control model (Known
// false: none).
func computeChange(points []ChangePoint, rel Reliability, relOK bool, exp ExpectedRate, norm seriesNorm) Change {
	years := make([]float64, 0, len(points))
	values := make([]float64, 0, len(points))
	var first civilDate
	kept := points[:0:0]
	for _, p := range points {
		d, err := parseDate(p.Date)
		if err != nil {
			continue
		}
		if len(kept) == 0 {
			first = d
		}
		kept = append(kept, p)
		years = append(years, float64(d.daysSince(first))/DaysPerYear)
		values = append(values, p.Value)
	}
	return changeFrom(kept, years, values, rel, relOK, exp, norm)
}

// changeFrom is ComputeChange on points whose dates are already turned into
// years since the first, with the control model norm of the series (Known
// false: none), which then gives the reliable change index its noise and the
// expected change for age.
func changeFrom(kept []ChangePoint, years, values []float64, rel Reliability, relOK bool, exp ExpectedRate, norm seriesNorm) Change {
	var c Change
	c.Points = len(kept)
	c.Direction, c.DirectionBasis = DirectionUnknown, "fewer than 2 comparable points"
	if len(kept) == 0 {
		c.Reason = "no comparable points"
		c.Slope = FitSlope(nil, nil)
		c.Reliable.Reason = "no comparable points"
		c.Expected.Reason = "no comparable points"
		if norm.Known {
			c.Expected = expectedFromNorm(norm)
		}
		return c
	}
	b, l := kept[0], kept[len(kept)-1]
	c.BaselineVisitID, c.BaselineDate, c.BaselineValue = b.VisitID, b.Date, b.Value
	c.LatestVisitID, c.LatestDate, c.LatestValue = l.VisitID, l.Date, l.Value
	if len(kept) >= 2 {
		c.HasFromBaseline = true
		c.FromBaseline = l.Value - b.Value
		c.Years = years[len(years)-1]
	} else {
		c.Reason = "one comparable point: no change yet"
	}
	c.Slope = FitSlope(years, values)

	withNorm := norm.Known && norm.ResidualSD > 0
	switch {
	case len(kept) < 2:
		c.Reliable.Reason = "one comparable point: no change to test"
	case withNorm:
		c.Reliable = reliableFromNorm(b.Value, l.Value, norm)
	case !relOK:
		c.Reliable.Reason = "no control model and no test–retest reliability and SD for this marker in longwave's sources: reliable change not computed"
	default:
		c.Reliable = ReliableChangeIndex(b.Value, l.Value, rel)
	}

	switch {
	case norm.Known:
		c.Expected = expectedFromNorm(norm)
	case !exp.Known:
		c.Expected.Reason = "no expected yearly change for age in the reference data"
		if norm.Reason != "" {
			c.Expected.Reason = "no control model: " + norm.Reason + "; " + c.Expected.Reason
		}
	case !c.Slope.Known:
		c.Expected = ExpectedForAge{Basis: BasisLiterature, PerYear: exp.PerYear, CILow: exp.PerYear, CIHigh: exp.PerYear,
			Source: exp.Source, Reason: "no slope to compare: " + c.Slope.Reason}
	default:
		c.Expected = compareExpected(c.Slope, exp)
	}

	switch {
	case c.Slope.Known:
		c.DirectionBasis = "95 % confidence interval of the slope"
		switch {
		case c.Slope.CILow > 0:
			c.Direction = DirectionUp
		case c.Slope.CIHigh < 0:
			c.Direction = DirectionDown
		default:
			c.Direction = DirectionSteady
		}
	case len(kept) == 2 && c.Reliable.Known:
		c.DirectionBasis = "reliable change index of two points"
		switch {
		case c.Reliable.Reliable && c.FromBaseline > 0:
			c.Direction = DirectionUp
		case c.Reliable.Reliable && c.FromBaseline < 0:
			c.Direction = DirectionDown
		default:
			c.Direction = DirectionSteady
		}
	case len(kept) == 2:
		c.DirectionBasis = "two points and no reliable change index"
	}
	return c
}

func compareExpected(s Slope, exp ExpectedRate) ExpectedForAge {
	out := ExpectedForAge{Known: true, Basis: BasisLiterature, BasisText: BasisLiterature + ": " + exp.Source,
		PerYear: exp.PerYear, CILow: exp.PerYear, CIHigh: exp.PerYear, Source: exp.Source}
	e := exp.PerYear
	switch {
	case s.CILow <= e && e <= s.CIHigh:
		out.Verdict = ExpectedConsistent
	case e < 0 && s.CIHigh < e, e > 0 && s.CILow > e, e == 0:
		out.Verdict, out.Faster = ExpectedFaster, true
	default:
		out.Verdict = ExpectedSlower
	}
	return out
}

func plural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}
