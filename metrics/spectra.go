package metrics

import (
	"math"
	"math/cmplx"
	"strings"

	"longwave/ingest"
)

// Line-frequency sources reported in Quality.LineFrequencySource.
const (
	LineFromSidecar  = "sidecar"
	LineFromSpectrum = "spectrum"
	LineNotFound     = "none"
)

// detectLine sets the line frequency by the rule of LineSettings: the
// sidecar's value, else the most prominent candidate peak in the raw
// spectrum of the analysed channels (their first AnalysisSeconds, at the
// recording's rate, before any filtering).
func (a *analysis) detectLine(rec *ingest.Recording) {
	if f := rec.Conditions.LineFrequency; f > 0 {
		a.lineHz, a.lineSource = f, LineFromSidecar
		return
	}
	a.lineHz, a.lineSource = 0, LineNotFound
	ls := a.s.Line
	seg := int(math.Round(ls.SegmentSeconds * a.fsIn))
	limit := int(math.Round(ls.AnalysisSeconds * a.fsIn))
	if seg < 2 {
		return
	}
	acc := make([]*Welch, a.workers)
	parallel(len(a.data), a.workers, func(w, c int) {
		if acc[w] == nil {
			acc[w] = NewWelch(a.fsIn, seg, 0)
		}
		left := limit
		for _, g := range a.segsIn {
			if left <= 0 {
				break
			}
			k := min(g.Count, left)
			acc[w].AddFloat32(a.data[c][g.First : g.First+k])
			left -= k
		}
	})
	var total *Welch
	for _, w := range acc {
		if w == nil {
			continue
		}
		if total == nil {
			total = w
		} else {
			total.Merge(w)
		}
	}
	if total == nil || total.Segments() == 0 {
		return
	}
	freqs := total.Freqs()
	psd := total.PSD(nil)
	best := 0.0
	for _, cand := range ls.CandidatesHz {
		if cand+ls.NeighbourHiHz >= a.fsIn/2 {
			continue // the neighbourhood must lie below Nyquist
		}
		peak := 0.0
		var around []float64
		for k, f := range freqs {
			d := math.Abs(f - cand)
			switch {
			case d < 0.5*a.fsIn/float64(seg)+1e-9:
				peak = math.Max(peak, psd[k])
			case d >= ls.NeighbourLoHz && d <= ls.NeighbourHiHz:
				around = append(around, psd[k])
			}
		}
		ref := median(around)
		if ref <= 0 {
			continue
		}
		if p := peak / ref; p >= ls.MinProminence && p > best {
			best = p
			a.lineHz, a.lineSource = cand, LineFromSpectrum
		}
	}
}

// powerResponse returns |H(e^{iω})|² of the cascade sos at f Hz.
func powerResponse(sos SOS, f, fs float64) float64 {
	z1 := cmplx.Exp(complex(0, -2*math.Pi*f/fs)) // z⁻¹
	z2 := z1 * z1
	h := complex(1, 0)
	for _, s := range sos {
		num := complex(s[0], 0) + complex(s[1], 0)*z1 + complex(s[2], 0)*z2
		den := complex(s[3], 0) + complex(s[4], 0)*z1 + complex(s[5], 0)*z2
		h *= num / den
	}
	m := cmplx.Abs(h)
	return m * m
}

// spectra estimates the Welch density of every good channel in every state
// over the clean runs, and divides it by the forward–backward power
// response |H|⁴ of the high- and low-pass filters where that is at least
// CorrectFloor (FilterSettings.CorrectResponse).
func (a *analysis) spectra() {
	seg := int(math.Round(a.s.Welch.SegmentSeconds * a.fs))
	overlap := int(math.Round(a.s.Welch.Overlap * float64(seg)))
	states := a.states()
	a.psd = map[ingest.EyeState][][]float64{}
	for _, st := range states {
		a.psd[st] = make([][]float64, len(a.data))
	}
	proto := NewWelch(a.fs, seg, overlap)
	a.freqs = proto.Freqs()
	corr := a.responseCorrection()
	used := a.usedChannels()
	parallel(len(used), a.workers, func(_, i int) {
		c := used[i]
		for _, st := range states {
			w := NewWelch(a.fs, seg, overlap)
			for _, r := range a.runs {
				if r.State == st {
					w.AddFloat32(a.data[c][r.First : r.First+r.Count])
				}
			}
			if w.Segments() == 0 {
				continue
			}
			p := w.PSD(nil)
			for k := range p {
				p[k] *= corr[k]
			}
			a.psd[st][c] = p
		}
	})
}

// states lists the eye states that have periods, in the order closed, open,
// unknown.
func (a *analysis) states() []ingest.EyeState {
	var out []ingest.EyeState
	for _, st := range []ingest.EyeState{ingest.EyesClosed, ingest.EyesOpen, ingest.EyesUnknown} {
		for _, p := range a.periods {
			if p.State == st {
				out = append(out, st)
				break
			}
		}
	}
	return out
}

// cleanSeconds is the clean data of a state, s.
func (a *analysis) cleanSeconds(st ingest.EyeState) float64 {
	var n int
	for _, e := range a.eps {
		if e.State == st && e.Reject == "" {
			n++
		}
	}
	return float64(n*a.length) / a.fs
}

// stateUsable returns "" when state st has enough clean data for markers,
// else the reason.
func (a *analysis) stateUsable(st ingest.EyeState) string {
	has := false
	for _, p := range a.periods {
		has = has || p.State == st
	}
	if !has {
		return "no " + stateWords(st) + " period"
	}
	if cs := a.cleanSeconds(st); cs < a.s.MinCleanSeconds {
		return fmtReason("only %g s of clean %s data, needs %g s", cs, stateWords(st), a.s.MinCleanSeconds)
	}
	return ""
}

func stateWords(st ingest.EyeState) string {
	switch st {
	case ingest.EyesClosed:
		return "eyes-closed"
	case ingest.EyesOpen:
		return "eyes-open"
	default:
		return "unknown-state"
	}
}

// region returns the mean spectrum of the good channels of a region in a
// state, or a reason why there is none.
func (a *analysis) region(st ingest.EyeState, name string) ([]float64, string) {
	if a.override != nil {
		return a.override(st, name)
	}
	if a.v2 != nil {
		return a.regionV2(st, name)
	}
	if why := a.stateUsable(st); why != "" {
		return nil, why
	}
	var sum []float64
	n := 0
	for _, label := range a.s.Regions[name] {
		for c, l := range a.names {
			if l != label || !a.good[c] || a.psd[st][c] == nil {
				continue
			}
			if sum == nil {
				sum = make([]float64, len(a.psd[st][c]))
			}
			for k, v := range a.psd[st][c] {
				sum[k] += v
			}
			n++
		}
	}
	if n == 0 {
		return nil, fmtReason("no good channel of the %s region (%s)", strings.ReplaceAll(name, "_", " "),
			strings.Join(a.s.Regions[name], " "))
	}
	for k := range sum {
		sum[k] /= float64(n)
	}
	return sum, ""
}
