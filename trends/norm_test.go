package trends

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// mixedGolden is testdata/trends/mixed/golden.json, made by
// testdata/trends/mixed/make_golden.py with statsmodels MixedLM
// (value ~ age, re_formula "~age", reml=True, age centred at the mean).
type mixedGolden struct {
	Statsmodels string `json:"statsmodels"`
	Sets        []struct {
		Name     string    `json:"name"`
		Note     string    `json:"note"`
		Person   []string  `json:"person"`
		AgeYears []float64 `json:"age_years"`
		Value    []float64 `json:"value"`
		Centre   float64   `json:"centre"`
		FE       []float64 `json:"fe_params"`
		BSE      []float64 `json:"bse_fe"`
		BSEGLS   []float64 `json:"bse_gls"`
		CovRE    []float64 `json:"cov_re"`
		Scale    float64   `json:"scale"`
		LLF      float64   `json:"llf"`
	} `json:"sets"`
}

func loadMixedGolden(tb testing.TB) mixedGolden {
	tb.Helper()
	b, err := os.ReadFile(filepath.Join(moduleRoot(tb), "testdata", "trends", "mixed", "golden.json"))
	if err != nil {
		tb.Fatalf("golden file (run /usr/bin/python3 testdata/trends/mixed/make_golden.py): %v", err)
	}
	var g mixedGolden
	if err := json.Unmarshal(b, &g); err != nil {
		tb.Fatal(err)
	}
	if len(g.Sets) < 5 {
		tb.Fatalf("golden file holds %d data sets, want at least 5", len(g.Sets))
	}
	return g
}

// Tolerances against statsmodels MixedLM (issue 10): 1e-4 relative on the
// fixed effects, 1e-3 on the variance components. The variance components
// are compared as statsmodels reports them: the variances of the
// between-person covariance matrix G (cov_re: intercept variance, slope
// variance) and the residual variance σ² (scale), each relative; and the
// covariance as the correlation G₁₂/√(G₁₁G₂₂), absolute (a covariance near
// zero has no useful relative error). The fixed effects' standard errors
// are compared, 1e-3 relative, with the GLS form √diag((Σ XᵀV⁻¹X)⁻¹) that
// the script computes in numpy at statsmodels' G and σ² (statsmodels' own
// bse_fe inverts the whole observed Hessian and differs by a few per cent;
// it is not a check of this method).
const (
	tolFixed    = 1e-4
	tolVariance = 1e-3
)

func rel(got, want float64) float64 { return math.Abs(got-want) / math.Abs(want) }

func TestControlNormAgainstStatsmodels(t *testing.T) {
	g := loadMixedGolden(t)
	for _, s := range g.Sets {
		t.Run(s.Name, func(t *testing.T) {
			obs := make([]ControlObservation, len(s.Value))
			for i := range obs {
				obs[i] = ControlObservation{Person: s.Person[i], AgeYears: s.AgeYears[i], Value: s.Value[i]}
			}
			n := FitControlNorm(obs, NormOptions{Min: NormMinimums{Persons: 2, PersonsThree: 1}})
			if !n.Known {
				t.Fatalf("no norm: %s", n.Reason)
			}
			if math.Abs(n.CentreAge-s.Centre) > 1e-9 {
				t.Fatalf("centre age %v, statsmodels data centred at %v", n.CentreAge, s.Centre)
			}
			checks := []struct {
				what      string
				got, want float64
				tol       float64
			}{
				{"intercept β₀", n.Intercept.Value, s.FE[0], tolFixed},
				{"slope β₁", n.PerYear.Value, s.FE[1], tolFixed},
				{"SE(β₀)", n.Intercept.SE, s.BSEGLS[0], tolVariance},
				{"SE(β₁)", n.PerYear.SE, s.BSEGLS[1], tolVariance},
				{"G₁₁ intercept variance", n.Cov[0], s.CovRE[0], tolVariance},
				{"G₂₂ slope variance", n.Cov[3], s.CovRE[3], tolVariance},
				{"σ² scale", n.Scale, s.Scale, tolVariance},
			}
			for _, c := range checks {
				r := rel(c.got, c.want)
				t.Logf("%s: relative difference %.2g", c.what, r)
				if !(r <= c.tol) {
					t.Errorf("%s = %.10g, statsmodels %.10g: relative difference %.2g above %g", c.what, c.got, c.want, r, c.tol)
				}
			}
			wantCorr := s.CovRE[1] / math.Sqrt(s.CovRE[0]*s.CovRE[3])
			if d := math.Abs(n.Correlation - wantCorr); !(d <= tolVariance) {
				t.Errorf("correlation = %.8f, statsmodels %.8f: difference %.2g above %g", n.Correlation, wantCorr, d, tolVariance)
			}
			// Same likelihood, same constants: the maximised REML log
			// likelihood matches statsmodels' llf (ours may be higher where
			// statsmodels stopped short of the optimum).
			if d := n.LogLik - s.LLF; d < -1e-6 || d > 1e-5 {
				t.Errorf("REML log likelihood %.10f, statsmodels %.10f", n.LogLik, s.LLF)
			}
			if math.Abs(n.ResidualSD-math.Sqrt(n.Scale)) > 1e-15 || math.Abs(n.SlopeSD-math.Sqrt(n.Cov[3])) > 1e-15 {
				t.Errorf("SDs %v %v do not match the variances %v %v", n.ResidualSD, n.SlopeSD, n.Scale, n.Cov[3])
			}
			lo, hi := n.PerYear.CILow, n.PerYear.CIHigh
			if w := TQuantile975(n.Persons-2) * n.PerYear.SE; math.Abs(hi-n.PerYear.Value-w) > 1e-12 || math.Abs(n.PerYear.Value-lo-w) > 1e-12 {
				t.Errorf("slope interval %v–%v is not β₁ ± t(0.975; %d)·SE", lo, hi, n.Persons-2)
			}
		})
	}
}

// obsLines builds control observations: person i has visits at ages
// first_i + 0, 1, … (first_i = 56 + i mod 25), with value = b0_i +
// slope·(age − 70) + e_ij, b0_i = 9.4 ± spread in the pattern +, −, −, +
// over each four persons (so the intercepts are uncorrelated with the ages).
func obsLines(persons int, visits func(i int) int, spread, slope float64, noise func(i, j int) float64) []ControlObservation {
	var obs []ControlObservation
	for i := 0; i < persons; i++ {
		first := 56 + float64(i%25)
		b0 := 9.4 + spread*[]float64{1, -1, -1, 1}[i%4]
		for j := 0; j < visits(i); j++ {
			age := first + float64(j)
			obs = append(obs, ControlObservation{Person: fmt.Sprintf("C%02d", i), AgeYears: age, Value: b0 + slope*(age-70) + noise(i, j)})
		}
	}
	return obs
}

// TestControlNormBoundary: every person starts on one common line and their
// residuals (e, −2e, e) over three yearly visits are orthogonal to their
// own line, so every person's own least-squares intercept and slope are
// exactly the common ones. The REML estimates of both between-person
// variances are then zero, on the boundary, where the model is ordinary
// least squares: σ̂² = Σr²/(N − 2). The fit must land there with finite
// figures and say so (synthetic ground truth).
func TestControlNormBoundary(t *testing.T) {
	const slope = -0.02
	pattern := []float64{1, -2, 1}
	obs := obsLines(24, func(int) int { return 3 }, 0, slope, func(i, j int) float64 {
		return 0.1 * float64(1+i%3) * pattern[j]
	})
	n := FitControlNorm(obs, NormOptions{Marker: "pdr_frequency"})
	if !n.Known {
		t.Fatalf("no norm: %s", n.Reason)
	}
	if n.SlopeSD > 1e-3*n.ResidualSD {
		t.Errorf("slope SD %g, want ≈ 0 (residual SD %g)", n.SlopeSD, n.ResidualSD)
	}
	if !strings.Contains(n.Boundary, "slopes") {
		t.Errorf("boundary note %q does not name the slopes", n.Boundary)
	}
	if math.Abs(n.PerYear.Value-slope) > 1e-9 {
		t.Errorf("fixed slope %v, want %v", n.PerYear.Value, slope)
	}
	for _, v := range []float64{n.PerYear.SE, n.Intercept.SE, n.ResidualSD, n.InterceptSD, n.LogLik} {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			t.Fatalf("non-finite figure in %+v", n)
		}
	}
	// Residuals (e, −2e, e)·k, k = 0.1, 0.2, 0.3 by person.
	var ss float64
	for i := 0; i < 24; i++ {
		k := 0.1 * float64(1+i%3)
		ss += 6 * k * k
	}
	if want := math.Sqrt(ss / float64(len(obs)-2)); math.Abs(n.ResidualSD-want) > 1e-6*want {
		t.Errorf("residual SD %v, want %v", n.ResidualSD, want)
	}
	if n.InterceptSD > 1e-3*n.ResidualSD || !strings.Contains(n.Boundary, "intercepts") {
		t.Errorf("intercept SD %g, boundary %q: want ≈ 0 and named", n.InterceptSD, n.Boundary)
	}
}

func TestControlNormMinimums(t *testing.T) {
	none := func(int, int) float64 { return 0.01 }
	cases := []struct {
		name   string
		obs    []ControlObservation
		known  bool
		reason string
	}{
		{"19 persons with three visits", obsLines(19, func(int) int { return 3 }, 0.3, -0.02, none), false,
			"only 19 control persons with two or more comparable visits (19 with three or more): a norm needs at least 20 with two or more and 10 with three or more"},
		{"20 persons, 9 with three visits", obsLines(20, func(i int) int { return 2 + btoi(i < 9) }, 0.3, -0.02, none), false,
			"only 20 control persons with two or more comparable visits (9 with three or more): a norm needs at least 20 with two or more and 10 with three or more"},
		{"20 persons, 10 with three visits", obsLines(20, func(i int) int { return 2 + btoi(i < 10) }, 0.3, -0.02, func(i, j int) float64 { return 0.1 * math.Sin(float64(3*i+5*j)) }), true, ""},
		{"one person", obsLines(1, func(int) int { return 5 }, 0.3, -0.02, none), false,
			"only 1 control person with two or more comparable visits (1 with three or more): a norm needs at least 20 with two or more and 10 with three or more"},
		{"no observations", nil, false,
			"only 0 control persons with two or more comparable visits (0 with three or more): a norm needs at least 20 with two or more and 10 with three or more"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			n := FitControlNorm(c.obs, NormOptions{})
			if n.Known != c.known || n.Reason != c.reason {
				t.Errorf("known %v reason %q, want %v %q", n.Known, n.Reason, c.known, c.reason)
			}
		})
	}
}

// TestControlNormInput: visits on one day count once towards a person's
// distinct ages, non-finite values are left out, and the basis names
// persons, visits and the date.
func TestControlNormInput(t *testing.T) {
	obs := obsLines(24, func(int) int { return 3 }, 0.3, -0.02, func(i, j int) float64 { return 0.1 * math.Sin(float64(3*i+5*j)) })
	// Person C00's three visits all on one day: one age.
	for k := range obs {
		if obs[k].Person == "C00" {
			obs[k].AgeYears = 56
		}
	}
	obs = append(obs, ControlObservation{Person: "C01", AgeYears: math.NaN(), Value: 9}, ControlObservation{Person: "C02", AgeYears: 60, Value: math.Inf(1)})
	n := FitControlNorm(obs, NormOptions{FittedOn: "2026-12-03"})
	if !n.Known {
		t.Fatalf("no norm: %s", n.Reason)
	}
	if n.Persons != 24 || n.Visits != 72 || n.PersonsTwo != 23 || n.PersonsThree != 23 {
		t.Errorf("persons %d visits %d two %d three %d, want 24 72 23 23", n.Persons, n.Visits, n.PersonsTwo, n.PersonsThree)
	}
	if got, want := n.Basis(), "clinic controls: 24 persons, 72 visits, fitted 2026-12-03"; got != want {
		t.Errorf("basis %q, want %q", got, want)
	}
	lo, hi := n.ControlSlopeRange()
	if h := 1.96 * math.Hypot(n.SlopeSD, n.PerYear.SE); math.Abs(hi-lo-2*h) > 1e-12 {
		t.Errorf("control slope range %v–%v, want β₁ ± %v", lo, hi, h)
	}
}

func btoi(b bool) int {
	if b {
		return 1
	}
	return 0
}

// BenchmarkFitControlNorm fits one series over the balanced golden cohort
// (24 persons, 96 visits).
func BenchmarkFitControlNorm(b *testing.B) {
	g := loadMixedGolden(b)
	s := g.Sets[0]
	obs := make([]ControlObservation, len(s.Value))
	for i := range obs {
		obs[i] = ControlObservation{Person: s.Person[i], AgeYears: s.AgeYears[i], Value: s.Value[i]}
	}
	b.ReportAllocs()
	for b.Loop() {
		if n := FitControlNorm(obs, NormOptions{}); !n.Known {
			b.Fatal(n.Reason)
		}
	}
}

// TestControlNormHostileInput: degenerate data give a norm that is not
// Known, or a finite one, never a panic or NaN.
func TestControlNormHostileInput(t *testing.T) {
	flat := obsLines(24, func(int) int { return 3 }, 0, 0, func(int, int) float64 { return 0 })
	huge := obsLines(24, func(int) int { return 3 }, 0.3, -0.02, func(i, j int) float64 { return 1e150 * float64((i+j)%2) })
	oneVisit := obsLines(40, func(int) int { return 1 }, 0.3, -0.02, func(int, int) float64 { return 0 })
	sameDay := obsLines(24, func(int) int { return 3 }, 0.3, -0.02, func(int, int) float64 { return 0 })
	for k := range sameDay {
		sameDay[k].AgeYears = 70
	}
	cases := []struct {
		name   string
		obs    []ControlObservation
		min    NormMinimums
		reason string
	}{
		{"every value equal", flat, NormMinimums{}, "the controls' values have no spread about their lines: no norm"},
		{"huge values", huge, NormMinimums{}, ""},
		{"one visit each", oneVisit, NormMinimums{}, "only 0 control persons with two or more comparable visits (0 with three or more): a norm needs at least 20 with two or more and 10 with three or more"},
		{"every visit at one age", sameDay, NormMinimums{}, "only 0 control persons with two or more comparable visits (0 with three or more): a norm needs at least 20 with two or more and 10 with three or more"},
		{"two persons, minimums of one", obsLines(2, func(int) int { return 4 }, 0.3, -0.02, func(i, j int) float64 { return 0.1 * float64(j%2) }), NormMinimums{Persons: 1, PersonsThree: 1},
			"only 2 control persons with two or more comparable visits (2 with three or more): a norm needs at least 3 with two or more and 1 with three or more"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			n := FitControlNorm(c.obs, NormOptions{Min: c.min})
			if n.Known {
				for _, v := range []float64{n.PerYear.Value, n.PerYear.SE, n.SlopeSD, n.ResidualSD, n.Correlation} {
					if math.IsNaN(v) || math.IsInf(v, 0) {
						t.Fatalf("known norm with a non-finite figure: %+v", n)
					}
				}
				return
			}
			if c.reason != "" && n.Reason != c.reason {
				t.Errorf("reason %q, want %q", n.Reason, c.reason)
			}
		})
	}
}

// TestControlNormShift: adding a constant to every value moves only the
// intercept (the model's intercept absorbs it). Tolerance 1e-6 relative:
// the optimiser stops when −2ℓ_R changes by under 1e-11, which leaves the
// parameters about 1e-8 apart from one start to another.
func TestControlNormShift(t *testing.T) {
	g := loadMixedGolden(t)
	s := g.Sets[1]
	fit := func(shift float64) ControlNorm {
		obs := make([]ControlObservation, len(s.Value))
		for i := range obs {
			obs[i] = ControlObservation{Person: s.Person[i], AgeYears: s.AgeYears[i], Value: s.Value[i] + shift}
		}
		return FitControlNorm(obs, NormOptions{})
	}
	a, b := fit(0), fit(1e4)
	if !a.Known || !b.Known {
		t.Fatalf("%s / %s", a.Reason, b.Reason)
	}
	for _, c := range [][2]float64{{a.Intercept.Value + 1e4, b.Intercept.Value}, {a.PerYear.Value, b.PerYear.Value}, {a.Scale, b.Scale}, {a.Cov[3], b.Cov[3]}} {
		if rel(c[1], c[0]) > 1e-6 {
			t.Errorf("shifted fit %v, want %v", c[1], c[0])
		}
	}
}
