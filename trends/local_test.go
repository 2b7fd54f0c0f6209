package trends

import (
	"errors"
	"fmt"
	"strings"
	"testing"
	"time"

	"longwave/metrics/clinic"
)

// Worked by hand: ages 60, 70, 80 y, PDR 10.0, 9.5, 9.3 Hz.
//
//	x̄ = 70, ȳ = 9.6, Sxx = 100 + 0 + 100 = 200
//	Sxy = (−10)(0.4) + 0 + (10)(−0.3) = −7 → b = −0.035 Hz/y, a = 9.6 + 0.035·70 = 12.05
//	residuals 0.05, −0.1, 0.05; SSE = 0.015; s² = 0.015/1, s = 0.1224745
//	t(0.975; 1) = 12.706 (t table)
//	at x₀ = 70: ŷ = 9.6, half-width = 12.706·0.1224745·√(1 + 1/3 + 0) = 12.706·√0.02 = 1.79690
//	→ PI [7.80310, 11.39690]
//	at x₀ = 80: ŷ = 9.25, half-width = 12.706·0.1224745·√(1 + 1/3 + 100/200) = 12.706·√(0.015·1.83333)
//	= 12.706·√0.0275 = 12.706·0.165831 = 2.10705 → PI [7.14295, 11.35705]
func TestPredictionWorkedExample(t *testing.T) {
	p, err := FitPrediction([]float64{60, 70, 80}, []float64{10, 9.5, 9.3})
	if err != nil {
		t.Fatal(err)
	}
	const tol = 2e-4 // the t table's three decimals times s·√… ≈ 0.14
	if !near(p.Slope, -0.035, 1e-12) || !near(p.Intercept, 12.05, 1e-10) || !near(p.ResidualSD, 0.1224745, 1e-7) || !near(p.Sxx, 200, 1e-10) {
		t.Errorf("fit %+v", p)
	}
	for _, tt := range []struct{ x0, yhat, lo, hi float64 }{
		{70, 9.6, 9.6 - 1.79690, 9.6 + 1.79690},
		{80, 9.25, 9.25 - 2.10705, 9.25 + 2.10705},
	} {
		y, lo, hi := p.At(tt.x0)
		if !near(y, tt.yhat, 1e-10) || !near(lo, tt.lo, tol) || !near(hi, tt.hi, tol) {
			t.Errorf("at %v y: %.5f [%.5f, %.5f], want %.5f [%.5f, %.5f] (by hand)", tt.x0, y, lo, hi, tt.yhat, tt.lo, tt.hi)
		}
	}
	for _, bad := range [][2][]float64{{{60, 70}, {9, 9}}, {{70, 70, 70}, {9, 9.5, 10}}} {
		if _, err := FitPrediction(bad[0], bad[1]); !errors.Is(err, ErrTooFewPoints) {
			t.Errorf("FitPrediction(%v): %v", bad[0], err)
		}
	}
}

// controls makes one control participant per age/value, each with a first
// comparable visit carrying the value and a later visit carrying value − 1
// (which must not enter the fit).
func controls(ages, values []float64) []clinic.PatientCourse {
	var out []clinic.PatientCourse
	for i := range ages {
		first := visitRec(int64(2*i+1), "2020-03-01", ages[i], values[i])
		later := visitRec(int64(2*i+2), "2021-03-01", ages[i]+1, values[i]-1)
		out = append(out, clinic.PatientCourse{
			Patient: clinic.Patient{ID: int64(i + 1), Code: fmt.Sprintf("LH-K%02d", i+1), Group: clinic.ControlGroup},
			Visits:  []clinic.VisitRecord{later, first},
		})
	}
	return out
}

// Against the numpy/scipy golden (testdata/trends/make_golden.py: polyfit
// line, interval by the same formula with scipy.stats.t.ppf; statsmodels is
// not installed on this machine, so its get_prediction was not used).
func TestLocalRangesGolden(t *testing.T) {
	g := loadGolden(t).Prediction
	pts := controls(g.Ages, g.Values)
	// A patient outside the control group and a control processed with old
	// settings must both stay out.
	other := controls([]float64{70}, []float64{2})
	other[0].Patient.Group = "patient"
	old := controls([]float64{70}, []float64{2})
	old[0].Patient.Group = "Control"
	for i := range old[0].Visits {
		old[0].Visits[i].SettingsVersion = "v0"
	}
	pts = append(pts, other[0], old[0])
	l := BuildLocalRanges(pts, LocalOptions{SettingsVersion: testVersion, SettingsHash: testHash})
	if l.Controls != len(g.Ages)+1 || l.Label != LocalLabel || l.Advisory != AdvisoryLocal {
		t.Errorf("local ranges: %d controls label %q", l.Controls, l.Label)
	}
	var m *LocalModel
	for i := range l.Models {
		if l.Models[i].Marker == "pdr_frequency" {
			m = &l.Models[i]
		}
	}
	if m == nil || !m.Enough || m.Controls != len(g.Ages) {
		t.Fatalf("pdr model %+v", m)
	}
	p := m.Prediction
	const lsTol = 1e-9 // least squares on 25 points, ages ~70: relative
	for _, c := range []struct {
		what      string
		got, want float64
		tol       float64
	}{
		{"intercept", p.Intercept, g.Intercept, lsTol},
		{"slope", p.Slope, g.Slope, lsTol},
		{"residual sd", p.ResidualSD, g.ResidualSD, lsTol},
		{"mean age", p.MeanAge, g.MeanAge, lsTol},
		{"sxx", p.Sxx, g.Sxx, lsTol},
		{"t", p.T, g.T975, quantileTol},
	} {
		if !near(c.got, c.want, c.tol*max(1, abs(c.want))) {
			t.Errorf("%s = %.12g, want %.12g", c.what, c.got, c.want)
		}
	}
	for _, at := range g.At {
		y, lo, hi := p.At(at.Age)
		if !near(y, at.YHat, lsTol*10) || !near(lo, at.Lower, quantileTol*10) || !near(hi, at.Upper, quantileTol*10) {
			t.Errorf("at %v y: %.9f [%.9f, %.9f], want %.9f [%.9f, %.9f]", at.Age, y, lo, hi, at.YHat, at.Lower, at.Upper)
		}
		ck := l.Check("pdr_frequency", "posterior", "closed", at.Age, true, at.Upper+0.01, true)
		if !ck.Known || ck.Position != PositionAbove {
			t.Errorf("check above the interval at %v: %+v", at.Age, ck)
		}
		if out := at.Age < p.AgeMin || at.Age > p.AgeMax; ck.Extrapolated != out || (out && !strings.Contains(ck.Note, "extrapolated")) {
			t.Errorf("at %v y (controls %v–%v): extrapolated %v note %q", at.Age, p.AgeMin, p.AgeMax, ck.Extrapolated, ck.Note)
		}
	}
	if ck := l.Check("pdr_frequency", "posterior", "closed", 70, false, 9, true); ck.Known || !strings.Contains(ck.Reason, "age unknown") {
		t.Errorf("unknown age: %+v", ck)
	}
	if ck := l.Check("alpha_reactivity", "posterior", "open", 70, true, 0.5, true); ck.Known || ck.Reason == "" {
		t.Errorf("marker without controls: %+v", ck)
	}
}

func abs(v float64) float64 {
	if v < 0 {
		return -v
	}
	return v
}

func TestLocalRangesNeedTwentyControls(t *testing.T) {
	g := loadGolden(t).Prediction
	for _, tt := range []struct {
		n      int
		enough bool
		reason string
	}{
		{12, false, "only 12 controls: at least 20 needed"},
		{19, false, "only 19 controls: at least 20 needed"},
		{20, true, ""},
		{21, true, ""},
	} {
		l := BuildLocalRanges(controls(g.Ages[:tt.n], g.Values[:tt.n]), LocalOptions{SettingsVersion: testVersion, SettingsHash: testHash})
		m := l.Models[0]
		if m.Enough != tt.enough || m.Reason != tt.reason {
			t.Errorf("%d controls: enough %v reason %q, want %v %q", tt.n, m.Enough, m.Reason, tt.enough, tt.reason)
		}
		ck := l.Check(m.Marker, m.Region, m.State, 70, true, 9.5, true)
		if ck.Known != tt.enough || (!tt.enough && ck.Reason != tt.reason) {
			t.Errorf("%d controls: check %+v", tt.n, ck)
		}
	}
}

// The course offers the local range beside the literature range.
func TestCourseWithLocalRanges(t *testing.T) {
	g := loadGolden(t).Prediction
	l := BuildLocalRanges(controls(g.Ages, g.Values), LocalOptions{SettingsVersion: testVersion, SettingsHash: testHash})
	c := BuildCourse(clinic.Patient{Code: "LH-0417"}, []clinic.VisitRecord{visitRec(1, "2024-01-10", 72, 9.1)},
		CourseOptions{Ranges: literatureRanges(t), LocalRanges: l, SettingsVersion: testVersion, SettingsHash: testHash, Today: time.Now()})
	pt := c.Series[0].Points[0]
	if !pt.Local.Known || pt.Local.Label != "local" || !pt.Local.Placed || len(pt.Literature.Matches) == 0 {
		t.Errorf("point %+v", pt)
	}
}
