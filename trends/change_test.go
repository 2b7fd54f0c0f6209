package trends

import (
	"math"
	"strings"
	"testing"
)

// tableTol: handbook t tables print three decimals.
const tableTol = 0.0005

// Student's t, 0.975 quantile, against a published t table (handbook values
// to three decimals; e.g. any statistics textbook's table of critical values).
func TestTQuantileTable(t *testing.T) {
	tests := []struct {
		df   int
		want float64
	}{
		{1, 12.706}, {2, 4.303}, {5, 2.571}, {10, 2.228}, {30, 2.042},
	}
	for _, tt := range tests {
		if got := TQuantile975(tt.df); !near(got, tt.want, tableTol) {
			t.Errorf("TQuantile975(%d) = %.5f, want %.3f (t table)", tt.df, got, tt.want)
		}
	}
}

// quantileTol: relative difference of gonum's distuv.StudentsT.Quantile
// (an inverse regularised incomplete beta) from scipy.stats.t.ppf; gonum's
// iteration stops near 4e-9 relative for df ≈ 40 (seen), far below the
// three decimals any use here needs.
const quantileTol = 2e-8

func TestTQuantileGolden(t *testing.T) {
	g := loadGolden(t)
	for _, c := range g.T975 {
		if got := TQuantile975(c.DF); !near(got, c.T, quantileTol*c.T) {
			t.Errorf("TQuantile975(%d) = %.12f, want %.12f (scipy.stats.t.ppf)", c.DF, got, c.T)
		}
	}
}

// handTol: the worked example below is carried to five decimals.
const handTol = 5e-5

// Worked by hand: x = 0, 1, 2, 3 years, y = 10.0, 9.8, 9.7, 9.3 Hz.
//
//	x̄ = 1.5, ȳ = 9.7, Sxx = 2.25 + 0.25 + 0.25 + 2.25 = 5
//	Sxy = (−1.5)(0.3) + (−0.5)(0.1) + (0.5)(0) + (1.5)(−0.4) = −1.1
//	b = −1.1/5 = −0.22 Hz/year, a = 9.7 + 0.22·1.5 = 10.03
//	residuals −0.03, −0.01, 0.11, −0.07; SSE = 0.018; s² = 0.018/2 = 0.009
//	SE(b) = √(0.009/5) = √0.0018 = 0.0424264
//	t(0.975; 2) = 4.303 (t table)
//	CI = −0.22 ± 4.303·0.0424264 = −0.22 ± 0.18256 → [−0.40256, −0.03744]
func TestFitSlopeWorkedExample(t *testing.T) {
	s := FitSlope([]float64{0, 1, 2, 3}, []float64{10, 9.8, 9.7, 9.3})
	if !s.Known {
		t.Fatalf("not known: %s", s.Reason)
	}
	checks := []struct {
		name      string
		got, want float64
	}{
		{"slope", s.PerYear, -0.22}, {"intercept", s.Intercept, 10.03}, {"SE", s.SE, 0.0424264},
		{"t", s.T, 4.303}, {"CI low", s.CILow, -0.40256}, {"CI high", s.CIHigh, -0.03744},
	}
	for _, c := range checks {
		tol := handTol
		if c.name == "t" {
			tol = tableTol // the t table gives three decimals
		}
		if !near(c.got, c.want, tol) {
			t.Errorf("%s = %.6f, want %.5f (by hand)", c.name, c.got, c.want)
		}
	}
	if s.DF != 2 || s.N != 4 {
		t.Errorf("n %d df %d, want 4 and 2", s.N, s.DF)
	}
}

// Against numpy.polyfit and scipy.stats.linregress (testdata/trends/make_golden.py),
// with x from civil dates as days/365.25 — this also checks the date arithmetic.
func TestComputeChangeGolden(t *testing.T) {
	// Least squares in double precision on ≤ 10 points: lsTol relative;
	// the t quantile and the interval inherit quantileTol.
	const lsTol = 1e-11
	g := loadGolden(t)
	for _, c := range g.Slopes {
		var pts []ChangePoint
		for i, d := range c.Dates {
			pts = append(pts, ChangePoint{VisitID: int64(i + 1), Date: d, Value: c.Values[i]})
		}
		ch := ComputeChange(pts, Reliability{}, false, ExpectedRate{})
		s := ch.Slope
		if !s.Known {
			t.Errorf("%s: slope not known: %s", c.Name, s.Reason)
			continue
		}
		for _, chk := range []struct {
			what      string
			got, want float64
			tol       float64
		}{
			{"slope vs polyfit", s.PerYear, c.PolyfitSlope, lsTol},
			{"intercept vs polyfit", s.Intercept, c.PolyfitIntercept, lsTol},
			{"slope vs linregress", s.PerYear, c.LinregressSlope, lsTol},
			{"stderr vs linregress", s.SE, c.LinregressStderr, lsTol},
			{"t vs t.ppf", s.T, c.T975, quantileTol},
			{"CI low", s.CILow, c.CILow, quantileTol},
			{"CI high", s.CIHigh, c.CIHigh, quantileTol},
			{"years", ch.Years, c.Years[len(c.Years)-1], lsTol},
		} {
			if !near(chk.got, chk.want, chk.tol*math.Max(1, math.Abs(chk.want))) {
				t.Errorf("%s: %s = %.12g, want %.12g", c.Name, chk.what, chk.got, chk.want)
			}
		}
		if want := c.Values[len(c.Values)-1] - c.Values[0]; !near(ch.FromBaseline, want, 1e-12) {
			t.Errorf("%s: from baseline %v, want %v", c.Name, ch.FromBaseline, want)
		}
	}
}

func TestFitSlopeTooFew(t *testing.T) {
	for _, n := range []int{0, 1, 2} {
		x, y := make([]float64, n), make([]float64, n)
		for i := range x {
			x[i], y[i] = float64(i), 9
		}
		s := FitSlope(x, y)
		if s.Known || !strings.Contains(s.Reason, "at least 3") {
			t.Errorf("%d points: known %v reason %q", n, s.Known, s.Reason)
		}
	}
	if s := FitSlope([]float64{1, 1, 1}, []float64{9, 9.5, 10}); s.Known {
		t.Error("three points on one date: slope known")
	}
}

// Jacobson & Truax (1991): SE = SD·√(1 − r), S_diff = √2·SE,
// RC = (x₂ − x₁)/S_diff, reliable when |RC| > 1.96. Check values from
// REFERENCES.md section 2 (arithmetic on that formula):
//
//	SD = 1, r = 0.5: SE = √0.5 = 0.70711, S_diff = √2·0.70711 = 1.0, threshold 1.96
//	SD = 0.57, r = 0.84: SE = 0.57·0.4 = 0.228, S_diff = 0.32244, threshold 0.63198 Hz
func TestReliableChangeIndexWorkedExamples(t *testing.T) {
	const tol = 5e-6
	tests := []struct {
		sd, r, x1, x2        float64
		sdiff, threshold, rc float64
		reliable             bool
	}{
		{1, 0.5, 0, 1.5, 1.0, 1.96, 1.5, false},
		{1, 0.5, 0, 2.0, 1.0, 1.96, 2.0, true},
		{0.57, 0.84, 9.5, 9.0, 0.32244, 0.63198, -0.5 / 0.32244, false},
		{0.57, 0.84, 9.5, 8.8, 0.32244, 0.63198, -0.7 / 0.32244, true},
		{0.57, 0.84, 9.5, 9.5 - 0.63198, 0.32244, 0.63198, -1.96, false}, // at the threshold: not above
	}
	for _, tt := range tests {
		got := ReliableChangeIndex(tt.x1, tt.x2, Reliability{SD: tt.sd, R: tt.r})
		if !got.Known {
			t.Fatalf("SD %v r %v: not known: %s", tt.sd, tt.r, got.Reason)
		}
		if !near(got.SDiff, tt.sdiff, tol) || !near(got.Threshold, tt.threshold, tol) || !near(got.RC, tt.rc, 1e-4) {
			t.Errorf("SD %v r %v x %v→%v: S_diff %.6f threshold %.6f RC %.5f, want %.5f %.5f %.5f",
				tt.sd, tt.r, tt.x1, tt.x2, got.SDiff, got.Threshold, got.RC, tt.sdiff, tt.threshold, tt.rc)
		}
		if got.Reliable != tt.reliable {
			t.Errorf("SD %v r %v x %v→%v: reliable %v, want %v", tt.sd, tt.r, tt.x1, tt.x2, got.Reliable, tt.reliable)
		}
	}
	for _, bad := range []Reliability{{SD: 0, R: 0.8}, {SD: -1, R: 0.8}, {SD: 1, R: 1}, {SD: 1, R: -0.1}, {SD: 1, R: math.NaN()}} {
		if got := ReliableChangeIndex(9, 8, bad); got.Known || got.Reason == "" {
			t.Errorf("SD %v r %v: known %v reason %q, want refused", bad.SD, bad.R, got.Known, got.Reason)
		}
	}
}

func TestDefaultReliabilityIsProvisional(t *testing.T) {
	rel, ok := findReliability(DefaultReliability(), "pdr_frequency", "posterior", "closed")
	if !ok || !rel.Provisional || rel.SD != 0.57 || rel.R != 0.84 ||
		!strings.Contains(rel.RSource, "Salinsky") || !strings.Contains(rel.SDSource, "1989") || !strings.Contains(rel.Note, "provisional") {
		t.Errorf("default PDR reliability %+v", rel)
	}
	if _, ok := findReliability(DefaultReliability(), "theta_alpha_ratio", "posterior", "closed"); ok {
		t.Error("theta/alpha has a reliability row; REFERENCES.md gives none")
	}
}

func TestComputeChangeDirectionAndRCI(t *testing.T) {
	rel := DefaultReliability()[0]
	pts := func(vals ...float64) []ChangePoint {
		dates := []string{"2020-01-15", "2021-01-20", "2022-01-18", "2023-01-16"}
		var out []ChangePoint
		for i, v := range vals {
			out = append(out, ChangePoint{VisitID: int64(i + 1), Date: dates[i], Value: v})
		}
		return out
	}
	tests := []struct {
		name     string
		points   []ChangePoint
		relOK    bool
		dir      Direction
		reliable bool
		rciKnown bool
	}{
		{"none", nil, true, DirectionUnknown, false, false},
		{"one", pts(9.5), true, DirectionUnknown, false, false},
		{"two, small", pts(9.5, 9.2), true, DirectionSteady, false, true},
		{"two, reliable drop", pts(9.5, 8.7), true, DirectionDown, true, true},
		{"two, reliable rise", pts(9.0, 9.8), true, DirectionUp, true, true},
		{"two, no reliability", pts(9.5, 8.7), false, DirectionUnknown, false, false},
		{"four falling", pts(9.8, 9.5, 9.2, 8.9), true, DirectionDown, true, true},
		{"four scattered", pts(9.5, 9.9, 9.2, 9.6), true, DirectionSteady, false, true},
		{"three rising", pts(0.4, 0.5, 0.6), false, DirectionUp, false, false},
	}
	for _, tt := range tests {
		c := ComputeChange(tt.points, rel, tt.relOK, ExpectedRate{})
		if c.Direction != tt.dir {
			t.Errorf("%s: direction %s (%s), want %s", tt.name, c.Direction, c.DirectionBasis, tt.dir)
		}
		if c.Reliable.Known != tt.rciKnown || c.Reliable.Reliable != tt.reliable {
			t.Errorf("%s: RCI known %v reliable %v (%s), want %v %v", tt.name, c.Reliable.Known, c.Reliable.Reliable, c.Reliable.Reason, tt.rciKnown, tt.reliable)
		}
		if !c.Reliable.Known && c.Reliable.Reason == "" {
			t.Errorf("%s: RCI not known without a reason", tt.name)
		}
		if c.Reliable.Known && !c.Reliable.Provisional {
			t.Errorf("%s: default PDR reliability not marked provisional", tt.name)
		}
	}
}

// The expected yearly change for age: "faster than expected" only when the
// slope's 95 % CI excludes it. The slope of the worked example is −0.22 Hz/y
// with CI [−0.40256, −0.03744].
func TestExpectedForAge(t *testing.T) {
	pts := []ChangePoint{{1, "2020-01-01", 10}, {2, "2020-12-31", 9.8}, {3, "2021-12-31", 9.7}, {4, "2022-12-31", 9.3}}
	tests := []struct {
		exp     float64
		verdict string
		faster  bool
	}{
		{-0.01, ExpectedFaster, true},     // CI entirely below −0.01
		{-0.1, ExpectedConsistent, false}, // inside
		{-0.5, ExpectedSlower, false},     // CI entirely above −0.5
		{0, ExpectedFaster, true},         // expected no change, CI excludes 0
	}
	for _, tt := range tests {
		c := ComputeChange(pts, Reliability{}, false, ExpectedRate{Known: true, PerYear: tt.exp, Source: "clinic file"})
		if !c.Expected.Known || c.Expected.Verdict != tt.verdict || c.Expected.Faster != tt.faster {
			t.Errorf("expected %v/y, slope %.4f [%.4f, %.4f]: %+v, want %q", tt.exp, c.Slope.PerYear, c.Slope.CILow, c.Slope.CIHigh, c.Expected, tt.verdict)
		}
	}
	c := ComputeChange(pts, Reliability{}, false, ExpectedRate{})
	if c.Expected.Known || c.Expected.Reason == "" {
		t.Errorf("no expected rate: %+v", c.Expected)
	}
	c = ComputeChange(pts[:2], Reliability{}, false, ExpectedRate{Known: true, PerYear: -0.01})
	if c.Expected.Known || !strings.Contains(c.Expected.Reason, "no slope") {
		t.Errorf("two points with an expected rate: %+v", c.Expected)
	}
}

func TestComputeChangeSkipsBadDates(t *testing.T) {
	c := ComputeChange([]ChangePoint{{1, "2020-01-01", 9}, {2, "2020-13-01", 8}, {3, "2021-01-01", 9.2}}, Reliability{}, false, ExpectedRate{})
	if c.Points != 2 || c.LatestVisitID != 3 {
		t.Errorf("points %d latest %d, want 2 and 3", c.Points, c.LatestVisitID)
	}
}
