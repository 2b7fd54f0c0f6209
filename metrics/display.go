package metrics

import (
	"math"
)

// display builds the visit screen's products: for every state with enough
// clean data, the posterior spectrum over DisplaySettings.SpectrumBand (the
// Welch grid, bins lo ≤ f ≤ hi) with the aperiodic fit and the peak of the
// rhythm search (0 when none is distinct); and, for every state with a clean
// run, an excerpt of TraceSeconds (or the whole run when shorter) from the
// start of the longest clean run, for each good trace channel, decimated by
// q = max(1, floor(fs / TraceRateHz)) — plain sub-sampling, safe because the
// 45 Hz low-pass already removed what the display rate cannot carry.
func (a *analysis) display() Display {
	d := Display{Spectra: []Spectrum{}, Traces: []Trace{}}
	ds := a.s.Display
	for _, st := range a.states() {
		spec, why := a.region(st, RegionPosterior)
		if why != "" {
			continue
		}
		sp := Spectrum{State: st, Region: RegionPosterior}
		fit, fitErr := a.fitOf(st, RegionPosterior, spec, a.fitCache())
		for k, f := range a.freqs {
			if f < ds.SpectrumBand.LoHz || f > ds.SpectrumBand.HiHz {
				continue
			}
			sp.Freqs = append(sp.Freqs, f)
			sp.Power = append(sp.Power, spec[k])
			if fitErr == nil {
				sp.Aperiodic = append(sp.Aperiodic, fit.AperiodicAt(f))
			}
		}
		if fitErr == nil {
			if p := findPeak(a.freqs, spec, fit, a.s.Peak); p.Distinct {
				sp.PeakHz, sp.PeakPower = p.Hz, math.Pow(10, p.Log10Power)
			}
		}
		d.Spectra = append(d.Spectra, sp)
	}
	q := max(1, int(math.Floor(a.fs/ds.TraceRateHz)))
	want := int(math.Round(ds.TraceSeconds * a.fs))
	for _, st := range a.states() {
		best := -1
		for i, r := range a.runs {
			if r.State == st && (best < 0 || r.Count > a.runs[best].Count) {
				best = i
			}
		}
		if best < 0 {
			continue
		}
		r := a.runs[best]
		n := min(want, r.Count)
		for _, label := range ds.TraceChannels {
			for c, l := range a.names {
				if l != label || !a.good[c] {
					continue
				}
				x := a.data[c][r.First : r.First+n]
				out := make([]float32, 0, (n+q-1)/q)
				for i := 0; i < n; i += q {
					out = append(out, x[i])
				}
				d.Traces = append(d.Traces, Trace{State: st, Channel: label, Rate: a.fs / float64(q),
					Start: r.Start, Samples: out})
			}
		}
	}
	return d
}

// fitCache returns the fits made while computing markers, so the display
// shows the same fit line.
func (a *analysis) fitCache() map[fitKey]fitResult {
	if a.fits == nil {
		a.fits = map[fitKey]fitResult{}
	}
	return a.fits
}
