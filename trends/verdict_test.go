package trends

import (
	"math"
	"strings"
	"testing"

	"longwave/metrics"
)

// knownNorm is a hand-made control norm (synthetic ground truth for the
// arithmetic): expected slope −0.02 Hz/y with SE 0.005, slope SD 0.03 Hz/y,
// residual SD 0.2 Hz, controls aged 55–85.
func knownNorm(marker string) ControlNorm {
	return ControlNorm{
		Known: true, Marker: marker, Persons: 24, Visits: 96, FittedOn: "2026-12-03",
		AgeMin: 55, AgeMax: 85, CentreAge: 70,
		PerYear: Estimate{Value: -0.02, SE: 0.005, CILow: -0.03, CIHigh: -0.01},
		SlopeSD: 0.03, ResidualSD: 0.2, Scale: 0.04,
	}
}

// TestFitPatientSlopeHandWorked: three yearly visits 9.5, 9.4, 9.2 Hz with
// the clinic's residual SD 0.2 Hz and no per-visit SEs. Equal weights
// 1/0.04 = 25, Sxx = 25·2 = 50, b = −0.15 Hz/y; residuals −1/60, 1/30,
// −1/60 give φ = 25·(1/600)/1 = 0.0417 < 1, so SE = √(1/50) = 0.14142
// (the clinic's noise, σ/√Σ(t − t̄)²). Arithmetic by hand.
func TestFitPatientSlopeHandWorked(t *testing.T) {
	visits := []PatientVisit{{AgeYears: 70, Value: 9.5}, {AgeYears: 71, Value: 9.4}, {AgeYears: 72, Value: 9.2}}
	p := FitPatientSlope(visits, knownNorm(metrics.PDRFrequency))
	if !p.Known || p.Weighted {
		t.Fatalf("slope %+v", p)
	}
	const tol = 1e-12
	if !near(p.PerYear, -0.15, tol) || !near(p.SE, math.Sqrt(1.0/50), tol) || !near(p.Phi, 25.0/600, tol) {
		t.Errorf("b %v SE %v φ %v, want −0.15, %v, %v", p.PerYear, p.SE, p.Phi, math.Sqrt(1.0/50), 25.0/600)
	}
	if !near(p.CILow, -0.15-1.96*math.Sqrt(1.0/50), tol) || !strings.Contains(p.Noise, "clinic's visit-to-visit noise") {
		t.Errorf("interval %v–%v noise %q", p.CILow, p.CIHigh, p.Noise)
	}

	// A noisier patient: 9.5, 9.0, 9.3 gives b = −0.1, residuals 2/15,
	// −4/15, 2/15, φ = 25·(24/225)/1 = 8/3 > 1, so SE = √(φ/50).
	noisy := FitPatientSlope([]PatientVisit{{AgeYears: 70, Value: 9.5}, {AgeYears: 71, Value: 9.0}, {AgeYears: 72, Value: 9.3}}, knownNorm(metrics.PDRFrequency))
	if !near(noisy.PerYear, -0.1, tol) || !near(noisy.Phi, 8.0/3, 1e-9) || !near(noisy.SE, math.Sqrt(8.0/3/50), 1e-9) || !strings.Contains(noisy.Noise, "patient's own residuals") {
		t.Errorf("noisy patient %+v", noisy)
	}

	// Without a norm: ordinary least squares, SE from the residuals with
	// t(0.975; 1) = 12.706.
	ols := FitPatientSlope(visits, ControlNorm{})
	want := FitSlope([]float64{0, 1, 2}, []float64{9.5, 9.4, 9.2})
	if !near(ols.PerYear, want.PerYear, tol) || !near(ols.SE, want.SE, 1e-12) || !near(ols.CIHigh, want.CIHigh, 1e-9) {
		t.Errorf("without a norm %+v, want FitSlope's %+v", ols, want)
	}
}

// TestFitPatientSlopeWeights: a visit with a wide own interval counts less.
// Controls' residual SD 0.2 with per-visit SE 0.1 leaves a visit-to-visit
// variance 0.04 − 0.01 = 0.03; the patient's visits have SE 0.1, 0.1 and
// 0.5, so their variances are 0.04, 0.04, 0.28 and the weighted slope
// follows the first two more than ordinary least squares does.
func TestFitPatientSlopeWeights(t *testing.T) {
	n := knownNorm(metrics.PDRFrequency)
	n.VisitSE, n.HasVisitSE = 0.1, true
	visits := []PatientVisit{{AgeYears: 70, Value: 9.5, SE: 0.1}, {AgeYears: 71, Value: 9.4, SE: 0.1}, {AgeYears: 72, Value: 8.6, SE: 0.5}}
	p := FitPatientSlope(visits, n)
	if !p.Weighted {
		t.Fatal("per-visit SEs not used")
	}
	// Weighted least squares by hand: w = 25, 25, 1/0.28.
	w := []float64{25, 25, 1 / 0.28}
	var sw, mt, my float64
	for i, v := range visits {
		sw += w[i]
		mt += w[i] * v.AgeYears
		my += w[i] * v.Value
	}
	mt, my = mt/sw, my/sw
	var sxx, sxy float64
	for i, v := range visits {
		sxx += w[i] * (v.AgeYears - mt) * (v.AgeYears - mt)
		sxy += w[i] * (v.AgeYears - mt) * (v.Value - my)
	}
	if !near(p.PerYear, sxy/sxx, 1e-12) {
		t.Errorf("weighted slope %v, want %v", p.PerYear, sxy/sxx)
	}
	if ols := FitSlope([]float64{0, 1, 2}, []float64{9.5, 9.4, 8.6}); !(p.PerYear > ols.PerYear) {
		t.Errorf("weighted slope %v not drawn towards the precise visits (OLS %v)", p.PerYear, ols.PerYear)
	}
}

func TestCompareSlope(t *testing.T) {
	slope := func(b, se float64) PatientSlope {
		return PatientSlope{Known: true, N: 4, PerYear: b, SE: se, CILow: b - 1.96*se, CIHigh: b + 1.96*se}
	}
	// √(0.03² + 0.005² + 0.03²) = 0.042720: the 1.96 limits of b − β̂₁ are
	// ±0.083732, i.e. b below −0.103732 or above 0.063732 Hz/y.
	cases := []struct {
		name     string
		marker   string
		p        PatientSlope
		age      float64
		text     string
		dir      Direction
		concern  bool
		extrapol bool
	}{
		{"PDR falling fast", metrics.PDRFrequency, slope(-0.2, 0.03), 72, SlopeDeclinesFaster, DirectionDown, true, false},
		{"PDR just inside", metrics.PDRFrequency, slope(-0.103, 0.03), 72, SlopeWithinControls, DirectionSteady, false, false},
		{"PDR just outside", metrics.PDRFrequency, slope(-0.1045, 0.03), 72, SlopeDeclinesFaster, DirectionDown, true, false},
		{"PDR rising", metrics.PDRFrequency, slope(0.07, 0.03), 72, SlopeRisesFaster, DirectionUp, false, false},
		{"theta/alpha rising is the worry", metrics.ThetaAlphaRatio, slope(0.07, 0.03), 72, SlopeRisesFaster, DirectionUp, true, false},
		{"theta/alpha falling", metrics.ThetaAlphaRatio, slope(-0.2, 0.03), 72, SlopeDeclinesFaster, DirectionDown, false, false},
		{"exponent has no worrying sign", metrics.AperiodicExponent, slope(-0.2, 0.03), 72, SlopeDeclinesFaster, DirectionDown, false, false},
		{"older than every control", metrics.PDRFrequency, slope(-0.02, 0.03), 90, SlopeWithinControls, DirectionSteady, false, true},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			v := CompareSlope(c.p, knownNorm(c.marker), c.age)
			if !v.Known || v.Text != c.text || v.Direction != c.dir || v.Concern != c.concern || v.Extrapolated != c.extrapol {
				t.Errorf("verdict %+v, want %q %s concern %v extrapolated %v", v, c.text, c.dir, c.concern, c.extrapol)
			}
			if v.Basis != "clinic controls: 24 persons, 96 visits, fitted 2026-12-03" || v.Advisory != AdvisoryVerdict {
				t.Errorf("basis %q advisory %q", v.Basis, v.Advisory)
			}
			if wantZ := (c.p.PerYear + 0.02) / math.Sqrt(0.03*0.03+0.005*0.005+0.03*0.03); !near(v.Z, wantZ, 1e-12) {
				t.Errorf("z %v, want %v", v.Z, wantZ)
			}
			if lo, hi := v.ControlRangeLow, v.ControlRangeHigh; !near(lo, -0.02-1.96*math.Hypot(0.03, 0.005), 1e-12) || !near(hi, -0.02+1.96*math.Hypot(0.03, 0.005), 1e-12) {
				t.Errorf("control range %v–%v", lo, hi)
			}
		})
	}
}

func TestCompareSlopeNoVerdict(t *testing.T) {
	two := FitPatientSlope([]PatientVisit{{AgeYears: 70, Value: 9.5}, {AgeYears: 71, Value: 9.4}}, knownNorm(metrics.PDRFrequency))
	v := CompareSlope(two, knownNorm(metrics.PDRFrequency), 70.5)
	if v.Known || v.Reason != "2 comparable visits: a verdict needs at least 3" || v.Direction != DirectionUnknown {
		t.Errorf("two visits: %+v", v)
	}
	sameDay := FitPatientSlope([]PatientVisit{{AgeYears: 70, Value: 9.5}, {AgeYears: 70, Value: 9.4}, {AgeYears: 70, Value: 9.3}}, knownNorm(metrics.PDRFrequency))
	if sameDay.Known || sameDay.Reason != "all comparable visits on one date: no slope" {
		t.Errorf("one date: %+v", sameDay)
	}
	few := FitControlNorm(nil, NormOptions{Marker: metrics.PDRFrequency})
	p := FitPatientSlope([]PatientVisit{{AgeYears: 70, Value: 9.5}, {AgeYears: 71, Value: 9.4}, {AgeYears: 72, Value: 9.2}}, few)
	v = CompareSlope(p, few, 71)
	if v.Known || !strings.HasPrefix(v.Reason, "no control model: only 0 control persons") || !strings.HasPrefix(v.Text, "no verdict: no control model") {
		t.Errorf("no norm: %+v", v)
	}
}

// TestWorryingDirection: every marker of package metrics has its sign
// decided (common practice: slowing moves the PDR down and power from alpha
// and beta to delta and theta; reactivity falls), and a name that is no
// marker has none.
func TestWorryingDirection(t *testing.T) {
	want := map[string]Direction{
		metrics.PDRFrequency: DirectionDown, metrics.PDRCentroid: DirectionDown, metrics.PDRLeft: DirectionDown,
		metrics.PDRRight: DirectionDown, metrics.PDRAsymmetry: DirectionUnknown, metrics.AlphaReactivity: DirectionDown,
		metrics.AlphaRatio: DirectionUp, metrics.ThetaAlphaRatio: DirectionUp, metrics.AperiodicExponent: DirectionUnknown,
		metrics.AperiodicOffset: DirectionUnknown, metrics.AperiodicR2: DirectionUnknown, metrics.RelDelta: DirectionUp,
		metrics.RelTheta: DirectionUp, metrics.RelAlpha: DirectionDown, metrics.RelBeta: DirectionDown,
		metrics.SlowingRatio: DirectionUp, metrics.FrontalPosteriorAlpha: DirectionUnknown, metrics.DrowsinessIndex: DirectionUnknown,
	}
	names := MarkerNames()
	if len(names) != len(want) {
		t.Fatalf("%d markers, the table here has %d", len(names), len(want))
	}
	for _, m := range names {
		if d, ok := want[m]; !ok || WorryingDirection(m) != d {
			t.Errorf("%s: worrying direction %s, want %s", m, WorryingDirection(m), d)
		}
	}
	if d := WorryingDirection("heart_rate"); d != DirectionUnknown {
		t.Errorf("unknown name: %s", d)
	}
}

// TestLiteratureNotes: only what REFERENCES.md section 2a allows, in its
// form: the lifespan figure with a per-year value labelled longwave's
// arithmetic (1 Hz over 20–81 y = 0.0164 Hz/y), direction-only notes
// elsewhere, nothing for markers it is silent on.
func TestLiteratureNotes(t *testing.T) {
	pdr := LiteratureNotes(metrics.PDRFrequency)
	if len(pdr) != 3 {
		t.Fatalf("%d PDR notes, want 3", len(pdr))
	}
	perYear := 0
	for _, n := range pdr {
		if n.Source == "" || n.Status != "abstract" || n.Advisory != AdvisoryAgeingNote || n.Population == "" {
			t.Errorf("note without source, status or advisory: %+v", n)
		}
		if n.HasPerYear {
			perYear++
			if !near(n.PerYear, -1.0/61, 1e-15) || !strings.Contains(n.PerYearNote, "longwave's arithmetic") || !strings.Contains(n.Population, "not the scalp posterior dominant rhythm") {
				t.Errorf("per-year note %+v", n)
			}
		}
	}
	if perYear != 1 {
		t.Errorf("%d notes with a per-year figure, want 1", perYear)
	}
	if ex := LiteratureNotes(metrics.AperiodicExponent); len(ex) != 1 || ex[0].HasPerYear || !strings.Contains(ex[0].Text, "direction only") {
		t.Errorf("aperiodic exponent notes %+v", ex)
	}
	for _, m := range []string{metrics.ThetaAlphaRatio, metrics.AlphaReactivity, metrics.RelDelta, metrics.AperiodicOffset} {
		if n := LiteratureNotes(m); n != nil {
			t.Errorf("%s: notes %+v, REFERENCES.md section 2a has none", m, n)
		}
	}
}
