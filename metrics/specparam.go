package metrics

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
)

// SpecParamSettings are the limits of FitSpectrum (spectral
// parameterisation after Donoghue et al. 2020). The published defaults are
// PeakWidthMin 0.5 Hz, PeakWidthMax 12 Hz, PeakThreshold 2 SD and
// MinPeakHeight 0; FreqLo/FreqHi 2–40 Hz is longwave's v1 range.
type SpecParamSettings struct {
	FreqLo, FreqHi float64 // fitting range in Hz, both ends included; FreqLo > 0
	PeakWidthMin   float64 // smallest peak bandwidth 2σ, Hz
	PeakWidthMax   float64 // largest peak bandwidth 2σ, Hz
	PeakThreshold  float64 // a candidate peak must exceed this many SDs of the flattened spectrum
	MinPeakHeight  float64 // and this height above the aperiodic fit, log10(µV²/Hz)
	MaxPeaks       int     // at most this many peaks; 0 fits the aperiodic component alone
}

// GaussianPeak is one periodic component of a fit: in log10 power,
// Height·exp(−(f − CenterHz)²/(2σ²)) with σ = WidthHz/2, added to the
// aperiodic line.
type GaussianPeak struct {
	CenterHz float64 // centre frequency, Hz
	Height   float64 // height above the aperiodic fit, log10(µV²/Hz) (i.e. decades)
	WidthHz  float64 // bandwidth 2σ, Hz
}

// SpectrumFit is the parameterised spectrum: the aperiodic component
// log10 P(f) = Offset − Exponent·log10 f (P in µV²/Hz, f in Hz) plus Peaks
// (sorted by centre frequency). R2 is the squared Pearson correlation of the
// full model with log10 power over the fitting range, and Error the mean
// absolute difference between them in log10(µV²/Hz).
type SpectrumFit struct {
	Offset, Exponent, R2, Error float64
	Peaks                       []GaussianPeak
}

// ErrSpectrumFit is returned (wrapped) when a spectrum cannot be fitted.
var ErrSpectrumFit = errors.New("metrics: spectrum fit")

// Fixed constants of the method. Their values follow the published method
// and its reference implementation's defaults as remembered (from memory,
// not checked against a source here): the robust aperiodic fit keeps the
// points of the flattened spectrum at or below its 0.025th percentile
// after clipping negative values to 0 (in effect, the points under the
// first fit); candidate peaks within one σ of either end of the range are
// dropped, and of two candidates closer than 0.75σ each the lower one; a
// fitted centre stays within 1.5σ of its guess.
const (
	apPercentile  = 0.025 // percent
	edgeSigmas    = 1.0
	overlapSigmas = 0.75
	centreSigmas  = 1.5
	minFitPoints  = 8 // fewer points cannot support even the aperiodic fit meaningfully
	fwhmPerSigma  = 2.3548200450309493
	lmMaxIter     = 500
	lmCostTol     = 1e-13 // relative decrease of the cost that ends the fit
	lmStepTol     = 1e-12 // relative step size that ends the fit
	lmLambdaInit  = 1e-3
)

// FitSpectrum parameterises a power spectrum into an aperiodic component and
// Gaussian peaks, after Donoghue T, Haller M, Peterson EJ, et al. (2020).
// Parameterizing neural power spectra into periodic and aperiodic
// components. Nat Neurosci 23:1655–1665, doi:10.1038/s41593-020-00744-x, in
// the fixed aperiodic mode (no knee). freqs are in Hz and psd in µV²/Hz
// (e.g. Welch.PSD); only FreqLo ≤ f ≤ FreqHi is used, where every power must
// be positive and finite.
//
// Steps, on y = log10 psd:
//  1. robust aperiodic fit: least squares of y = b − χ·log10 f; the residual
//     y − fit with negative values set to 0 is thresholded at its
//     apPercentile-th percentile and the line refitted on the points at or
//     below it;
//  2. peak search on the flattened spectrum y − aperiodic: while fewer than
//     MaxPeaks, take the maximum; stop unless it exceeds PeakThreshold SDs
//     (population SD of the current flattened spectrum) and MinPeakHeight;
//     estimate σ from the nearer half-height point (FWHM = 2·distance,
//     σ = FWHM/2.3548; the crossing is interpolated linearly between bins,
//     our refinement, which leaves smaller shoulders for the next search),
//     clamp σ to the width limits/2, record the guess and subtract its
//     Gaussian;
//  3. drop guesses too close to the range ends or overlapping another;
//  4. fit all Gaussians jointly to the flattened spectrum by least squares
//     (bounded Levenberg–Marquardt with analytic Jacobian: centre within
//     1.5σ of its guess, height ≥ 0, σ within the width limits/2);
//  5. refit the aperiodic line by least squares on y minus the peaks;
//  6. R2 and Error of aperiodic + peaks against y. Gaussians fitted down to
//     height 0 add nothing to the model and are not reported.
func FitSpectrum(freqs, psd []float64, s SpecParamSettings) (SpectrumFit, error) {
	f, y, err := fitInput(freqs, psd, s)
	if err != nil {
		return SpectrumFit{}, err
	}
	b, chi := robustAperiodic(f, y)
	flat := make([]float64, len(f))
	for i := range f {
		flat[i] = y[i] - (b - chi*math.Log10(f[i]))
	}
	guesses := findPeaks(f, flat, s)
	guesses = dropEdgePeaks(guesses, f[0], f[len(f)-1])
	guesses = dropOverlaps(guesses)
	return fitWithGuesses(f, y, flat, guesses, s), nil
}

// AperiodicAt returns the aperiodic component at freqHz in µV²/Hz:
// 10^(Offset − Exponent·log10 f).
func (f SpectrumFit) AperiodicAt(freqHz float64) float64 {
	return math.Pow(10, f.Offset-f.Exponent*math.Log10(freqHz))
}

// fitInput checks the settings and data and returns the frequencies and
// log10 powers of the fitting range.
func fitInput(freqs, psd []float64, s SpecParamSettings) (f, y []float64, err error) {
	switch {
	case len(freqs) != len(psd):
		return nil, nil, fmt.Errorf("%w: %d frequencies but %d powers", ErrSpectrumFit, len(freqs), len(psd))
	case !(s.FreqLo > 0 && s.FreqLo < s.FreqHi) || math.IsInf(s.FreqHi, 0):
		return nil, nil, fmt.Errorf("%w: range %g–%g Hz: need 0 < low < high", ErrSpectrumFit, s.FreqLo, s.FreqHi)
	case !(s.PeakWidthMin > 0 && s.PeakWidthMin <= s.PeakWidthMax) || math.IsInf(s.PeakWidthMax, 0):
		return nil, nil, fmt.Errorf("%w: peak width limits %g–%g Hz: need 0 < min ≤ max", ErrSpectrumFit, s.PeakWidthMin, s.PeakWidthMax)
	case s.MaxPeaks < 0:
		return nil, nil, fmt.Errorf("%w: maximum peak count %d is negative", ErrSpectrumFit, s.MaxPeaks)
	case math.IsNaN(s.PeakThreshold) || math.IsNaN(s.MinPeakHeight):
		return nil, nil, fmt.Errorf("%w: peak threshold or minimum height is NaN", ErrSpectrumFit)
	}
	for i, fr := range freqs {
		if fr < s.FreqLo || fr > s.FreqHi {
			continue
		}
		if i > 0 && !(fr > freqs[i-1]) {
			return nil, nil, fmt.Errorf("%w: frequencies not increasing at index %d (%g Hz)", ErrSpectrumFit, i, fr)
		}
		p := psd[i]
		if !(p > 0) || math.IsInf(p, 0) {
			return nil, nil, fmt.Errorf("%w: power %g at %g Hz (index %d) is not positive and finite", ErrSpectrumFit, p, fr, i)
		}
		f = append(f, fr)
		y = append(y, math.Log10(p))
	}
	if len(f) < minFitPoints {
		return nil, nil, fmt.Errorf("%w: %d frequencies in %g–%g Hz, need at least %d", ErrSpectrumFit, len(f), s.FreqLo, s.FreqHi, minFitPoints)
	}
	return f, y, nil
}

// lineFit returns the least-squares b and χ of y = b − χ·log10 f over the
// points where use is nil or true (centred sums, for accuracy).
func lineFit(f, y []float64, use []bool) (b, chi float64) {
	var n, mx, my float64
	for i := range f {
		if use == nil || use[i] {
			n++
			mx += math.Log10(f[i])
			my += y[i]
		}
	}
	mx /= n
	my /= n
	var sxy, sxx float64
	for i := range f {
		if use == nil || use[i] {
			dx := math.Log10(f[i]) - mx
			sxy += dx * (y[i] - my)
			sxx += dx * dx
		}
	}
	slope := sxy / sxx
	return my - slope*mx, -slope
}

// robustAperiodic is step 1 of FitSpectrum.
func robustAperiodic(f, y []float64) (b, chi float64) {
	b, chi = lineFit(f, y, nil)
	flat := make([]float64, len(f))
	for i := range f {
		flat[i] = max(y[i]-(b-chi*math.Log10(f[i])), 0)
	}
	thr := percentile(flat, apPercentile)
	use := make([]bool, len(f))
	n := 0
	for i, v := range flat {
		if v <= thr {
			use[i] = true
			n++
		}
	}
	if n < 2 { // a line needs two (distinct, as f increases) frequencies
		return b, chi
	}
	return lineFit(f, y, use)
}

// percentile returns the p-th percentile (0–100) of v with linear
// interpolation between order statistics at rank p/100·(n−1) (numpy's
// default "linear" method).
func percentile(v []float64, p float64) float64 {
	s := slices.Clone(v)
	sort.Float64s(s)
	r := p / 100 * float64(len(s)-1)
	lo := int(math.Floor(r))
	if lo >= len(s)-1 {
		return s[len(s)-1]
	}
	return s[lo] + (r-float64(lo))*(s[lo+1]-s[lo])
}

// peakParams are one Gaussian's centre (Hz), height (log10 power) and σ (Hz).
type peakParams struct{ c, h, sd float64 }

// gaussReach is how far out, in σ, a Gaussian is evaluated: beyond 10σ it is
// below e^−50 ≈ 2e-22 of its height, far under the rounding of any sum of
// log10 powers here, and is taken as 0 (which lets the fit skip those
// Jacobian entries).
const gaussReach = 10

func gauss(f float64, p peakParams) float64 {
	d := f - p.c
	if d*d > gaussReach*gaussReach*p.sd*p.sd {
		return 0
	}
	return p.h * math.Exp(-d*d/(2*p.sd*p.sd))
}

// findPeaks is step 2 of FitSpectrum.
func findPeaks(f, flat []float64, s SpecParamSettings) []peakParams {
	sdMin, sdMax := s.PeakWidthMin/2, s.PeakWidthMax/2
	r := slices.Clone(flat)
	var out []peakParams
	for len(out) < s.MaxPeaks {
		i := 0
		for j, v := range r {
			if v > r[i] {
				i = j
			}
		}
		h := r[i]
		if h <= s.PeakThreshold*popSD(r) || h <= s.MinPeakHeight {
			break
		}
		half := h / 2
		dist := math.Inf(1)
		for j := i - 1; j >= 0; j-- {
			if r[j] <= half {
				dist = f[i] - crossing(f[j], f[j+1], r[j], r[j+1], half)
				break
			}
		}
		for j := i + 1; j < len(r); j++ {
			if r[j] <= half {
				dist = min(dist, crossing(f[j-1], f[j], r[j-1], r[j], half)-f[i])
				break
			}
		}
		sd := (sdMin + sdMax) / 2
		if !math.IsInf(dist, 1) {
			sd = 2 * dist / fwhmPerSigma
		}
		sd = min(max(sd, sdMin), sdMax)
		p := peakParams{c: f[i], h: h, sd: sd}
		out = append(out, p)
		for j := range r {
			r[j] -= gauss(f[j], p)
		}
	}
	return out
}

// crossing returns where the line through (f1, r1) and (f2, r2) takes the
// value level, which lies between r1 and r2.
func crossing(f1, f2, r1, r2, level float64) float64 {
	if r1 == r2 {
		return f1
	}
	return f1 + (level-r1)/(r2-r1)*(f2-f1)
}

func popSD(v []float64) float64 {
	var m float64
	for _, x := range v {
		m += x
	}
	m /= float64(len(v))
	var ss float64
	for _, x := range v {
		ss += (x - m) * (x - m)
	}
	return math.Sqrt(ss / float64(len(v)))
}

// dropEdgePeaks removes guesses whose centre lies within edgeSigmas·σ of
// either end of the fitted range: their Gaussian would be mostly outside
// the data.
func dropEdgePeaks(g []peakParams, lo, hi float64) []peakParams {
	out := g[:0:0]
	for _, p := range g {
		if p.c-lo > edgeSigmas*p.sd && hi-p.c > edgeSigmas*p.sd {
			out = append(out, p)
		}
	}
	return out
}

// dropOverlaps sorts guesses by centre and, while two neighbours overlap
// (c1 + overlapSigmas·σ1 > c2 − overlapSigmas·σ2), removes the lower of the
// two: a single broad peak is not to be fitted as two.
func dropOverlaps(g []peakParams) []peakParams {
	out := slices.Clone(g)
	sort.SliceStable(out, func(i, j int) bool { return out[i].c < out[j].c })
	for {
		k := -1
		for i := 0; i+1 < len(out); i++ {
			if out[i].c+overlapSigmas*out[i].sd > out[i+1].c-overlapSigmas*out[i+1].sd {
				k = i
				if out[i+1].h < out[i].h {
					k = i + 1
				}
				break
			}
		}
		if k < 0 {
			return out
		}
		out = slices.Delete(out, k, k+1)
	}
}

// fitWithGuesses runs steps 4–6 of FitSpectrum from the given peak guesses:
// f and y are the range's frequencies and log10 powers, flat is y minus the
// robust aperiodic fit.
func fitWithGuesses(f, y, flat []float64, guesses []peakParams, s SpecParamSettings) SpectrumFit {
	peaks := fitPeaks(f, flat, guesses, s)
	g := make([]float64, len(f))
	for i := range f {
		for _, p := range peaks {
			g[i] += gauss(f[i], p)
		}
	}
	rest := make([]float64, len(f))
	for i := range f {
		rest[i] = y[i] - g[i]
	}
	b, chi := lineFit(f, rest, nil)
	model := make([]float64, len(f))
	var mae float64
	for i := range f {
		model[i] = b - chi*math.Log10(f[i]) + g[i]
		mae += math.Abs(y[i] - model[i])
	}
	out := SpectrumFit{Offset: b, Exponent: chi, R2: squaredCorrelation(y, model), Error: mae / float64(len(f))}
	for _, p := range peaks {
		if p.h > 0 { // a Gaussian fitted down to height 0 is no peak
			out.Peaks = append(out.Peaks, GaussianPeak{CenterHz: p.c, Height: p.h, WidthHz: 2 * p.sd})
		}
	}
	sort.SliceStable(out.Peaks, func(i, j int) bool { return out.Peaks[i].CenterHz < out.Peaks[j].CenterHz })
	return out
}

// squaredCorrelation returns the squared Pearson correlation of a and b
// (0 when either is constant).
func squaredCorrelation(a, b []float64) float64 {
	n := float64(len(a))
	var ma, mb float64
	for i := range a {
		ma += a[i]
		mb += b[i]
	}
	ma /= n
	mb /= n
	var sab, saa, sbb float64
	for i := range a {
		da, db := a[i]-ma, b[i]-mb
		sab += da * db
		saa += da * da
		sbb += db * db
	}
	if saa == 0 || sbb == 0 {
		return 0
	}
	return sab * sab / (saa * sbb)
}

// fitPeaks fits the sum of Gaussians to flat by bounded least squares,
// starting from the guesses: minimises Σ_i (flat_i − Σ_k G_k(f_i))² over
// (c_k, h_k, σ_k) with c_k ∈ [c⁰−1.5σ⁰, c⁰+1.5σ⁰], h_k ≥ 0 and
// σ_k ∈ [PeakWidthMin/2, PeakWidthMax/2].
//
// Method: Levenberg–Marquardt (Marquardt 1963, J. SIAM 11(2):431–441) with
// the damping λ·diag(JᵀJ), the analytic Jacobian
// ∂G/∂h = e, ∂G/∂c = h·e·(f−c)/σ², ∂G/∂σ = h·e·(f−c)²/σ³ (e = exp(−(f−c)²/2σ²)),
// and bounds kept by an active set: parameters at a bound whose gradient
// points outward are held fixed for the step, and a free parameter whose
// step would leave the box is put on its bound and the rest re-solved
// (boxStep). Steps that do not lower the cost are refused and λ raised;
// accepted ones lower λ by Nielsen's gain-ratio rule; the fit ends when the relative cost decrease or step size falls
// below lmCostTol/lmStepTol, or after lmMaxIter iterations (the best point
// so far is returned either way: the cost never increases).
func fitPeaks(f, flat []float64, guesses []peakParams, s SpecParamSettings) []peakParams {
	k := len(guesses)
	if k == 0 {
		return nil
	}
	n := 3 * k
	lo := make([]float64, n)
	hi := make([]float64, n)
	x := make([]float64, n)
	for j, g := range guesses {
		lo[3*j], hi[3*j] = g.c-centreSigmas*g.sd, g.c+centreSigmas*g.sd
		lo[3*j+1], hi[3*j+1] = 0, math.Inf(1)
		lo[3*j+2], hi[3*j+2] = s.PeakWidthMin/2, s.PeakWidthMax/2
		x[3*j], x[3*j+1], x[3*j+2] = g.c, g.h, g.sd
	}
	for j := range x {
		x[j] = min(max(x[j], lo[j]), hi[j])
	}
	m := len(f)
	jac := make([]float64, m*n)
	res := make([]float64, m)
	// cost returns Σr² at p and leaves in ex[i*k+j] the exponential
	// factor e of Gaussian j at f[i] (−1 beyond gaussReach, where gauss is
	// 0) and in rs[i] the residual: the Jacobian at an accepted point is
	// then built from them without evaluating exp again. Every value is
	// the one gauss computes, with the same operations, so the fit takes
	// the same steps to the bit.
	cost := func(p, ex, rs []float64) float64 {
		var c float64
		for i := range f {
			r := flat[i]
			for j := 0; j < k; j++ {
				cj, h, sd := p[3*j], p[3*j+1], p[3*j+2]
				d := f[i] - cj
				if d*d > gaussReach*gaussReach*sd*sd {
					ex[i*k+j] = -1
					continue
				}
				e := math.Exp(-d * d / (2 * sd * sd))
				ex[i*k+j] = e
				r -= h * e
			}
			rs[i] = r
			c += r * r
		}
		return c
	}
	exCur, exTrial := make([]float64, m*k), make([]float64, m*k)
	resTrial := make([]float64, m)
	jtj := make([]float64, n*n)
	jtr := make([]float64, n)
	a := make([]float64, n*n)
	rhs := make([]float64, n)
	free := make([]bool, n)
	trial := make([]float64, n)
	step := make([]float64, n)
	inFace := make([]bool, n)
	near := make([]int, 0, k)
	lambda, nu := lmLambdaInit, 2.0
	cur := cost(x, exCur, res)
	for range lmMaxIter {
		// Jacobian of the model at x (its residuals res and exponential
		// factors exCur come from the cost evaluation that accepted x).
		for i := range f {
			for j := 0; j < k; j++ {
				e := exCur[i*k+j]
				if e < 0 {
					jac[i*n+3*j], jac[i*n+3*j+1], jac[i*n+3*j+2] = 0, 0, 0
					continue
				}
				c, h, sd := x[3*j], x[3*j+1], x[3*j+2]
				d := f[i] - c
				jac[i*n+3*j] = h * e * d / (sd * sd)
				jac[i*n+3*j+1] = e
				jac[i*n+3*j+2] = h * e * d * d / (sd * sd * sd)
			}
		}
		// JᵀJ (lower triangle) and JᵀR, row by row. A Gaussian beyond
		// its reach at f[i] has a zero block in row i; only the blocks of
		// the Gaussians in reach (ascending) are multiplied. Skipping a
		// zero product leaves a sum as it was: no sum here is −0 (each
		// starts at +0, and +0 + ±0 = +0), so the result is the same to
		// the bit as the dense loop's.
		clear(jtj)
		clear(jtr)
		for i := range m {
			row := jac[i*n : (i+1)*n]
			ri := res[i]
			near = near[:0]
			for j := 0; j < k; j++ {
				if exCur[i*k+j] >= 0 {
					near = append(near, j)
				}
			}
			for _, ja := range near {
				for p := 3 * ja; p < 3*ja+3; p++ {
					rp := row[p]
					if rp == 0 {
						continue
					}
					jtr[p] += rp * ri
					acc := jtj[p*n : p*n+p+1]
					for _, jb := range near {
						q := 3 * jb
						if jb == ja {
							for ; q <= p; q++ {
								acc[q] += rp * row[q]
							}
							break
						}
						acc[q] += rp * row[q]
						acc[q+1] += rp * row[q+1]
						acc[q+2] += rp * row[q+2]
					}
				}
			}
		}
		for p := range n {
			for q := 0; q < p; q++ {
				jtj[q*n+p] = jtj[p*n+q]
			}
		}
		// Active bounds: at a bound with the descent direction (JᵀR) outward.
		nFree := 0
		for p := range n {
			free[p] = !((x[p] <= lo[p] && jtr[p] < 0) || (x[p] >= hi[p] && jtr[p] > 0))
			if free[p] {
				nFree++
			}
		}
		if nFree == 0 {
			break
		}
		improved := false
		for !improved {
			if !boxStep(step, jtj, jtr, x, lo, hi, free, lambda, n, a, rhs, inFace) {
				lambda *= 10
				if lambda > 1e16 {
					return toPeaks(x, k)
				}
				continue
			}
			var stepNorm, xNorm float64
			for p := range n {
				trial[p] = min(max(x[p]+step[p], lo[p]), hi[p])
				d := trial[p] - x[p]
				stepNorm += d * d
				xNorm += x[p] * x[p]
			}
			next := cost(trial, exTrial, resTrial)
			if next < cur {
				// Gain ratio ρ of the actual to the predicted decrease of
				// Σr² (2dᵀJᵀr − dᵀJᵀJd); the damping follows Nielsen's
				// rule (Nielsen 1999, IMM-REP-1999-05): λ·max(1/3, 1−(2ρ−1)³).
				var pred float64
				for p := range n {
					d := trial[p] - x[p]
					var jd float64
					for q := range n {
						jd += jtj[p*n+q] * (trial[q] - x[q])
					}
					pred += 2*d*jtr[p] - d*jd
				}
				rho := (cur - next) / pred
				rel := (cur - next) / cur
				copy(x, trial)
				cur = next
				exCur, exTrial = exTrial, exCur
				res, resTrial = resTrial, res
				lambda = max(lambda*max(1.0/3, 1-math.Pow(2*rho-1, 3)), 1e-15)
				nu = 2
				improved = true
				if rel < lmCostTol || math.Sqrt(stepNorm) < lmStepTol*(lmStepTol+math.Sqrt(xNorm)) {
					return toPeaks(x, k)
				}
			} else {
				if math.Sqrt(stepNorm) < lmStepTol*(lmStepTol+math.Sqrt(xNorm)) {
					return toPeaks(x, k)
				}
				lambda *= nu
				nu *= 2
				if lambda > 1e16 {
					return toPeaks(x, k)
				}
			}
		}
	}
	return toPeaks(x, k)
}

// boxStep computes the damped Gauss–Newton step (JᵀJ + λ·diag(JᵀJ))·d = JᵀR
// over the free parameters, restricted to the face of the box it reaches:
// a free parameter whose step would leave the box is moved onto its bound
// and the others are solved again with it held there, until the step stays
// inside. false when the system is singular.
func boxStep(d, jtj, jtr, x, lo, hi []float64, free []bool, lambda float64, n int, a, rhs []float64, inFace []bool) bool {
	copy(inFace, free)
	clear(d)
	for range n + 1 {
		for p := range n {
			for q := range n {
				switch {
				case inFace[p] && inFace[q]:
					a[p*n+q] = jtj[p*n+q]
				case p == q:
					a[p*n+q] = 1
				default:
					a[p*n+q] = 0
				}
			}
			if !inFace[p] {
				rhs[p] = d[p]
				continue
			}
			a[p*n+p] += lambda * max(jtj[p*n+p], 1e-300)
			rhs[p] = jtr[p]
			for q := range n {
				if !inFace[q] {
					rhs[p] -= jtj[p*n+q] * d[q]
				}
			}
		}
		if !solveInPlace(a, rhs, n) {
			return false
		}
		copy(d, rhs)
		moved := false
		for p := range n {
			if !inFace[p] {
				continue
			}
			switch {
			case x[p]+d[p] < lo[p]:
				d[p] = lo[p] - x[p]
			case x[p]+d[p] > hi[p]:
				d[p] = hi[p] - x[p]
			default:
				continue
			}
			inFace[p] = false
			moved = true
		}
		if !moved {
			return true
		}
	}
	return true
}

func toPeaks(x []float64, k int) []peakParams {
	out := make([]peakParams, k)
	for j := range k {
		out[j] = peakParams{x[3*j], x[3*j+1], x[3*j+2]}
	}
	return out
}

// solveInPlace solves the n×n system a·x = b by Gaussian elimination with
// partial pivoting, leaving x in b; false when a is singular.
func solveInPlace(a, b []float64, n int) bool {
	for col := range n {
		piv := col
		for r := col + 1; r < n; r++ {
			if math.Abs(a[r*n+col]) > math.Abs(a[piv*n+col]) {
				piv = r
			}
		}
		if a[piv*n+col] == 0 || math.IsNaN(a[piv*n+col]) {
			return false
		}
		if piv != col {
			for q := range n {
				a[col*n+q], a[piv*n+q] = a[piv*n+q], a[col*n+q]
			}
			b[col], b[piv] = b[piv], b[col]
		}
		for r := col + 1; r < n; r++ {
			m := a[r*n+col] / a[col*n+col]
			if m == 0 {
				continue
			}
			for q := col; q < n; q++ {
				a[r*n+q] -= m * a[col*n+q]
			}
			b[r] -= m * b[col]
		}
	}
	for r := n - 1; r >= 0; r-- {
		s := b[r]
		for q := r + 1; q < n; q++ {
			s -= a[r*n+q] * b[q]
		}
		b[r] = s / a[r*n+r]
	}
	return true
}
