package trends

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize"
	"gonum.org/v1/gonum/stat"
)

// The clinic's controls as a longitudinal norm: a linear mixed-effects model
// of a marker on age over the repeated visits of the control participants.

// NormMinimums are the least data for a control norm: Persons with at least
// two comparable visits at different ages, of whom PersonsThree with at least
// three. Source: longwave design. Reason: a person's own slope needs two
// visits, and its spread between persons is only separable from the visit
// noise when a good share of persons has three or more; 20 persons keep the
// t quantile of the fixed slope's interval, t(0.975; 18) = 2.101, within 7 %
// of 1.96 (as MinLocalControls).
type NormMinimums struct {
	Persons      int `json:"persons"`
	PersonsThree int `json:"persons_three"`
}

// DefaultNormMinimums: at least 20 persons with two or more comparable visits,
// and at least 10 of them with three or more.
func DefaultNormMinimums() NormMinimums { return NormMinimums{Persons: 20, PersonsThree: 10} }

// ControlObservation is one comparable visit of a control participant.
type ControlObservation struct {
	Person   string  // any stable key of the person (patient code or ID)
	AgeYears float64 // age at the visit in years
	Value    float64 // the marker's value
	// SE is the visit's own standard error of Value (a within-visit
	// interval's half width over 1.96), or 0 when the visit has none.
	SE float64
}

// NormOptions say which series a norm is of, the minimums, and the date of
// the fit for its basis text.
type NormOptions struct {
	Marker, Region, State string
	// Min: zero fields take DefaultNormMinimums.
	Min NormMinimums
	// FittedOn is the date of the fit, YYYY-MM-DD (shown in Basis).
	FittedOn string
}

// Estimate is a fitted number with its standard error and 95 % interval.
type Estimate struct {
	Value  float64 `json:"value"`
	SE     float64 `json:"se"`
	CILow  float64 `json:"ci_low"`
	CIHigh float64 `json:"ci_high"`
}

// ControlNorm is the linear mixed-effects model (Laird & Ware 1982) of one
// marker on age over the clinic's control participants, fitted by REML:
//
//	y_ij = (β₀ + b₀ᵢ) + (β₁ + b₁ᵢ)·(age_ij − c) + ε_ij,
//	(b₀ᵢ, b₁ᵢ) ~ N(0, G),  ε_ij ~ N(0, σ²),
//
// for visit j of person i, c = CentreAge (the mean age over all visits). β₀
// is the expected value at age c (Intercept), β₁ the expected change per
// year (PerYear); G holds the between-person variances of intercepts and
// slopes (InterceptSD², SlopeSD²) and their correlation; σ = ResidualSD is
// the visit-to-visit noise about a person's own line, measured in this
// clinic with this equipment.
//
// Writing Vᵢ = σ²(I + ZᵢΛΛᵀZᵢᵀ) with Zᵢ = Xᵢ = [1, age − c] and G = σ²ΛΛᵀ
// (Λ lower triangular, its three entries θ unconstrained reals, so every θ
// gives a valid covariance and the optimiser needs no bounds; a variance
// component at zero is a finite θ), the restricted (REML) log likelihood
// (Patterson & Thompson 1971; Harville 1977) with σ² profiled out is
//
//	ℓ_R(θ) = −½[ (N − p)·(1 + log(2π·r(θ)/(N − p))) + Σᵢ log|Wᵢ| + log|Σᵢ XᵢᵀWᵢ⁻¹Xᵢ| ],
//	Wᵢ = I + ZᵢΛΛᵀZᵢᵀ,  β̂(θ) = (Σ XᵢᵀWᵢ⁻¹Xᵢ)⁻¹ Σ XᵢᵀWᵢ⁻¹yᵢ,
//	r(θ) = Σᵢ (yᵢ − Xᵢβ̂)ᵀWᵢ⁻¹(yᵢ − Xᵢβ̂),  σ̂² = r(θ̂)/(N − p),
//
// N visits, p = 2 fixed effects. Wᵢ⁻¹ and |Wᵢ| come from the 2×2 matrix
// Mᵢ = I + ΛᵀZᵢᵀZᵢΛ (Woodbury; |Wᵢ| = |Mᵢ|), so a fit needs only each
// person's ZᵢᵀZᵢ, Zᵢᵀyᵢ and yᵢᵀyᵢ. θ̂ minimises −ℓ_R with gonum's
// Nelder–Mead (derivative-free: the likelihood is flat in Λ next to a zero
// variance, where gradient steps stall), from several starts and on the
// boundary models, the best kept (fitTheta). Values enter less their mean
// (β₀ is shifted back), so that r(θ) does not cancel digits. The fixed
// effects' covariance is σ̂²(Σ XᵢᵀWᵢ⁻¹Xᵢ)⁻¹; their 95 % intervals use
// t(0.975; persons − 2), the between-person degrees of freedom
// (conservative against the normal quantile).
//
// Known is false, with a Reason in words, below the minimums (NormMinimums)
// or when the fit fails.
type ControlNorm struct {
	Known  bool   `json:"known"`
	Reason string `json:"reason,omitempty"`
	Marker string `json:"marker"`
	Region string `json:"region"`
	State  string `json:"state"`
	// Persons and Visits in the fit (persons with one visit count: they
	// inform the intercepts); PersonsTwo and PersonsThree have at least two
	// and three visits at different ages.
	Persons      int          `json:"persons"`
	Visits       int          `json:"visits"`
	PersonsTwo   int          `json:"persons_two"`
	PersonsThree int          `json:"persons_three"`
	Min          NormMinimums `json:"minimums"`
	AgeMin       float64      `json:"age_min"`
	AgeMax       float64      `json:"age_max"`
	CentreAge    float64      `json:"centre_age"`
	// Intercept is β₀, the expected value at CentreAge; PerYear β₁.
	Intercept Estimate `json:"intercept"`
	PerYear   Estimate `json:"per_year"`
	// DF of the fixed effects' t intervals (persons − 2).
	DF int `json:"df"`
	// Between-person SDs of intercepts (at CentreAge) and slopes, their
	// correlation (0 when either SD is 0), and the residual SD σ.
	InterceptSD float64 `json:"intercept_sd"`
	SlopeSD     float64 `json:"slope_sd"`
	Correlation float64 `json:"correlation"`
	ResidualSD  float64 `json:"residual_sd"`
	// VisitSE is the root mean square of the controls' own per-visit SEs
	// (HasVisitSE false and 0 when not every control visit has one): the
	// part of ResidualSD that is measurement error within a visit.
	VisitSE    float64 `json:"visit_se"`
	HasVisitSE bool    `json:"has_visit_se"`
	// Boundary names a variance component estimated at zero, or a
	// correlation at ±1 (the edge of the parameter space).
	Boundary string `json:"boundary,omitempty"`
	// LogLik is the maximised restricted log likelihood ℓ_R(θ̂).
	LogLik   float64 `json:"reml_loglik"`
	FittedOn string  `json:"fitted_on"`
	Method   string  `json:"method"`
	// Cov is G (row-major 2×2: intercept, slope) and Scale σ², as
	// statsmodels MixedLM reports cov_re and scale.
	Cov   [4]float64 `json:"cov_re"`
	Scale float64    `json:"scale"`
}

// normMethod describes the control norm for people.
const normMethod = "linear mixed-effects model of value on age (centred) with a random intercept and a random slope per control participant (Laird & Ware 1982), fitted by restricted maximum likelihood (REML)"

// Basis names the norm for a verdict or an expected change:
// "clinic controls: 24 persons, 96 visits, fitted 2026-12-03".
func (n ControlNorm) Basis() string {
	s := fmt.Sprintf("clinic controls: %d %s, %d %s", n.Persons, plural(n.Persons, "person", "persons"), n.Visits, plural(n.Visits, "visit", "visits"))
	if n.FittedOn != "" {
		s += ", fitted " + n.FittedOn
	}
	return s
}

// ControlSlopeRange is where a control's own yearly slope falls with 95 %
// probability: β̂₁ ± 1.96·√(SlopeSD² + SE(β̂₁)²), the between-person spread
// of slopes and the uncertainty of the fixed slope together.
func (n ControlNorm) ControlSlopeRange() (lo, hi float64) {
	h := ReliableZ * math.Hypot(n.SlopeSD, n.PerYear.SE)
	return n.PerYear.Value - h, n.PerYear.Value + h
}

// personStats are one person's sufficient statistics for the fit, in
// centred age t: n, Σ1·… as ZᵀZ = [[n, Σt], [Σt, Σt²]], Zᵀy = [Σy, Σty], yᵀy.
type personStats struct {
	n                int
	st, stt, sy, sty float64
	yy               float64
}

// remlState is the data of one fit.
type remlState struct {
	persons []personStats
	n       int // visits
}

// eval returns −2ℓ_R(θ) and, for the final θ, β̂, σ̂² and Σ XᵀW⁻¹X.
func (s *remlState) eval(theta []float64) (m2ll float64, beta [2]float64, sigma2 float64, xwx [3]float64) {
	l11, l21, l22 := theta[0], theta[1], theta[2]
	var a11, a12, a22 float64 // Σ XᵀW⁻¹X (symmetric)
	var c1, c2 float64        // Σ XᵀW⁻¹y
	var yWy, logdet float64
	for _, p := range s.persons {
		// A = ZᵀZ; Λ = [[l11, 0], [l21, l22]]; K = AΛ; M = I + ΛᵀAΛ.
		A11, A12, A22 := float64(p.n), p.st, p.stt
		K11, K12 := A11*l11+A12*l21, A12*l22
		K21, K22 := A12*l11+A22*l21, A22*l22
		M11 := 1 + l11*K11 + l21*K21
		M12 := l11*K12 + l21*K22
		M22 := 1 + l22*K22
		det := M11*M22 - M12*M12
		i11, i12, i22 := M22/det, -M12/det, M11/det
		// XᵀW⁻¹X = A − K M⁻¹ Kᵀ.
		q11 := K11*i11 + K12*i12
		q12 := K11*i12 + K12*i22
		q21 := K21*i11 + K22*i12
		q22 := K21*i12 + K22*i22
		a11 += A11 - (q11*K11 + q12*K12)
		a12 += A12 - (q11*K21 + q12*K22)
		a22 += A22 - (q21*K21 + q22*K22)
		// Λᵀc, then XᵀW⁻¹y = c − K M⁻¹ Λᵀc and yᵀW⁻¹y = yy − cᵀΛ M⁻¹ Λᵀc.
		u1, u2 := l11*p.sy+l21*p.sty, l22*p.sty
		v1, v2 := i11*u1+i12*u2, i12*u1+i22*u2
		c1 += p.sy - (K11*v1 + K12*v2)
		c2 += p.sty - (K21*v1 + K22*v2)
		yWy += p.yy - (u1*v1 + u2*v2)
		logdet += math.Log(det)
	}
	d := a11*a22 - a12*a12
	if !(d > 0) {
		return math.Inf(1), beta, 0, xwx
	}
	beta[0] = (a22*c1 - a12*c2) / d
	beta[1] = (a11*c2 - a12*c1) / d
	r := yWy - (beta[0]*c1 + beta[1]*c2)
	dfr := float64(s.n - 2)
	if !(r > 0) {
		return math.Inf(1), beta, 0, xwx
	}
	sigma2 = r / dfr
	m2ll = dfr*(1+math.Log(2*math.Pi*sigma2)) + logdet + math.Log(d)
	return m2ll, beta, sigma2, [3]float64{a11, a12, a22}
}

// FitControlNorm fits the control norm of one marker series over the
// comparable visits of the control participants (any order). Observations
// with a non-finite age or value are left out.
func FitControlNorm(obs []ControlObservation, opt NormOptions) ControlNorm {
	minimum := opt.Min
	def := DefaultNormMinimums()
	if minimum.Persons <= 0 {
		minimum.Persons = def.Persons
	}
	if minimum.PersonsThree <= 0 {
		minimum.PersonsThree = def.PersonsThree
	}
	// Three persons at the least, whatever the minimums: the fixed
	// effects' t interval has persons − 2 degrees of freedom.
	minimum.Persons = max(minimum.Persons, 3)
	n := ControlNorm{Marker: opt.Marker, Region: opt.Region, State: opt.State, Min: minimum, FittedOn: opt.FittedOn, Method: normMethod}
	byPerson := map[string][]ControlObservation{}
	var keys []string
	seSum, seAll := 0.0, true
	for _, o := range obs {
		if !finiteValue(o.AgeYears) || !finiteValue(o.Value) {
			continue
		}
		if _, ok := byPerson[o.Person]; !ok {
			keys = append(keys, o.Person)
		}
		byPerson[o.Person] = append(byPerson[o.Person], o)
		if o.SE > 0 && finiteValue(o.SE) {
			seSum += o.SE * o.SE
		} else {
			seAll = false
		}
		if n.Visits == 0 {
			n.AgeMin, n.AgeMax = o.AgeYears, o.AgeYears
		}
		n.Visits++
		n.CentreAge += o.AgeYears
		n.AgeMin, n.AgeMax = math.Min(n.AgeMin, o.AgeYears), math.Max(n.AgeMax, o.AgeYears)
	}
	slices.Sort(keys)
	n.Persons = len(keys)
	for _, k := range keys {
		switch distinctAges(byPerson[k]) {
		case 0, 1:
		case 2:
			n.PersonsTwo++
		default:
			n.PersonsTwo++
			n.PersonsThree++
		}
	}
	if n.PersonsTwo < minimum.Persons || n.PersonsThree < minimum.PersonsThree || n.Persons < 3 {
		n.Reason = fmt.Sprintf("only %d control %s with two or more comparable visits (%d with three or more): a norm needs at least %d with two or more and %d with three or more",
			n.PersonsTwo, plural(n.PersonsTwo, "person", "persons"), n.PersonsThree, minimum.Persons, minimum.PersonsThree)
		return n
	}
	n.CentreAge /= float64(n.Visits)
	var mean float64
	for _, k := range keys {
		for _, o := range byPerson[k] {
			mean += o.Value
		}
	}
	mean /= float64(n.Visits)
	if seAll && n.Visits > 0 {
		n.HasVisitSE, n.VisitSE = true, math.Sqrt(seSum/float64(n.Visits))
	}
	st := remlState{n: n.Visits}
	for _, k := range keys {
		var p personStats
		for _, o := range byPerson[k] {
			t, y := o.AgeYears-n.CentreAge, o.Value-mean
			p.n++
			p.st += t
			p.stt += t * t
			p.sy += y
			p.sty += t * y
			p.yy += y * y
		}
		st.persons = append(st.persons, p)
	}
	if v, _, _, _ := st.eval([]float64{0, 0, 0}); math.IsInf(v, 0) {
		// At θ = 0 the model is ordinary least squares: no residual there
		// means the values lie on one line.
		n.Reason = "the controls' values have no spread about their lines: no norm"
		return n
	}
	theta, ok := fitTheta(&st, byPerson, keys, n.CentreAge)
	if !ok {
		n.Reason = "the mixed-effects fit did not converge on these controls' values"
		return n
	}
	m2ll, beta, sigma2, xwx := st.eval(theta)
	if math.IsInf(m2ll, 0) || !(sigma2 > 0) {
		n.Reason = "the controls' values have no spread about their lines: no norm"
		return n
	}
	n.LogLik = -m2ll / 2
	n.Scale, n.ResidualSD = sigma2, math.Sqrt(sigma2)
	l11, l21, l22 := theta[0], theta[1], theta[2]
	g11 := sigma2 * l11 * l11
	g12 := sigma2 * l11 * l21
	g22 := sigma2 * (l21*l21 + l22*l22)
	n.Cov = [4]float64{g11, g12, g12, g22}
	n.InterceptSD, n.SlopeSD = math.Sqrt(g11), math.Sqrt(g22)
	if n.InterceptSD > 0 && n.SlopeSD > 0 {
		n.Correlation = g12 / (n.InterceptSD * n.SlopeSD)
	}
	var bound []string
	if g11 <= boundaryShare*sigma2 {
		bound = append(bound, "between-person SD of intercepts at zero")
	}
	if g22 <= boundaryShare*sigma2 {
		bound = append(bound, "between-person SD of slopes at zero")
	}
	if n.InterceptSD > 0 && n.SlopeSD > 0 && math.Abs(n.Correlation) > 1-1e-6 {
		bound = append(bound, fmt.Sprintf("correlation of intercepts and slopes at %+.0f", n.Correlation))
	}
	if len(bound) > 0 {
		n.Boundary = strings.Join(bound, "; ") + " (boundary of the parameter space: the controls' data do not separate this component from the visit noise)"
	}

	// Cov(β̂) = σ̂² (Σ XᵀW⁻¹X)⁻¹ by gonum's Cholesky.
	var ch mat.Cholesky
	if !ch.Factorize(mat.NewSymDense(2, []float64{xwx[0], xwx[1], xwx[1], xwx[2]})) {
		n.Reason = "the controls' ages do not determine a slope"
		return n
	}
	var inv mat.SymDense
	if err := ch.InverseTo(&inv); err != nil {
		n.Reason = "the controls' ages do not determine a slope"
		return n
	}
	n.DF = n.Persons - 2
	t := TQuantile975(n.DF)
	n.Intercept = estimate(mean+beta[0], math.Sqrt(sigma2*inv.At(0, 0)), t)
	n.PerYear = estimate(beta[1], math.Sqrt(sigma2*inv.At(1, 1)), t)
	n.Known = true
	return n
}

// boundaryShare: a variance component at or below this share of σ² counts
// as on the boundary (zero). Source: longwave design (one part in 10⁶ of
// the residual variance is below anything a marker resolves).
const boundaryShare = 1e-6

func estimate(v, se, t float64) Estimate {
	return Estimate{Value: v, SE: se, CILow: v - t*se, CIHigh: v + t*se}
}

func finiteValue(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// distinctAges counts a person's visits at different ages (to a day).
func distinctAges(obs []ControlObservation) int {
	ages := make([]float64, 0, len(obs))
	for _, o := range obs {
		ages = append(ages, math.Round(o.AgeYears*DaysPerYear))
	}
	slices.Sort(ages)
	return len(slices.Compact(ages))
}

// fitTheta minimises −2ℓ_R over θ from several starts: moment estimates
// from each person's own least-squares line, the same with no slope
// variance, and with no intercept variance. With G = σ²ΛΛᵀ the likelihood
// is flat in Λ's entries next to a zero variance (its derivative there is
// 0), so an optimiser creeps towards the boundary without reaching it; the
// boundary models themselves (no slope variance: θ = (λ, 0, 0); no
// intercept variance: θ = (0, 0, λ); neither: θ = 0) are fitted too, and
// the θ with the largest ℓ_R of all is kept.
func fitTheta(st *remlState, byPerson map[string][]ControlObservation, keys []string, centre float64) ([]float64, bool) {
	f := func(x []float64) float64 {
		v, _, _, _ := st.eval(x)
		return v
	}
	var best []float64
	bestF := math.Inf(1)
	keep := func(x []float64) {
		if v := f(x); v < bestF {
			best, bestF = slices.Clone(x), v
		}
	}
	for _, x0 := range startThetas(byPerson, keys, centre) {
		keep(minimise(f, x0))
	}
	// Boundary models, from the best fit's own values.
	if best != nil {
		li := math.Abs(best[0])
		ls := math.Hypot(best[1], best[2])
		x := minimise(func(y []float64) float64 { return f([]float64{y[0], 0, 0}) }, []float64{math.Max(li, 0.1)})
		keep([]float64{x[0], 0, 0})
		x = minimise(func(y []float64) float64 { return f([]float64{0, 0, y[0]}) }, []float64{math.Max(ls, 0.01)})
		keep([]float64{0, 0, x[0]})
	}
	keep([]float64{0, 0, 0})
	return best, best != nil && !math.IsInf(bestF, 0)
}

// minimise runs gonum's Nelder–Mead from x0 until −2ℓ_R changes by less
// than 1e-11 over 30 iterations, and returns the better of x0 and its end.
func minimise(f func([]float64) float64, x0 []float64) []float64 {
	prob := optimize.Problem{Func: f}
	x := slices.Clone(x0)
	if r, _ := optimize.Minimize(prob, x, &optimize.Settings{
		Converger: &optimize.FunctionConverge{Absolute: 1e-11, Relative: 1e-12, Iterations: 30},
	}, &optimize.NelderMead{}); r != nil && r.F < f(x) {
		x = r.X
	}
	return x
}

// startThetas are the starting points of the optimiser (θ = Λ entries of
// G/σ²): moment estimates from the persons' own lines and two boundary
// variants.
func startThetas(byPerson map[string][]ControlObservation, keys []string, centre float64) [][]float64 {
	var ints, slopes []float64
	var sse float64
	var dfe int
	for _, k := range keys {
		obs := byPerson[k]
		if distinctAges(obs) < 2 {
			continue
		}
		ts := make([]float64, len(obs))
		ys := make([]float64, len(obs))
		for i, o := range obs {
			ts[i], ys[i] = o.AgeYears-centre, o.Value
		}
		a, b, res := lineFit(ts, ys)
		ints, slopes = append(ints, a), append(slopes, b)
		sse += res
		dfe += len(obs) - 2
	}
	s2 := 1.0
	if dfe > 0 && sse > 0 {
		s2 = sse / float64(dfe)
	}
	vi, vs := 1e-3, 1e-3
	if len(ints) >= 2 {
		vi = math.Max(stat.Variance(ints, nil), 1e-3*s2) / s2
		vs = math.Max(stat.Variance(slopes, nil), 1e-3*s2) / s2
	}
	return [][]float64{
		{math.Sqrt(vi), 0, math.Sqrt(vs)},
		{math.Sqrt(vi), 0, 0},
		{0, 0, math.Sqrt(vs)},
		{1, 0, 0.1},
	}
}

// lineFit is the least-squares line y = a + b·t (gonum
// stat.LinearRegression) and its residual sum of squares.
func lineFit(t, y []float64) (a, b, sse float64) {
	a, b = stat.LinearRegression(t, y, nil, false)
	for i := range t {
		r := y[i] - a - b*t[i]
		sse += r * r
	}
	return a, b, sse
}
