package metrics

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"fmt"
	"math"
	"math/rand/v2"
	"sort"
	"unsafe"

	"gonum.org/v1/gonum/stat/distuv"

	"longwave/ingest"
)

// UncertaintySettings say how every marker's interval is made (settings v2
// onward): a block bootstrap over the kept Welch segments (Efron B,
// Tibshirani RJ (1993). An Introduction to the Bootstrap. Chapman & Hall;
// non-overlapping blocks after Carlstein E (1986). The use of subseries
// values for estimating the variance of a general statistic from a
// stationary sequence. Ann Stat 14(3):1171–1179 — citation from memory).
//
// For every region and state with a spectrum, the region's kept segment
// periodograms (in time order) are cut into consecutive blocks of
// BlockSeconds (the last one may be shorter). One resample draws as many
// blocks as there are, uniformly with replacement, for every region and
// state at once, and takes the mean periodogram of the segments drawn
// (response-corrected as the spectrum itself). Every marker is computed
// again from the resampled spectra — with the peak searches' distinctness
// test left out (a resample measures where the peak lies in a spectrum
// whose rhythm was found distinct) — Resamples times. A marker's SE is
// the standard deviation of its resampled values, its interval the
// (1 − Level)/2 and (1 + Level)/2 quantiles of them (the percentile
// interval, Efron & Tibshirani ch. 13). Blocks, not single segments, are
// drawn because neighbouring 4-s segments that start 2 s apart share 2 s
// of signal (their periodograms are correlated), and because the rhythms
// wax and wane over seconds: BlockSeconds = 8 spans four segments. 100
// resamples keep the cost at about one aperiodic fit per resample; the
// coverage test checks the intervals they give.
//
// Resampling the stored periodograms, not the samples, makes a resample
// cost one weighted mean of spectra and one aperiodic fit.
//
// The drowsiness index is a share of segments: its interval is the Wilson
// score interval for a binomial proportion (Wilson EB (1927). Probable
// inference, the law of succession, and statistical inference. J Am Stat
// Assoc 22(158):209–212 — citation from memory) with n the kept seconds
// over the segment length (the number of non-overlapping segments the
// time holds).
//
// The random stream is PCG seeded from the recording's SHA-256
// (ingest.Recording.SHA256; when unknown, the SHA-256 of the analysed
// channels' decoded samples), so the same file gives the same interval.
type UncertaintySettings struct {
	Level        float64 `json:"level"`
	Resamples    int     `json:"resamples"`
	BlockSeconds float64 `json:"block_s"`
}

func defaultUncertainty() *UncertaintySettings {
	return &UncertaintySettings{Level: 0.95, Resamples: 100, BlockSeconds: 8}
}

// Method texts of Uncertainty.Method.
const (
	MethodBootstrap = "block bootstrap over kept 4-s spectra, percentile interval (Efron & Tibshirani 1993)"
	MethodWilson    = "Wilson score interval for a share (Wilson 1927)"
)

// seedOf returns the two PCG seed words of a recording: the first 16 bytes
// of its SHA-256, or of the SHA-256 of the analysed channels' samples (in
// the order of a.names) when the file's digest is unknown. It must run
// before the samples are filtered in place.
func seedOf(rec *ingest.Recording, data [][]float32) (uint64, uint64) {
	var sum []byte
	if b, err := hex.DecodeString(rec.SHA256); err == nil && len(b) >= 16 {
		sum = b
	} else {
		h := sha256.New()
		for _, x := range data {
			if len(x) > 0 {
				h.Write(unsafe.Slice((*byte)(unsafe.Pointer(&x[0])), 4*len(x)))
			}
		}
		sum = h.Sum(nil)
	}
	return binary.LittleEndian.Uint64(sum[:8]), binary.LittleEndian.Uint64(sum[8:16])
}

// blockSums are one region's kept segments in one state cut into blocks:
// the sum of each block's periodograms and its segment count.
type blockSums struct {
	key    fitKey
	sums   [][]float64
	counts []int
}

// intervals sets Uncertainty on every computable marker of list (settings
// v2 onward; nothing when s.Uncertainty or the v2 windows are absent).
func (a *analysis) intervals(list []Marker) {
	u := a.s.Uncertainty
	if u == nil || a.v2 == nil || u.Resamples < 2 {
		return
	}
	v := a.v2
	perBlock := max(1, int(math.Round(u.BlockSeconds/(float64(v.step*v.wlen)/a.fs))))
	var blocks []blockSums
	keys := make([]fitKey, 0, len(v.regions))
	for k := range v.regions {
		keys = append(keys, k)
	}
	sort.Slice(keys, func(i, j int) bool {
		if keys[i].state != keys[j].state {
			return keys[i].state < keys[j].state
		}
		return keys[i].region < keys[j].region
	})
	for _, k := range keys {
		rs := v.regions[k]
		if len(rs.power) == 0 {
			continue
		}
		bs := blockSums{key: k}
		for i := 0; i < len(rs.power); i += perBlock {
			sum := make([]float64, v.nbins)
			n := 0
			for _, p := range rs.power[i:min(i+perBlock, len(rs.power))] {
				for j, x := range p {
					sum[j] += float64(x)
				}
				n++
			}
			bs.sums = append(bs.sums, sum)
			bs.counts = append(bs.counts, n)
		}
		blocks = append(blocks, bs)
	}
	if len(blocks) == 0 {
		return
	}
	for _, bs := range blocks {
		a.region(bs.key.state, bs.key.region) // fills the regional means before the workers read them
	}
	// The draws, in a fixed order (resample, region and state, block), so
	// that the result does not depend on the number of workers.
	rng := rand.New(rand.NewPCG(a.seed[0], a.seed[1]))
	draws := make([][][]int, u.Resamples)
	for b := range draws {
		draws[b] = make([][]int, len(blocks))
		for i, bs := range blocks {
			d := make([]int, len(bs.sums))
			for j := range d {
				d[j] = rng.IntN(len(bs.sums))
			}
			draws[b][i] = d
		}
	}
	values := make([]map[string]float64, u.Resamples)
	parallel(u.Resamples, a.workers, func(_, b int) {
		spectra := make(map[fitKey][]float64, len(blocks))
		for i, bs := range blocks {
			spec := make([]float64, v.nbins)
			n := 0
			for _, j := range draws[b][i] {
				for k, x := range bs.sums[j] {
					spec[k] += x
				}
				n += bs.counts[j]
			}
			for k := range spec {
				spec[k] *= v.corr[k] / float64(n)
			}
			spectra[bs.key] = spec
		}
		r := *a // a shallow copy: markers() reads a and writes only r.fits
		r.lean = true
		r.override = func(st ingest.EyeState, region string) ([]float64, string) {
			if _, why := a.region(st, region); why != "" {
				return nil, why
			}
			return spectra[fitKey{st, region}], ""
		}
		out := map[string]float64{}
		for _, m := range r.markers() {
			if m.Computable {
				out[m.Key()] = m.Value
			}
		}
		values[b] = out
	})
	// Small-sample widening about the estimate: √(n/(n − 1)) ·
	// t_{n−1}(q)/z(q), n the fewest blocks of a region in the state: the
	// bootstrap's plug-in variance is (n − 1)/n of the unbiased one, and a
	// variance from n blocks carries n − 1 degrees of freedom (Student t
	// quantiles in place of normal ones).
	inflation := map[ingest.EyeState]float64{}
	fewest := map[ingest.EyeState]int{}
	for _, bs := range blocks {
		if n, ok := fewest[bs.key.state]; !ok || len(bs.sums) < n {
			fewest[bs.key.state] = len(bs.sums)
		}
	}
	for st, n := range fewest {
		q := (1 + u.Level) / 2
		t := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(max(n-1, 1))}.Quantile(q)
		inflation[st] = math.Sqrt(float64(n)/float64(max(n-1, 1))) * t / normalQuantile(q)
	}
	lo, hi := (1-u.Level)/2, (1+u.Level)/2
	vals := make([]float64, 0, u.Resamples)
	for i := range list {
		m := &list[i]
		if !m.Computable {
			continue
		}
		if m.Name == DrowsinessIndex {
			m.Uncertainty = a.wilson(m.Value, u.Level)
			continue
		}
		vals = vals[:0]
		for _, vb := range values {
			if x, ok := vb[m.Key()]; ok {
				vals = append(vals, x)
			}
		}
		if len(vals) < 2 {
			continue
		}
		method := MethodBootstrap
		if len(vals) < u.Resamples {
			method += fmt.Sprintf("; %d of %d resamples gave a value", len(vals), u.Resamples)
		}
		c := inflation[m.State]
		least, most := markerRange(m.Name)
		m.Uncertainty = &Uncertainty{SE: c * sampleSD(vals),
			Low:   max(least, m.Value-c*(m.Value-quantile(vals, lo))),
			High:  min(most, m.Value+c*(quantile(vals, hi)-m.Value)),
			Level: u.Level, Method: method, Resamples: len(vals)}
	}
}

// wilson is the Wilson score interval of a share p of the primary state's
// posterior segments, n = kept seconds / segment seconds.
func (a *analysis) wilson(p, level float64) *Uncertainty {
	n := a.keptSeconds(a.primary, RegionPosterior) / a.s.Welch.SegmentSeconds
	if !(n > 0) {
		return nil
	}
	z := normalQuantile((1 + level) / 2)
	den := 1 + z*z/n
	centre := (p + z*z/(2*n)) / den
	half := z * math.Sqrt(p*(1-p)/n+z*z/(4*n*n)) / den
	return &Uncertainty{SE: math.Sqrt(p * (1 - p) / n), Low: max(0, centre-half), High: min(1, centre+half),
		Level: level, Method: MethodWilson}
}

// normalQuantile is Φ⁻¹(q) of the standard normal distribution.
func normalQuantile(q float64) float64 { return -math.Sqrt2 * math.Erfcinv(2*q) }

// sampleSD is the standard deviation with the n − 1 denominator.
func sampleSD(v []float64) float64 {
	var sum float64
	for _, x := range v {
		sum += x
	}
	mean := sum / float64(len(v))
	var ss float64
	for _, x := range v {
		d := x - mean
		ss += d * d
	}
	return math.Sqrt(ss / float64(len(v)-1))
}

// markerRange is the range a marker's value can take by its definition; the
// widened interval is clipped to it (a share stays in [0, 1], an
// attenuation 1 − EO/EC at most 1, a power ratio or a frequency at least 0).
func markerRange(name string) (float64, float64) {
	switch name {
	case RelDelta, RelTheta, RelAlpha, RelBeta, DrowsinessIndex, AperiodicR2:
		return 0, 1
	case AlphaReactivity:
		return math.Inf(-1), 1
	case PDRAsymmetry, AperiodicExponent, AperiodicOffset:
		return math.Inf(-1), math.Inf(1)
	}
	return 0, math.Inf(1) // frequencies and power ratios
}
