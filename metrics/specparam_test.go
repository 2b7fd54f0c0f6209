package metrics

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// Tolerances of the spectral fit against scipy.optimize.curve_fit.
const (
	// fitLinearTol: with no peaks every step is linear least squares, which
	// we solve in closed form and curve_fit iteratively; on one machine they
	// agreed to 1e-10, but curve_fit's iterations stop at slightly other
	// points on a processor of another kind (seen 1.06e-9 on the golden
	// regenerated there, .ci/golden_drift.py), so 1e-8: still six orders
	// below the fitParamTol of the iterative case.
	fitLinearTol = 1e-8
	// fitParamTol: with peaks the Gaussian fit is iterative in both (our
	// bounded Levenberg–Marquardt, scipy's trust-region reflective), each
	// stopping at its own tolerance near the same minimum; parameters then
	// agree to ~1e-8, and 1e-6 (absolute, in Hz and log10 power, and for R²
	// and the error) leaves room for the stopping rules.
	fitParamTol = 1e-6
	// fitExponentTol: FitSpectrum with its own peak search starts the
	// Gaussian fit from other guesses (and bounds) than the reference's true
	// peaks, but reaches the same minimum; its exponent then agrees to the
	// optimisers' stopping rules (seen 1.7e-10), so 1e-6.
	fitExponentTol = 1e-6
	// truthTol: the ground-truth requirement for the exponent of a
	// synthetic spectrum (noise 0.03 log10 SD), ±0.05.
	truthTol = 0.05
)

// goldenSpecSettings are the fit settings as the golden scripts write them.
type goldenSpecSettings struct {
	FreqLo        float64 `json:"freq_lo"`
	FreqHi        float64 `json:"freq_hi"`
	PeakWidthMin  float64 `json:"peak_width_min"`
	PeakWidthMax  float64 `json:"peak_width_max"`
	PeakThreshold float64 `json:"peak_threshold"`
	MinPeakHeight float64 `json:"min_peak_height"`
	MaxPeaks      int     `json:"max_peaks"`
}

func (s goldenSpecSettings) params() SpecParamSettings {
	return SpecParamSettings{FreqLo: s.FreqLo, FreqHi: s.FreqHi, PeakWidthMin: s.PeakWidthMin, PeakWidthMax: s.PeakWidthMax,
		PeakThreshold: s.PeakThreshold, MinPeakHeight: s.MinPeakHeight, MaxPeaks: s.MaxPeaks}
}

type specGolden struct {
	Settings goldenSpecSettings `json:"settings"`
	Cases    []struct {
		TrueExponent float64      `json:"true_exponent"`
		TruePeaks    [][3]float64 `json:"true_peaks"` // centre Hz, height, σ Hz
		Freqs        []float64    `json:"freqs"`
		PSD          []float64    `json:"psd"`
		Offset       float64      `json:"offset"`
		Exponent     float64      `json:"exponent"`
		R2           float64      `json:"r2"`
		Error        float64      `json:"error"`
		Peaks        [][3]float64 `json:"peaks"` // centre Hz, height, bandwidth 2σ Hz
	} `json:"cases"`
}

func (g specGolden) settings() SpecParamSettings { return g.Settings.params() }

// TestFitStagesGolden checks the model and the optimiser: the stages of
// FitSpectrum after the peak search, started from the true peaks, against
// the same stages solved by scipy 1.10.1 scipy.optimize.curve_fit (aperiodic
// line b − log10(f^χ); sum of Gaussians with bounds; np.percentile for the
// robust fit; np.corrcoef for R²), golden/specparam.json made by
// specparam_cases in testdata/metrics/make_golden.py.
func TestFitStagesGolden(t *testing.T) {
	var g specGolden
	readDSPGolden(t, "specparam.json", &g)
	s := g.settings()
	if len(g.Cases) != 12 {
		t.Fatalf("golden/specparam.json holds %d cases, want 12", len(g.Cases))
	}
	worst := map[string]float64{}
	for _, c := range g.Cases {
		name := fmt.Sprintf("exponent %g, %d peaks", c.TrueExponent, len(c.TruePeaks))
		f, y, err := fitInput(c.Freqs, c.PSD, s)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		b, chi := robustAperiodic(f, y)
		flat := make([]float64, len(f))
		for i := range f {
			flat[i] = y[i] - (b - chi*math.Log10(f[i]))
		}
		var guesses []peakParams
		for _, p := range c.TruePeaks {
			guesses = append(guesses, peakParams{c: p[0], h: p[1], sd: p[2]})
		}
		got := fitWithGuesses(f, y, flat, guesses, s)
		tol := fitParamTol
		if len(c.TruePeaks) == 0 {
			tol = fitLinearTol
		}
		check := func(what string, got, want float64) {
			e := math.Abs(got - want)
			worst[what] = math.Max(worst[what], e)
			if e > tol {
				t.Errorf("%s: %s = %.12g, want %.12g (curve_fit), |diff| %.3g > %g", name, what, got, want, e, tol)
			}
		}
		check("offset", got.Offset, c.Offset)
		check("exponent", got.Exponent, c.Exponent)
		check("r2", got.R2, c.R2)
		check("error", got.Error, c.Error)
		if len(got.Peaks) != len(c.Peaks) {
			t.Errorf("%s: %d peaks, want %d", name, len(got.Peaks), len(c.Peaks))
			continue
		}
		for i, p := range got.Peaks {
			check("peak centre", p.CenterHz, c.Peaks[i][0])
			check("peak height", p.Height, c.Peaks[i][1])
			check("peak width", p.WidthHz, c.Peaks[i][2])
		}
	}
	t.Logf("worst absolute differences: %v", worst)
}

// TestFitSpectrumGolden runs the whole method, peak search included, on the
// same spectra: the peaks found must be the true ones (count and centre
// within the resolution), the exponent must agree with the curve_fit
// reference within fitExponentTol and with the generating exponent within
// truthTol (issue 3, point 7).
func TestFitSpectrumGolden(t *testing.T) {
	var g specGolden
	readDSPGolden(t, "specparam.json", &g)
	s := g.settings()
	worstRef, worstTruth := 0.0, 0.0
	for _, c := range g.Cases {
		name := fmt.Sprintf("exponent %g, %d peaks", c.TrueExponent, len(c.TruePeaks))
		got, err := FitSpectrum(c.Freqs, c.PSD, s)
		if err != nil {
			t.Errorf("%s: %v", name, err)
			continue
		}
		if len(got.Peaks) != len(c.TruePeaks) {
			t.Errorf("%s: found %d peaks %v, want %d", name, len(got.Peaks), got.Peaks, len(c.TruePeaks))
			continue
		}
		for i, p := range got.Peaks {
			if math.Abs(p.CenterHz-c.TruePeaks[i][0]) > 0.25 {
				t.Errorf("%s: peak %d at %g Hz, want %g", name, i, p.CenterHz, c.TruePeaks[i][0])
			}
		}
		eRef := math.Abs(got.Exponent - c.Exponent)
		eTruth := math.Abs(got.Exponent - c.TrueExponent)
		worstRef, worstTruth = math.Max(worstRef, eRef), math.Max(worstTruth, eTruth)
		if eRef > fitExponentTol {
			t.Errorf("%s: exponent %.10g, curve_fit reference %.10g (|diff| %.3g > %g)", name, got.Exponent, c.Exponent, eRef, fitExponentTol)
		}
		if eTruth > truthTol {
			t.Errorf("%s: exponent %.4g, generated with %g", name, got.Exponent, c.TrueExponent)
		}
		if got.R2 < 0.95 || got.R2 > 1 || got.Error <= 0 {
			t.Errorf("%s: R² %g, error %g out of the plausible range", name, got.R2, got.Error)
		}
	}
	t.Logf("exponent vs curve_fit: worst %.3g; vs generating value: worst %.3g", worstRef, worstTruth)
}

// TestFitSpectrumNoiseless: an exact aperiodic line with one Gaussian
// (synthetic ground truth). The staged method is not a joint least-squares
// fit — the Gaussian is fitted against the first, peak-biased line and the
// line then refitted under the fitted Gaussian — so even a noiseless
// spectrum is recovered only approximately; noiselessTol states how closely
// (seen: exponent off by 1.6e-3, centre by 2e-3 Hz, height by 2.4e-3).
func TestFitSpectrumNoiseless(t *testing.T) {
	const noiselessTol = 0.01
	var freqs, psd []float64
	for k := 0; k <= 200; k++ {
		f := float64(k) * 0.25
		freqs = append(freqs, f)
		lp := 2.0 - 1.3*math.Log10(math.Max(f, 1e-9)) + 0.5*math.Exp(-(f-9.5)*(f-9.5)/(2*1.2*1.2))
		psd = append(psd, math.Pow(10, lp))
	}
	s := SpecParamSettings{FreqLo: 2, FreqHi: 40, PeakWidthMin: 0.5, PeakWidthMax: 12, PeakThreshold: 2, MinPeakHeight: 0.05, MaxPeaks: 6}
	got, err := FitSpectrum(freqs, psd, s)
	if err != nil {
		t.Fatal(err)
	}
	if len(got.Peaks) != 1 {
		t.Fatalf("peaks %v, want one at 9.5 Hz", got.Peaks)
	}
	p := got.Peaks[0]
	for _, c := range []struct {
		what      string
		got, want float64
	}{{"offset", got.Offset, 2}, {"exponent", got.Exponent, 1.3}, {"centre", p.CenterHz, 9.5}, {"height", p.Height, 0.5},
		{"width", p.WidthHz / 10, 0.24}, {"R²", got.R2, 1}, {"error", got.Error, 0}} {
		if math.Abs(c.got-c.want) > noiselessTol {
			t.Errorf("%s = %.10g, want %g", c.what, c.got, c.want)
		}
	}
	want := math.Pow(10, got.Offset-got.Exponent)
	if a := got.AperiodicAt(10); math.Abs(a-want) > 1e-12*want {
		t.Errorf("AperiodicAt(10) = %.15g, want 10^(offset − exponent) = %.15g", a, want)
	}
}

// TestFitSpectrumExponentOverSeeds: the ground truth (point 7),
// on spectra alone: exponents 0.8, 1.0, 1.5 and 2.0, without peaks, with
// alpha, and with alpha and beta, each over 20 seeds of log-normal noise of
// 0.03 log10 SD (about the scatter of a region-averaged Welch estimate of a
// few minutes: one channel with ~150 segments scatters by ~0.037), fitted
// with the published defaults (widths 0.5–12 Hz, threshold 2 SD, minimum
// height 0) and at most 6 peaks: every exponent within truthTol. Seen: worst
// 0.049 at this noise; at 0.04 one spectrum in 240 misses (1.935 for 2.0: a
// broad Gaussian at the low end of the range takes part of the slope).
func TestFitSpectrumExponentOverSeeds(t *testing.T) {
	s := SpecParamSettings{FreqLo: 2, FreqHi: 40, PeakWidthMin: 0.5, PeakWidthMax: 12, PeakThreshold: 2, MinPeakHeight: 0, MaxPeaks: 6}
	worst := 0.0
	for _, chi := range []float64{0.8, 1.0, 1.5, 2.0} {
		for _, peaks := range [][]peakParams{nil, {{10, 0.7, 1}}, {{10, 0.7, 1}, {21, 0.3, 2}}} {
			for seed := uint64(1); seed <= 20; seed++ {
				r := rand.New(rand.NewPCG(seed, uint64(chi*100)))
				var freqs, psd []float64
				for k := 0; k <= 200; k++ {
					f := float64(k) * 0.25
					lp := 1.5 - chi*math.Log10(math.Max(f, 0.25)) + 0.03*r.NormFloat64()
					for _, p := range peaks {
						lp += gauss(f, p)
					}
					freqs = append(freqs, f)
					psd = append(psd, math.Pow(10, lp))
				}
				got, err := FitSpectrum(freqs, psd, s)
				if err != nil {
					t.Fatalf("exponent %g, %d peaks, seed %d: %v", chi, len(peaks), seed, err)
				}
				e := math.Abs(got.Exponent - chi)
				worst = math.Max(worst, e)
				if e > truthTol {
					t.Errorf("exponent %g, %d peaks, seed %d: fitted %.4g", chi, len(peaks), seed, got.Exponent)
				}
			}
		}
	}
	t.Logf("240 spectra, worst exponent error %.3g", worst)
}

func TestFitSpectrumErrors(t *testing.T) {
	s := SpecParamSettings{FreqLo: 2, FreqHi: 40, PeakWidthMin: 0.5, PeakWidthMax: 12, PeakThreshold: 2, MaxPeaks: 6}
	freqs := make([]float64, 200)
	psd := make([]float64, 200)
	for i := range freqs {
		freqs[i] = float64(i) * 0.25
		psd[i] = 1 / (1 + freqs[i])
	}
	zero := append([]float64(nil), psd...)
	zero[40] = 0
	bad := s
	bad.FreqLo = 0
	few := s
	few.FreqHi = 3
	neg := s
	neg.MaxPeaks = -1
	for _, c := range []struct {
		name       string
		freqs, psd []float64
		s          SpecParamSettings
	}{
		{"length mismatch", freqs, psd[:10], s},
		{"zero power in range", freqs, zero, s},
		{"range from 0 Hz", freqs, psd, bad},
		{"too few points", freqs, psd, few},
		{"negative max peaks", freqs, psd, neg},
	} {
		if _, err := FitSpectrum(c.freqs, c.psd, c.s); !errors.Is(err, ErrSpectrumFit) {
			t.Errorf("%s: error %v, want ErrSpectrumFit", c.name, err)
		}
	}
}

// BenchmarkFitSpectrum fits one 2–40 Hz spectrum at 0.25 Hz resolution:
// "clean" is the golden spectrum with alpha and beta peaks (noise 0.015,
// minimum peak height 0.25), "noisy-defaults" a pure 1/f spectrum with noise
// 0.04 fitted with the published defaults (minimum height 0, up to 6 peaks:
// the search then fits noise bumps, the costly case).
func BenchmarkFitSpectrum(b *testing.B) {
	var g specGolden
	readDSPGolden(b, "specparam.json", &g)
	c := g.Cases[len(g.Cases)-1]
	b.Run("clean", func(b *testing.B) {
		s := g.settings()
		b.ReportAllocs()
		for b.Loop() {
			if _, err := FitSpectrum(c.Freqs, c.PSD, s); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("noisy-defaults", func(b *testing.B) {
		s := SpecParamSettings{FreqLo: 2, FreqHi: 40, PeakWidthMin: 0.5, PeakWidthMax: 12, PeakThreshold: 2, MaxPeaks: 6}
		r := rand.New(rand.NewPCG(9, 10))
		var freqs, psd []float64
		for k := 0; k <= 200; k++ {
			f := float64(k) * 0.25
			freqs = append(freqs, f)
			psd = append(psd, math.Pow(10, 1.5-1.2*math.Log10(math.Max(f, 0.25))+0.04*r.NormFloat64()))
		}
		b.ReportAllocs()
		for b.Loop() {
			if _, err := FitSpectrum(freqs, psd, s); err != nil {
				b.Fatal(err)
			}
		}
	})
}
