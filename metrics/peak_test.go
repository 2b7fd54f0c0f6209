package metrics

import (
	"math"
	"strings"
	"testing"
)

// peakModel is 10·f^−1.5 µV²/Hz times a Gaussian bump in log10 power
// (height h at centre c, SD sd Hz).
func peakModel(f, c, h, sd float64) float64 {
	return 10 * math.Pow(math.Max(f, 0.25), -1.5) * math.Pow(10, h*math.Exp(-0.5*math.Pow((f-c)/sd, 2)))
}

// spectrumWithPeak samples peakModel on the 0.25 Hz grid to 62.5 Hz.
func spectrumWithPeak(c, h, sd float64) ([]float64, []float64, SpectrumFit) {
	var f, p []float64
	for k := 0; k <= 250; k++ {
		fk := 0.25 * float64(k)
		f = append(f, fk)
		p = append(p, peakModel(fk, c, h, sd))
	}
	return f, p, SpectrumFit{Offset: 1, Exponent: 1.5}
}

// trueMaximum is the model's local maximum near c, by a 0.0001 Hz search:
// on a falling background it lies below the bump's centre, and that
// maximum is what the PDR is (the largest peak of the spectrum).
func trueMaximum(c, h, sd float64) float64 {
	best, bestF := 0.0, 0.0
	for f := c - 1.5; f <= c+1.5; f += 1e-4 {
		if v := peakModel(f, c, h, sd); v > best {
			best, bestF = v, f
		}
	}
	return bestF
}

func TestFindPeak(t *testing.T) {
	ps := V1().Peak
	cases := []struct {
		name     string
		centre   float64
		height   float64
		sd       float64
		distinct bool
		found    bool
		reason   string
	}{
		{"on-bin peak", 10, 0.5, 0.8, true, true, ""},
		{"off-bin peak", 9.1, 0.5, 0.8, true, true, ""},
		{"narrow off-bin peak", 10.63, 0.8, 0.5, true, true, ""},
		{"slow rhythm", 6.3, 0.4, 0.8, true, true, ""},
		{"low bump below the margin", 10, 0.09, 0.5, false, true, "needs 0.1"},
		{"no peak at all", 10, 0, 1, false, false, "no peak in 5–14 Hz"},
	}
	for _, c := range cases {
		f, p, fit := spectrumWithPeak(c.centre, c.height, c.sd)
		got := findPeak(f, p, fit, ps)
		if got.Distinct != c.distinct || got.Found != c.found {
			t.Errorf("%s: distinct %v found %v (%s), want %v %v", c.name, got.Distinct, got.Found, got.Reason, c.distinct, c.found)
			continue
		}
		// Smoothing (11 bins, order 5) and the three-point parabola keep
		// the maximum within a few hundredths of a Hz.
		const tolHz = 0.03
		if want := trueMaximum(c.centre, c.height, c.sd); c.distinct && math.Abs(got.Hz-want) > tolHz {
			t.Errorf("%s: peak at %.3f Hz, want the maximum %.3f ± %g", c.name, got.Hz, want, tolHz)
		}
		if c.reason != "" && !strings.Contains(got.Reason, c.reason) {
			t.Errorf("%s: reason %q, want it to say %q", c.name, got.Reason, c.reason)
		}
	}
}

func TestBandPowerAndCentroid(t *testing.T) {
	f := make([]float64, 201)
	p := make([]float64, 201)
	for k := range f {
		f[k] = 0.25 * float64(k)
		p[k] = 2
	}
	// Constant 2 µV²/Hz: the [1, 4) band holds the bins 1.00…3.75, 12 of
	// them, 0.25 Hz each: 6 µV².
	if got := bandPower(f, p, Band{1, 4}); math.Abs(got-6) > 1e-12 {
		t.Errorf("band power %g, want 6", got)
	}
	// A spectrum symmetric about 10 Hz has its centre of gravity there.
	for k := range p {
		p[k] = math.Exp(-math.Pow(f[k]-10, 2))
	}
	if got, ok := centroid(f, p, Band{7, 13}); !ok || math.Abs(got-10) > 1e-9 {
		t.Errorf("centroid %g (%v), want 10", got, ok)
	}
}
