package metrics

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"longwave/ingest"
)

// Ocular correction methods (OcularSettings.Method).
const (
	// OcularNone leaves the signals as they are (V1).
	OcularNone = "none"
	// OcularRegression removes eye artefacts by least-squares regression
	// (Gratton, Coles & Donchin 1983): on the recording's EOG channels where
	// it has usable ones, else on a blink-gated frontal-pole proxy.
	OcularRegression = "regression"
)

// OcularSettings say how eye artefacts are corrected before referencing
// (settings v2 onward). See correctOcular for the method and its sources.
type OcularSettings struct {
	// Method is OcularNone or OcularRegression.
	Method string `json:"method"`
	// ProxyChannels stand for the vertical EOG when the file has no usable
	// EOG channel: their mean (the good ones among them) is the proxy.
	ProxyChannels []string `json:"proxy_channels"`
	// BlinkMinMicrovolts and BlinkRobustSD set the blink detection
	// threshold on the smoothed proxy: the larger of BlinkMinMicrovolts and
	// BlinkRobustSD × the proxy's robust SD (1.4826 × median absolute
	// deviation from the median).
	BlinkMinMicrovolts float64 `json:"blink_min_uv"`
	BlinkRobustSD      float64 `json:"blink_robust_sd"`
	// BlinkSmoothSeconds is the length of the centred moving average the
	// proxy is smoothed with before detection (it suppresses alpha and
	// muscle, not the 0.2–0.4 s blink).
	BlinkSmoothSeconds float64 `json:"blink_smooth_s"`
	// BlinkPadSeconds widen each run above the threshold on both sides, so
	// that the whole blink and the start of the high-pass filter's slow
	// undershoot lie inside its window; BlinkRampSeconds are the raised-
	// cosine flanks beyond the pad, where the window weight falls from 1 to
	// 0 (no step in the corrected signal).
	BlinkPadSeconds  float64 `json:"blink_pad_s"`
	BlinkRampSeconds float64 `json:"blink_ramp_s"`
}

// defaultOcular returns the correction of settings v2: regression, with
// Fp1 and Fp2 as the proxy; the blink threshold is the larger of 50 µV and
// 5 robust SDs of the 0.1-s smoothed proxy; windows padded by 0.5 s with
// 0.25-s flanks.
//
// Reasons (this design's choices, checked on the synthetic suite; see
// DEVELOPERS.md "Ocular correction"): blinks measure about 50–200 µV or more
// at the frontal poles against a resting background of 5–30 µV there
// (common practice), so 50 µV and 5 robust SDs stay above the background
// (a Gaussian background crosses 5 SD in 3 of 10⁷ samples) and below every
// blink worth correcting: a 50-µV blink reaches the posterior channels
// at a few µV. The 0.1-s average passes a 0.2–0.4 s blink almost
// unchanged (its peak drops by under 10 %) and halves a 10-Hz rhythm
// and more. The blink is at most 0.4 s long, so 0.5 s of pad holds
// all of it from any sample above the threshold.
func defaultOcular() *OcularSettings {
	return &OcularSettings{
		Method:             OcularRegression,
		ProxyChannels:      []string{"Fp1", "Fp2"},
		BlinkMinMicrovolts: 50,
		BlinkRobustSD:      5,
		BlinkSmoothSeconds: 0.1,
		BlinkPadSeconds:    0.5,
		BlinkRampSeconds:   0.25,
	}
}

// OcularReport says what the ocular correction did to one recording.
type OcularReport struct {
	// Method is "eog regression", "frontal-pole regression" or "none".
	Method string `json:"method"`
	// Predictors are the EOG channels, or the proxy's frontal poles.
	Predictors []string `json:"predictors"`
	// Coefficients[channel] are the fitted propagation factors, one per
	// predictor (µV per µV).
	Coefficients map[string][]float64 `json:"coefficients,omitempty"`
	// Blinks and BlinkSeconds (proxy only): blink windows found and their
	// total length (weight above 0), s.
	Blinks       int     `json:"blinks"`
	BlinkSeconds float64 `json:"blink_seconds"`
	// Reason says why nothing was corrected, when nothing was.
	Reason string `json:"reason,omitempty"`
}

// correctOcular removes eye artefacts from the good analysed channels, after
// filtering and bad-channel marking and before the common average
// (Settings.Ocular; nothing when it is nil or OcularNone).
//
// Method: regression (Gratton G, Coles MGH, Donchin E (1983). A new method
// for off-line removal of ocular artifact. Electroencephalogr Clin
// Neurophysiol 55(4):468–484; citation from memory, see REFERENCES.md §2a),
// as mne.preprocessing.EOGRegression implements it: with R the predictor
// signals and x a channel, each centred over its segment,
//
//	b = (R Rᵀ)⁻¹ R xᵀ       (least squares, one b per channel)
//	x ← x − bᵀ (R − mean R)
//
// fitted over all segments (a segment plays the part of an MNE epoch: its
// own means). The predictors are filtered exactly as the EEG is.
//
// Predictors. Where the recording has EOG channels (ingest.KindEOG, at the
// EEG rate, not flat), they are the predictors and the fit runs over the
// whole recording, as in Gratton et al. and in MNE. Where it has none, the
// vertical EOG is stood in for by the mean of the frontal poles (Fp1, Fp2),
// the sites nearest the eyes; MNE's own blink finder takes a frontal EEG
// channel as the EOG in the same way when a file has no EOG (common
// practice). A frontal pole also carries brain signal, and background
// shared with every other site; regressed over the whole recording it would
// take that shared part out of every channel. So the proxy is gated: it is
// kept only inside blink windows (runs of the smoothed proxy above the
// threshold of OcularSettings, padded, with raised-cosine flanks) and is 0
// elsewhere, and the regression on that gated proxy is fitted and applied
// there only — Gratton et al. likewise estimate the blink propagation on
// blink episodes found on the vertical EOG. Outside blinks nothing changes,
// so a blink-free recording is left exactly as it was; inside a window a
// channel loses, besides the blink, its propagation factor times the
// frontal poles' own brain signal (a few per cent at posterior sites). The
// frontal poles themselves keep only their difference there. Eye movements
// (saccades, horizontal EOG) are not corrected on the proxy path: a
// horizontal movement is opposite in sign at F7 and F8 and cancels in the
// proxy. Blinks are taken as positive at the frontal poles (the eyeball
// turns up as the lid closes; common practice).
//
// Why not independent component analysis (FastICA, Hyvärinen 1999), the
// other published substitute: on a 19-channel clinical cap the blink is not
// always one clean component, the component count and the unmixing depend
// on a random start and on convergence, and a component judged ocular by
// its correlation with the frontal poles also carries brain signal at every
// site, so a blink-free recording would not stay unchanged. The gated
// regression is deterministic, costs one pass over the data, and touches
// only the seconds that hold blinks.
func (a *analysis) correctOcular(rec *ingest.Recording) error {
	o := a.s.Ocular
	if o == nil || o.Method == OcularNone {
		return nil
	}
	if o.Method != OcularRegression {
		return fmt.Errorf("metrics: ocular correction %q: unknown method", o.Method)
	}
	targets := a.usedChannels()
	if eog, names := a.eogPredictors(rec); len(eog) > 0 {
		a.ocular = &OcularReport{Method: "eog regression", Predictors: names}
		a.ocular.Coefficients = named(a.names, targets, regressOut(a.data, targets, eog, a.segs, true))
		return nil
	}
	var proxy []int
	var names []string
	for _, p := range o.ProxyChannels {
		for _, c := range targets {
			if a.names[c] == p {
				proxy = append(proxy, c)
				names = append(names, p)
			}
		}
	}
	if len(proxy) == 0 {
		a.ocular = &OcularReport{Method: "none", Reason: "no EOG channel and no good frontal-pole channel to stand for one"}
		return nil
	}
	gated, blinks, seconds := blinkProxy(a.data, proxy, a.segs, a.fs, o)
	a.ocular = &OcularReport{Method: "frontal-pole regression", Predictors: names, Blinks: blinks, BlinkSeconds: seconds}
	if blinks == 0 {
		a.ocular.Reason = "no blink found on the frontal poles"
		return nil
	}
	a.ocular.Coefficients = named(a.names, targets, regressOut(a.data, targets, [][]float64{gated}, a.segs, false))
	return nil
}

func named(names []string, idx []int, coef [][]float64) map[string][]float64 {
	out := make(map[string][]float64, len(idx))
	for i, c := range idx {
		out[names[c]] = coef[i]
	}
	return out
}

// eogPredictors returns the recording's usable EOG channels, filtered like
// the EEG (FilterSegments) at the analysis rate, and their labels. A channel
// at another rate, shorter than the EEG, or flat (level below the flat-
// channel limit) is not used.
func (a *analysis) eogPredictors(rec *ingest.Recording) ([][]float64, []string) {
	var out [][]float64
	var names []string
	for i := range rec.Channels {
		ch := &rec.Channels[i]
		if ch.Kind != ingest.KindEOG || math.Abs(ch.SampleRate-a.fsIn) > 1e-9*a.fsIn || len(ch.Samples) < a.nIn {
			continue
		}
		x := a.filterCopy(ch.Samples[:a.nIn])
		if windowLevel(x, a.segs, max(2, int(math.Round(a.s.Channel.WindowSeconds*a.fs)))) < a.s.Channel.FlatSDMicrovolts {
			continue
		}
		y := make([]float64, len(x))
		for k, v := range x {
			y[k] = float64(v)
		}
		out = append(out, y)
		names = append(names, ch.Label)
	}
	return out, names
}

// filterCopy returns x filtered as analysis.filter filters an EEG channel
// (the low-pass at the recording's rate, every q-th sample, the high-pass
// and notch at the analysis rate, per segment, zero phase), without touching
// x: the EOG channels are not part of the analysed set.
func (a *analysis) filterCopy(x []float32) []float32 {
	out := make([]float32, a.n)
	padFast, padSlow := PadLen(a.lp), PadLen(a.slow)
	for i, g := range a.segsIn {
		dst := out[a.segs[i].First : a.segs[i].First+a.segs[i].Count]
		if g.Count <= padFast || len(dst) <= padSlow {
			continue // left at 0, as the EEG is
		}
		buf := make([]float64, g.Count+2*padFast)
		for k, v := range x[g.First : g.First+g.Count] {
			buf[k] = float64(v)
		}
		y := FiltFilt(buf, buf[:g.Count], a.lp)
		dec := make([]float64, len(dst), len(dst)+2*padSlow)
		for k := range dec {
			dec[k] = y[k*a.q]
		}
		for k, v := range FiltFilt(dec[:cap(dec)], dec, a.slow) {
			dst[k] = float32(v)
		}
	}
	return out
}

// regressOut fits and removes the predictors refs from the channels
// data[targets[i]] by least squares over the segments segs, and returns the
// coefficients, coef[i][k] for target i and predictor k:
//
//	b = (R Rᵀ)⁻¹ R xᵀ,   x ← x − bᵀ R
//
// with every signal centred over each segment when centre is true (as MNE's
// EOGRegression centres each epoch; x itself keeps its mean), and as they
// are when it is false (a regression through the origin, for the gated
// proxy, which is zero outside blink windows and must leave those samples
// untouched; the signals are high-passed, so their means are near 0).
//
// A singular R Rᵀ (a predictor that is zero or a copy of another) gives no
// correction: the coefficients are 0.
func regressOut(data [][]float32, targets []int, refs [][]float64, segs []ingest.Segment, centre bool) [][]float64 {
	k := len(refs)
	centred := make([][]float64, k)
	for j, r := range refs {
		centred[j] = make([]float64, len(r))
		for _, g := range segs {
			seg := r[g.First : g.First+g.Count]
			m := 0.0
			if centre {
				m = mean(seg)
			}
			for t, v := range seg {
				centred[j][g.First+t] = v - m
			}
		}
	}
	cov := mat.NewSymDense(k, nil)
	for i := 0; i < k; i++ {
		for j := i; j < k; j++ {
			cov.SetSym(i, j, dotSegs(centred[i], centred[j], segs))
		}
	}
	var chol mat.Cholesky
	ok := chol.Factorize(cov)
	coef := make([][]float64, len(targets))
	x := make([]float64, 0)
	for i, c := range targets {
		coef[i] = make([]float64, k)
		if !ok {
			continue
		}
		x = x[:0]
		for _, v := range data[c] {
			x = append(x, float64(v))
		}
		for _, g := range segs {
			if !centre {
				break
			}
			seg := x[g.First : g.First+g.Count]
			m := mean(seg)
			for t := range seg {
				seg[t] -= m
			}
		}
		rhs := mat.NewVecDense(k, nil)
		for j := 0; j < k; j++ {
			rhs.SetVec(j, dotSegs(centred[j], x, segs))
		}
		var b mat.VecDense
		if err := chol.SolveVecTo(&b, rhs); err != nil {
			continue
		}
		for j := 0; j < k; j++ {
			coef[i][j] = b.AtVec(j)
		}
		d := data[c]
		for _, g := range segs {
			for t := g.First; t < g.First+g.Count; t++ {
				v := float64(d[t])
				for j := 0; j < k; j++ {
					v -= coef[i][j] * centred[j][t]
				}
				d[t] = float32(v)
			}
		}
	}
	return coef
}

func mean(x []float64) float64 {
	if len(x) == 0 {
		return 0
	}
	s := 0.0
	for _, v := range x {
		s += v
	}
	return s / float64(len(x))
}

func dotSegs(a, b []float64, segs []ingest.Segment) float64 {
	s := 0.0
	for _, g := range segs {
		for t := g.First; t < g.First+g.Count; t++ {
			s += a[t] * b[t]
		}
	}
	return s
}

// blinkProxy builds the gated frontal-pole proxy: p = mean of the proxy
// channels; s = p smoothed by a centred moving average of
// BlinkSmoothSeconds; the threshold θ = max(BlinkMinMicrovolts,
// BlinkRobustSD · 1.4826 · MAD(s)) over the whole recording; every run of
// s > θ, widened by BlinkPadSeconds and given raised-cosine flanks of
// BlinkRampSeconds, is a blink window of weight w(t) (1 inside, falling to
// 0 over the flank; overlapping windows take the larger weight; windows
// stop at segment edges). It returns w·p, the number of windows (after
// merging) and their total length in seconds (w > 0).
func blinkProxy(data [][]float32, proxy []int, segs []ingest.Segment, fs float64, o *OcularSettings) ([]float64, int, float64) {
	n := len(data[proxy[0]])
	p := make([]float64, n)
	for _, c := range proxy {
		for t, v := range data[c] {
			p[t] += float64(v) / float64(len(proxy))
		}
	}
	half := max(0, int(math.Round(o.BlinkSmoothSeconds*fs/2)))
	s := make([]float64, n)
	var inSegs []float64
	for _, g := range segs {
		for t := g.First; t < g.First+g.Count; t++ {
			lo, hi := max(g.First, t-half), min(g.First+g.Count, t+half+1)
			s[t] = mean(p[lo:hi])
		}
		inSegs = append(inSegs, s[g.First:g.First+g.Count]...)
	}
	med := median(inSegs)
	for i, v := range inSegs {
		inSegs[i] = math.Abs(v - med)
	}
	theta := math.Max(o.BlinkMinMicrovolts, o.BlinkRobustSD*1.4826*median(inSegs))

	w := make([]float64, n)
	pad := int(math.Round(o.BlinkPadSeconds * fs))
	ramp := int(math.Round(o.BlinkRampSeconds * fs))
	for _, g := range segs {
		end := g.First + g.Count
		for t := g.First; t < end; {
			if s[t] <= theta {
				t++
				continue
			}
			u := t
			for u < end && s[u] > theta {
				u++
			}
			a, b := max(g.First, t-pad), min(end, u+pad)
			for i := a; i < b; i++ {
				w[i] = 1
			}
			for j := 1; j <= ramp; j++ {
				// raised cosine from 1 (next to the pad) to 0 (past the flank)
				v := 0.5 * (1 + math.Cos(math.Pi*float64(j)/float64(ramp+1)))
				if i := a - j; i >= g.First {
					w[i] = math.Max(w[i], v)
				}
				if i := b - 1 + j; i < end {
					w[i] = math.Max(w[i], v)
				}
			}
			t = u
		}
	}
	windows, kept := 0, 0
	for t := range w {
		if w[t] > 0 {
			kept++
			if t == 0 || w[t-1] == 0 {
				windows++
			}
		}
		p[t] *= w[t]
	}
	return p, windows, float64(kept) / fs
}
