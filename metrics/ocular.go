package metrics

import (
	"fmt"
	"math"
	"slices"

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
	// MaxWindowShare: when the blink windows cover more than this share of
	// the recording, the frontal poles are not blinking but broken or
	// swamped (a loose electrode, constant movement), and nothing is
	// corrected; the artefact rules then judge the windows.
	MaxWindowShare float64 `json:"max_window_share"`
}

// defaultOcular returns the correction of settings v2: regression, with
// Fp1 and Fp2 as the proxy; the eye-event threshold is the larger of 50 µV
// and 5 robust SDs of the 0.1-s smoothed signal; windows padded by 0.5 s,
// with 0.25-s flanks on the proxy path; no correction when the proxy's
// windows would cover more than 90 % of the recording.
//
// Reasons (this design's choices, checked on the synthetic suite; see
// DEVELOPERS.md "Ocular correction"): blinks measure about 50–200 µV or more
// at the frontal poles against a resting background of 5–30 µV there
// (common practice), so 50 µV and 5 robust SDs stay above the background (a
// Gaussian background passes 5 SD in under 6 of 10⁷ samples) and below
// every blink worth correcting: a 50-µV blink reaches the posterior channels
// at a few µV. The 0.1-s centred average keeps 82–95 % of a 0.2–0.4 s
// blink's peak and leaves under 5 % of a 10-Hz rhythm (a boxcar's response
// sin(πfT)/(πfT)), so alpha and muscle do not reach the threshold. A blink
// lasts at most 0.4 s, so 0.5 s of pad holds all of it from any sample above
// the threshold, and the flanks keep the corrected signal free of steps. At
// 30 blinks a minute the windows cover about 55 % of the recording (seen
// 93–100 s of 180); beyond 90 % the frontal poles are not blinking but
// broken or swamped.
func defaultOcular() *OcularSettings {
	return &OcularSettings{
		Method:             OcularRegression,
		ProxyChannels:      []string{"Fp1", "Fp2"},
		BlinkMinMicrovolts: 50,
		BlinkRobustSD:      5,
		BlinkSmoothSeconds: 0.1,
		BlinkPadSeconds:    0.5,
		BlinkRampSeconds:   0.25,
		MaxWindowShare:     0.9,
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
	// Blinks and BlinkSeconds: the eye-event windows found (on the EOG
	// channels, or blink windows on the proxy) and their total length in
	// seconds (on the proxy including the flanks).
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
// where a stretch of samples fitted together plays the part of an MNE
// epoch (its own means). The predictors are filtered exactly as the EEG is.
//
// Predictors. Where the recording has EOG channels (ingest.KindEOG, at the
// EEG rate, not flat), they are the predictors. The coefficients are fitted
// on the eye events the EOG shows (eyeEvents on each EOG channel, either
// sign: blinks and eye movements) and applied to the whole recording — the
// workflow MNE documents for EOGRegression after Croft RJ, Barry RJ (2000),
// Removal of ocular artifact from the EEG: a review, Neurophysiol Clin
// 30(1):5–19 (citation from memory): fit on EOG epochs, apply to the raw
// data. Fitted on the events, the factors measure the eye's propagation;
// fitted on a whole blink-free recording they would measure only the brain
// signal that EOG and EEG share, and subtracting that is harm. A recording
// whose EOG shows no event is left as it was. Where it has none, the
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
	// Every analysed channel that is not flat is corrected, the ones the
	// level rule found noisy included: large blinks alone make the frontal
	// poles "noisy", and the rule is applied again on the corrected signals.
	var targets []int
	for c, lv := range a.level {
		if lv >= a.s.Channel.FlatSDMicrovolts {
			targets = append(targets, c)
		}
	}
	defer a.remarkBadChannels()
	if eog, names := a.eogPredictors(rec); len(eog) > 0 {
		// Fit on the eye events the EOG shows (MNE: EOG epochs), apply to
		// the whole recording (MNE: apply to the raw data).
		var events []ingest.Segment
		for _, x := range eog {
			events = unionEvents(events, eyeEvents(x, a.segs, a.fs, o, true))
		}
		a.ocular = &OcularReport{Method: "eog regression", Predictors: names, Blinks: len(events)}
		for _, w := range events {
			a.ocular.BlinkSeconds += float64(w.Count) / a.fs
		}
		if len(events) == 0 {
			a.ocular.Reason = "no blink or eye movement found on the EOG channels"
			return nil
		}
		coef := fitRegression(a.data, targets, eog, events, true, a.workers)
		applyRegression(a.data, targets, eog, coef, a.segs, true, a.workers)
		a.ocular.Coefficients = named(a.names, targets, coef)
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
		a.ocular = &OcularReport{Method: "none", Reason: "no EOG channel and no frontal-pole channel with signal to stand for one"}
		return nil
	}
	gated, spans := blinkProxy(a.data, proxy, a.segs, a.fs, o)
	blinks, seconds := len(spans), 0.0
	for _, w := range spans {
		seconds += float64(w.Count) / a.fs
	}
	a.ocular = &OcularReport{Method: "frontal-pole regression", Predictors: names, Blinks: blinks, BlinkSeconds: seconds}
	total := float64(a.n) / a.fs
	switch {
	case blinks == 0:
		a.ocular.Reason = "no blink found on the frontal poles"
		return nil
	case seconds > o.MaxWindowShare*total:
		a.ocular.Reason = fmt.Sprintf("the frontal poles stay above the blink threshold for %.0f %% of the recording (limit %.0f %%): not blinks, left to the artefact rules",
			100*seconds/total, 100*o.MaxWindowShare)
		return nil
	}
	a.ocular.Coefficients = named(a.names, targets, regressOut(a.data, targets, [][]float64{gated}, spans, false, a.workers))
	return nil
}

// remarkBadChannels measures the analysed channels' levels again after the
// correction and applies the channel rules afresh (the analysed channels'
// only bad reasons so far are those rules'), so that a frontal pole that
// was "noisy" only from blinks rejoins the reference, and one that is noisy
// for another reason stays out.
func (a *analysis) remarkBadChannels() {
	win := max(2, int(math.Round(a.s.Channel.WindowSeconds*a.fs)))
	parallel(len(a.names), a.workers, func(_, c int) {
		a.level[c] = windowLevel(a.data[c], a.segs, win)
	})
	for _, name := range a.names {
		delete(a.badReason, name)
	}
	a.bad = nil
	a.markBadChannels()
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
	var chans []*ingest.Channel
	for i := range rec.Channels {
		ch := &rec.Channels[i]
		if ch.Kind == ingest.KindEOG && math.Abs(ch.SampleRate-a.fsIn) <= 1e-9*a.fsIn && len(ch.Samples) >= a.nIn {
			chans = append(chans, ch)
		}
	}
	filtered := make([][]float64, len(chans))
	win := max(2, int(math.Round(a.s.Channel.WindowSeconds*a.fs)))
	parallel(len(chans), a.workers, func(_, i int) {
		x := a.filterCopy(chans[i].Samples[:a.nIn])
		if windowLevel(x, a.segs, win) < a.s.Channel.FlatSDMicrovolts {
			return
		}
		y := make([]float64, len(x))
		for k, v := range x {
			y[k] = float64(v)
		}
		filtered[i] = y
	})
	var out [][]float64
	var names []string
	for i, y := range filtered {
		if y != nil {
			out = append(out, y)
			names = append(names, chans[i].Label)
		}
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

// regressOut fits the predictors refs to the channels data[targets[i]] by
// least squares over the segments segs and removes them there
// (fitRegression, then applyRegression on the same segments); it returns the
// coefficients.
func regressOut(data [][]float32, targets []int, refs [][]float64, segs []ingest.Segment, centre bool, workers int) [][]float64 {
	coef := fitRegression(data, targets, refs, segs, centre, workers)
	applyRegression(data, targets, refs, coef, segs, centre, workers)
	return coef
}

// fitRegression returns the least-squares coefficients of the predictors
// refs for the channels data[targets[i]] over the samples of segs,
// coef[i][k] for target i and predictor k:
//
//	b = (R Rᵀ)⁻¹ R xᵀ
//
// with every signal centred over each segment when centre is true (as MNE's
// EOGRegression centres each epoch), and as they are when it is false (a
// regression through the origin, for the gated proxy, which is zero outside
// blink windows; the signals are high-passed, so their means are near 0). A
// singular R Rᵀ (a predictor that is zero over segs, or a copy of another)
// gives coefficients 0: no correction.
func fitRegression(data [][]float32, targets []int, refs [][]float64, segs []ingest.Segment, centre bool, workers int) [][]float64 {
	k := len(refs)
	means := segmentMeans(refs, segs, centre)
	cov := mat.NewSymDense(k, nil)
	for i := 0; i < k; i++ {
		for j := i; j < k; j++ {
			cov.SetSym(i, j, dotCentred(refs[i], refs[j], means[i], means[j], segs))
		}
	}
	coef := make([][]float64, len(targets))
	for i := range coef {
		coef[i] = make([]float64, k)
	}
	var chol mat.Cholesky
	var inv mat.SymDense
	if !chol.Factorize(cov) || chol.InverseTo(&inv) != nil {
		return coef
	}
	// R xᵀ needs no centring of x: each centred predictor sums to 0 over
	// each segment, so x's segment means drop out.
	parallel(len(targets), workers, func(_, i int) {
		x := data[targets[i]]
		rhs := make([]float64, k)
		for j := range rhs {
			r := refs[j]
			for s, g := range segs {
				m := means[j][s]
				for t := g.First; t < g.First+g.Count; t++ {
					rhs[j] += (r[t] - m) * float64(x[t])
				}
			}
		}
		for a := 0; a < k; a++ {
			for b := 0; b < k; b++ {
				coef[i][a] += inv.At(a, b) * rhs[b]
			}
		}
	})
	return coef
}

// applyRegression removes the fitted predictors from the targets over the
// samples of segs: x ← x − bᵀ (R − mean R), the predictors centred over each
// segment when centre is true (MNE's EOGRegression.apply; x keeps its own
// mean), as they are otherwise.
func applyRegression(data [][]float32, targets []int, refs [][]float64, coef [][]float64, segs []ingest.Segment, centre bool, workers int) {
	means := segmentMeans(refs, segs, centre)
	parallel(len(targets), workers, func(_, i int) {
		d := data[targets[i]]
		for s, g := range segs {
			for t := g.First; t < g.First+g.Count; t++ {
				v := float64(d[t])
				for j, r := range refs {
					v -= coef[i][j] * (r[t] - means[j][s])
				}
				d[t] = float32(v)
			}
		}
	})
}

// segmentMeans returns means[j][s], the mean of refs[j] over segment s
// (0 for every segment when centre is false). The regression centres a
// predictor sample as it reads it, r[t] − means[j][s], rather than from a
// centred copy: one value per segment instead of a copy of the signal.
func segmentMeans(refs [][]float64, segs []ingest.Segment, centre bool) [][]float64 {
	means := make([][]float64, len(refs))
	for j, r := range refs {
		means[j] = make([]float64, len(segs))
		if !centre {
			continue
		}
		for s, g := range segs {
			means[j][s] = mean(r[g.First : g.First+g.Count])
		}
	}
	return means
}

func mean32(x []float32) float64 {
	if len(x) == 0 {
		return 0
	}
	s := 0.0
	for _, v := range x {
		s += float64(v)
	}
	return s / float64(len(x))
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

// dotCentred is Σ over the samples of segs of (a − ma)(b − mb), ma and mb
// the per-segment means (segmentMeans).
func dotCentred(a, b, ma, mb []float64, segs []ingest.Segment) float64 {
	s := 0.0
	for k, g := range segs {
		for t := g.First; t < g.First+g.Count; t++ {
			s += (a[t] - ma[k]) * (b[t] - mb[k])
		}
	}
	return s
}

// eyeEvents returns the eye-event windows of signal x (µV, analysis rate):
// with y = x smoothed by a centred moving average of BlinkSmoothSeconds
// (inside each segment), |y − median y| when absolute is true (an EOG
// derivation's sign depends on its montage) or y − median y when it is false
// (blinks are positive at the frontal poles), the threshold θ =
// max(BlinkMinMicrovolts, BlinkRobustSD · 1.4826 · MAD(y)) over the whole
// recording (the median and MAD taken over every h-th smoothed sample, h
// the smoothing half-width: neighbours closer than that are nearly the same
// value, and the subsample makes the two order statistics h times cheaper),
// and every run above θ widened by BlinkPadSeconds on both sides,
// clipped to its segment, overlapping windows merged. The windows are
// sorted.
func eyeEvents(x []float64, segs []ingest.Segment, fs float64, o *OcularSettings, absolute bool) []ingest.Segment {
	half := max(0, int(math.Round(o.BlinkSmoothSeconds*fs/2)))
	y := make([]float64, len(x))
	var inSegs []float64
	for _, g := range segs {
		// running sum: y[t] = mean of x over [t−half, t+half] ∩ segment
		end := g.First + g.Count
		sum, lo, hi := 0.0, g.First, g.First
		for t := g.First; t < end; t++ {
			for hi < min(end, t+half+1) {
				sum += x[hi]
				hi++
			}
			for lo < t-half {
				sum -= x[lo]
				lo++
			}
			y[t] = sum / float64(hi-lo)
		}
		for t := g.First; t < end; t += max(1, half) {
			inSegs = append(inSegs, y[t])
		}
	}
	med := median(inSegs)
	for i, v := range inSegs {
		inSegs[i] = math.Abs(v - med)
	}
	theta := math.Max(o.BlinkMinMicrovolts, o.BlinkRobustSD*1.4826*median(inSegs))
	above := func(t int) bool {
		if absolute {
			return math.Abs(y[t]-med) > theta
		}
		return y[t]-med > theta
	}
	pad := int(math.Round(o.BlinkPadSeconds * fs))
	var out []ingest.Segment
	for _, g := range segs {
		end := g.First + g.Count
		for t := g.First; t < end; {
			if !above(t) {
				t++
				continue
			}
			u := t
			for u < end && above(u) {
				u++
			}
			a, b := max(g.First, t-pad), min(end, u+pad)
			if n := len(out); n > 0 && out[n-1].First+out[n-1].Count >= a {
				out[n-1].Count = b - out[n-1].First
			} else {
				out = append(out, ingest.Segment{First: a, Count: b - a})
			}
			t = u
		}
	}
	return out
}

// unionEvents merges two sorted window lists.
func unionEvents(a, b []ingest.Segment) []ingest.Segment {
	all := append(append([]ingest.Segment(nil), a...), b...)
	slices.SortFunc(all, func(x, y ingest.Segment) int { return x.First - y.First })
	var out []ingest.Segment
	for _, w := range all {
		if n := len(out); n > 0 && out[n-1].First+out[n-1].Count >= w.First {
			out[n-1].Count = max(out[n-1].Count, w.First+w.Count-out[n-1].First)
			continue
		}
		out = append(out, w)
	}
	return out
}

// blinkProxy builds the gated frontal-pole proxy: p = mean of the proxy
// channels; its blink windows (eyeEvents, positive deflections) get weight
// 1, with raised-cosine flanks of BlinkRampSeconds beyond them falling to 0
// (inside the segment; overlapping flanks take the larger weight); the
// gated proxy is w·p. It returns w·p and the stretches where w > 0 (each
// window with its flanks, overlapping ones merged), sorted: outside them the
// gated proxy is 0, so a regression on it needs only those samples.
func blinkProxy(data [][]float32, proxy []int, segs []ingest.Segment, fs float64, o *OcularSettings) ([]float64, []ingest.Segment) {
	n := len(data[proxy[0]])
	p := make([]float64, n)
	for _, c := range proxy {
		for t, v := range data[c] {
			p[t] += float64(v) / float64(len(proxy))
		}
	}
	wins := eyeEvents(p, segs, fs, o, false)
	w := make([]float64, n)
	ramp := int(math.Round(o.BlinkRampSeconds * fs))
	for _, win := range wins {
		var g ingest.Segment
		for _, s := range segs {
			if win.First >= s.First && win.First < s.First+s.Count {
				g = s
			}
		}
		a, b := win.First, win.First+win.Count
		for i := a; i < b; i++ {
			w[i] = 1
		}
		for j := 1; j <= ramp; j++ {
			v := 0.5 * (1 + math.Cos(math.Pi*float64(j)/float64(ramp+1)))
			if i := a - j; i >= g.First {
				w[i] = math.Max(w[i], v)
			}
			if i := b - 1 + j; i < g.First+g.Count {
				w[i] = math.Max(w[i], v)
			}
		}
	}
	var spans []ingest.Segment
	for t := range w {
		p[t] *= w[t]
		if w[t] == 0 {
			continue
		}
		if n := len(spans); n > 0 && spans[n-1].First+spans[n-1].Count == t {
			spans[n-1].Count++
		} else {
			spans = append(spans, ingest.Segment{First: t, Count: 1})
		}
	}
	return p, spans
}
