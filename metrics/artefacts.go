package metrics

import (
	"math"
	"slices"
	"sort"

	"longwave/ingest"

	"longwave/metrics/fft"
)

// Rule names of the artefact rules, the keys of Quality.RejectedByRule.
const (
	RuleAmplitude = "amplitude"
	RuleFlat      = "flat"
	RuleMuscle    = "muscle"
	RuleVariance  = "variance"
)

// madToSD scales a median absolute deviation to the standard deviation of
// normally distributed data (1/Φ⁻¹(3/4)).
const madToSD = 1.4826

// epochStat holds what the artefact rules and the drowsiness index need of
// one channel in one epoch (µV, µV²).
type epochStat struct {
	PeakToPeak float64
	Variance   float64
	// Band powers of the epoch's periodogram, µV² (Slow: the delta band,
	// used by settings v2's slow-wave rule only).
	Muscle, MuscleTotal, Alpha, Slow float64
}

// periodogram computes band powers of one epoch (at the analysis rate):
// the mean is removed, a periodic Hann window applied, and the one-sided
// density P_k = c·|X_k|² with c = 2/(fs·Σw²) (1/(fs·Σw²) at DC and Nyquist)
// summed as band power Σ P_k·Δf over the bins k·Δf in [lo, hi). One value
// per goroutine: it holds the transform's work space.
type periodogram struct {
	fs          float64
	win         []float64
	buf, buf2   []float64
	coef, coef2 []complex128
	fft         *fft.Real
	norm        float64
}

func newPeriodogram(n int, fs float64) *periodogram {
	p := &periodogram{fs: fs, win: make([]float64, n), buf: make([]float64, n), buf2: make([]float64, n),
		coef: make([]complex128, n/2+1), coef2: make([]complex128, n/2+1), fft: fft.NewReal(n)}
	var ss float64
	for i := range p.win {
		w := 0.5 - 0.5*math.Cos(2*math.Pi*float64(i)/float64(n))
		p.win[i] = w
		ss += w * w
	}
	p.norm = 1 / (fs * ss)
	return p
}

// stat fills the epoch statistics of x (one epoch, len(x) = the
// periodogram's length).
func (p *periodogram) stat(x []float32, r ArtefactRules, alpha, slow Band) epochStat {
	st := p.prepare(x, p.buf)
	p.fft.Coefficients(p.coef, p.buf)
	p.bands(&st, p.coef, r, alpha, slow)
	return st
}

// stat2 is stat of two epochs at once, from one complex transform of the
// pair (fft.Real.Pair): the same values as two calls of stat, to rounding.
func (p *periodogram) stat2(x, y []float32, r ArtefactRules, alpha, slow Band) (epochStat, epochStat) {
	sx, sy := p.prepare(x, p.buf), p.prepare(y, p.buf2)
	p.fft.Pair(p.coef, p.coef2, p.buf, p.buf2)
	p.bands(&sx, p.coef, r, alpha, slow)
	p.bands(&sy, p.coef2, r, alpha, slow)
	return sx, sy
}

// prepare measures the time-domain statistics of x and writes its
// demeaned, windowed samples to buf.
func (p *periodogram) prepare(x []float32, buf []float64) epochStat {
	var sum float64
	lo, hi := float64(x[0]), float64(x[0])
	for _, v := range x {
		f := float64(v)
		sum += f
		if f < lo {
			lo = f
		}
		if f > hi {
			hi = f
		}
	}
	n := len(x)
	mean := sum / float64(n)
	var ss float64
	for i, v := range x {
		d := float64(v) - mean
		ss += d * d
		buf[i] = d * p.win[i]
	}
	return epochStat{PeakToPeak: hi - lo, Variance: ss / float64(n)}
}

// bands adds the band powers of the coefficients coef to st.
func (p *periodogram) bands(st *epochStat, coef []complex128, r ArtefactRules, alpha, slow Band) {
	n := len(p.win)
	df := p.fs / float64(n)
	for k, c := range coef {
		f := float64(k) * df
		pw := real(c)*real(c) + imag(c)*imag(c)
		if k == 0 || (n%2 == 0 && k == n/2) {
			pw *= p.norm
		} else {
			pw *= 2 * p.norm
		}
		pw *= df
		if r.MuscleBand.Contains(f) {
			st.Muscle += pw
		}
		if r.MuscleTotalBand.Contains(f) {
			st.MuscleTotal += pw
		}
		if alpha.Contains(f) {
			st.Alpha += pw
		}
		if slow.Contains(f) {
			st.Slow += pw
		}
	}
}

// applyRules marks each epoch with the first artefact rule it fails (order of
// ArtefactRules) and returns the count per rule. stats[c][e] is channel c's
// statistic in epoch e; used lists the channels the rules look at.
func applyRules(eps []epoch, stats [][]epochStat, used []int, r ArtefactRules) map[string]int {
	counts := map[string]int{RuleAmplitude: 0, RuleFlat: 0, RuleMuscle: 0, RuleVariance: 0}
	if len(used) == 0 {
		return counts
	}
	burst := burstLimits(eps, stats, used, r)
	for e := range eps {
		eps[e].Reject = ""
		for _, rule := range []string{RuleAmplitude, RuleFlat, RuleMuscle} {
			for _, c := range used {
				if failsRule(stats[c][e], rule, r, burst[c][e]) {
					eps[e].Reject = rule
					break
				}
			}
			if eps[e].Reject != "" {
				break
			}
		}
	}
	// Robust outlier rule per state and channel, over the epochs still clean.
	byState := map[string][]int{}
	for e, ep := range eps {
		if ep.Reject == "" {
			byState[string(ep.State)] = append(byState[string(ep.State)], e)
		}
	}
	vals := make([]float64, 0, len(eps))
	for _, idx := range byState {
		for _, c := range used {
			vals = vals[:0]
			for _, e := range idx {
				vals = append(vals, logVariance(stats[c][e].Variance))
			}
			limit, ok := robustUpperLimit(vals, r.VarianceK)
			if !ok {
				continue // fewer than three distinct values: no spread to judge by
			}
			for i, e := range idx {
				if vals[i] > limit {
					eps[e].Reject = RuleVariance
				}
			}
		}
	}
	for _, ep := range eps {
		if ep.Reject != "" {
			counts[ep.Reject]++
		}
	}
	return counts
}

// burstLimits returns, per channel and epoch, the muscle-burst limit of rule
// 3: MuscleRelativeMax × the median MuscleBand power of that channel over
// the epochs of the epoch's state (µV²). Channels not in used get none.
func burstLimits(eps []epoch, stats [][]epochStat, used []int, r ArtefactRules) [][]float64 {
	out := make([][]float64, len(stats))
	byState := map[ingest.EyeState][]int{}
	for e, ep := range eps {
		byState[ep.State] = append(byState[ep.State], e)
	}
	for _, c := range used {
		out[c] = make([]float64, len(eps))
		for _, idx := range byState {
			band := make([]float64, len(idx))
			for i, e := range idx {
				band[i] = stats[c][e].Muscle
			}
			limit := r.MuscleRelativeMax * median(band)
			for _, e := range idx {
				out[c][e] = limit
			}
		}
	}
	return out
}

// failsRule reports whether one channel's epoch statistic fails rule 1, 2
// or 3 (burst is the channel's muscle-burst limit, µV²).
func failsRule(st epochStat, rule string, r ArtefactRules, burst float64) bool {
	switch rule {
	case RuleAmplitude:
		return st.PeakToPeak > r.PeakToPeakMicrovolts
	case RuleFlat:
		return st.PeakToPeak < r.FlatMicrovolts
	case RuleMuscle:
		return (st.MuscleTotal > 0 && st.Muscle/st.MuscleTotal > r.MuscleShareMax) || (burst > 0 && st.Muscle > burst)
	}
	return false
}

// failsAlone reports whether channel c fails any of rules 1–3 in epoch e.
func failsAlone(stats [][]epochStat, c, e int, r ArtefactRules, burst float64) bool {
	for _, rule := range []string{RuleAmplitude, RuleFlat, RuleMuscle} {
		if failsRule(stats[c][e], rule, r, burst) {
			return true
		}
	}
	return false
}

// logVariance is log10 of a variance, floored at the smallest float64.
func logVariance(v float64) float64 {
	return math.Log10(math.Max(v, math.SmallestNonzeroFloat64))
}

// median returns the median of v (mean of the middle two for even lengths),
// 0 for an empty slice. v is not modified.
func median(v []float64) float64 {
	return quantile(v, 0.5)
}

// quantile returns the q-quantile of v by linear interpolation between order
// statistics (the default of numpy.quantile, "linear"); 0 for an empty
// slice. v is not modified.
//
// The order statistics are found by selection (Hoare's FIND, Comm. ACM
// 1961; expected linear time) rather than by sorting a copy: the same two
// values, so the same result (TestQuantileMatchesSort). A slice holding a
// NaN is sorted instead, so that NaN keeps sort.Float64s's place (first).
func quantile(v []float64, q float64) float64 {
	if len(v) == 0 {
		return 0
	}
	s := append([]float64(nil), v...)
	pos := q * float64(len(s)-1)
	i := int(math.Floor(pos))
	var lo, hi float64 // order statistics i and i+1
	if slices.ContainsFunc(s, math.IsNaN) {
		sort.Float64s(s)
		if i >= len(s)-1 {
			return s[len(s)-1]
		}
		lo, hi = s[i], s[i+1]
	} else {
		if i >= len(s)-1 {
			return slices.Max(s)
		}
		lo = selectOrder(s, i)
		hi = slices.Min(s[i+1:]) // selectOrder left every later element ≥ s[i]
	}
	return lo + (pos-float64(i))*(hi-lo)
}

// selectOrder rearranges s (no NaN) so that s[k] holds its k-th smallest
// value (from 0), every element before k is ≤ s[k] and every element
// after it ≥ s[k], and returns s[k]. Partitions around the median of
// three (Hoare's scheme, which splits runs of equal values evenly).
func selectOrder(s []float64, k int) float64 {
	lo, hi := 0, len(s)-1
	for lo < hi {
		mid := lo + (hi-lo)/2
		if s[mid] < s[lo] {
			s[mid], s[lo] = s[lo], s[mid]
		}
		if s[hi] < s[lo] {
			s[hi], s[lo] = s[lo], s[hi]
		}
		if s[hi] < s[mid] {
			s[hi], s[mid] = s[mid], s[hi]
		}
		p := s[mid]
		i, j := lo, hi
		for i <= j {
			for s[i] < p {
				i++
			}
			for p < s[j] {
				j--
			}
			if i <= j {
				s[i], s[j] = s[j], s[i]
				i++
				j--
			}
		}
		// s[lo..j] ≤ p ≤ s[i..hi], and everything between equals p
		switch {
		case k <= j:
			hi = j
		case k >= i:
			lo = i
		default:
			return s[k]
		}
	}
	return s[k]
}

// robustUpperLimit is median + k · 1.4826 · MAD of v (the robust z-score
// limit of rule 4); false when the MAD is 0 (no spread to judge by).
func robustUpperLimit(v []float64, k float64) (float64, bool) {
	med := median(v)
	dev := make([]float64, len(v))
	for i, x := range v {
		dev[i] = math.Abs(x - med)
	}
	mad := median(dev)
	if mad == 0 {
		return 0, false
	}
	return med + k*madToSD*mad, true
}
