package metrics

import (
	"fmt"

	"longwave/ingest"
)

// Units of the markers.
const (
	UnitHz       = "Hz"
	UnitRatio    = "ratio"
	UnitOne      = "1"
	UnitLog10PSD = "log10(µV²/Hz)"
	UnitShare    = "share"
)

// relativeRegions are the regions with relative band powers, in output order.
var relativeRegions = []string{RegionPosterior, RegionGlobal, RegionLeftOccipital, RegionRightOccipital, RegionFrontal}

type fitKey struct {
	state  ingest.EyeState
	region string
}

type fitResult struct {
	fit SpectrumFit
	err error
}

// fitOf returns the aperiodic fit of a region's spectrum in a state (cached).
func (a *analysis) fitOf(st ingest.EyeState, region string, spec []float64, cache map[fitKey]fitResult) (SpectrumFit, error) {
	k := fitKey{st, region}
	if r, ok := cache[k]; ok {
		return r.fit, r.err
	}
	f, err := FitSpectrum(a.freqs, spec, a.s.Aperiodic.SpecParam())
	cache[k] = fitResult{f, err}
	return f, err
}

// markerSet builds the marker list in a fixed order.
type markerSet struct{ list []Marker }

func (m *markerSet) ok(name, region string, st ingest.EyeState, v float64, unit string) {
	m.list = append(m.list, Marker{Name: name, Region: region, State: st, Value: v, Unit: unit, Computable: true})
}

func (m *markerSet) no(name, region string, st ingest.EyeState, unit, why string) {
	m.list = append(m.list, Marker{Name: name, Region: region, State: st, Unit: unit, Reason: why})
}

// pdrOf runs the peak search on a region's spectrum in state st.
func (a *analysis) pdrOf(st ingest.EyeState, region string, cache map[fitKey]fitResult) (peak, string) {
	spec, why := a.region(st, region)
	if why != "" {
		return peak{}, why
	}
	if a.lean {
		hz, ok := peakFrequency(a.freqs, spec, a.s.Peak)
		if !ok {
			return peak{}, "no peak in the resample"
		}
		return peak{Found: true, Distinct: true, Hz: hz}, ""
	}
	fit, err := a.fitOf(st, region, spec, cache)
	if err != nil {
		return peak{}, fmt.Sprintf("aperiodic fit failed: %v", err)
	}
	p := findPeak(a.freqs, spec, fit, a.s.Peak)
	if !p.Distinct {
		return p, p.Reason
	}
	return p, ""
}

// markers computes every marker of DESIGN.md's table. The eyes-closed
// markers use the primary state: closed, or unknown when the recording's
// eye state is unknown.
func (a *analysis) markers() []Marker {
	var m markerSet
	cache := map[fitKey]fitResult{}
	st := a.primary
	b := a.s.Bands

	// Posterior dominant rhythm, centroid, left/right and asymmetry.
	if p, why := a.pdrOf(st, RegionPosterior, cache); why == "" {
		m.ok(PDRFrequency, RegionPosterior, st, p.Hz, UnitHz)
	} else {
		m.no(PDRFrequency, RegionPosterior, st, UnitHz, why)
	}
	if spec, why := a.region(st, RegionPosterior); why != "" {
		m.no(PDRCentroid, RegionPosterior, st, UnitHz, why)
	} else if c, ok := centroid(a.freqs, spec, a.s.Peak.CentroidBand); ok {
		m.ok(PDRCentroid, RegionPosterior, st, c, UnitHz)
	} else {
		m.no(PDRCentroid, RegionPosterior, st, UnitHz, "no power in the centre-of-gravity band")
	}
	left, whyL := a.pdrOf(st, RegionLeftOccipital, cache)
	right, whyR := a.pdrOf(st, RegionRightOccipital, cache)
	if whyL == "" {
		m.ok(PDRLeft, RegionLeftOccipital, st, left.Hz, UnitHz)
	} else {
		m.no(PDRLeft, RegionLeftOccipital, st, UnitHz, whyL)
	}
	if whyR == "" {
		m.ok(PDRRight, RegionRightOccipital, st, right.Hz, UnitHz)
	} else {
		m.no(PDRRight, RegionRightOccipital, st, UnitHz, whyR)
	}
	switch {
	case whyL != "":
		m.no(PDRAsymmetry, RegionPosterior, st, UnitHz, "left occipital (O1): "+whyL)
	case whyR != "":
		m.no(PDRAsymmetry, RegionPosterior, st, UnitHz, "right occipital (O2): "+whyR)
	default:
		m.ok(PDRAsymmetry, RegionPosterior, st, left.Hz-right.Hz, UnitHz)
	}

	// Alpha reactivity: needs an eyes-closed and an eyes-open period.
	closedSpec, whyC := a.region(ingest.EyesClosed, RegionPosterior)
	openSpec, whyO := a.region(ingest.EyesOpen, RegionPosterior)
	switch {
	case st == ingest.EyesUnknown:
		why := "eye state unknown: needs an eyes-closed and an eyes-open period"
		m.no(AlphaReactivity, RegionPosterior, ingest.EyesOpen, UnitOne, why)
		m.no(AlphaRatio, RegionPosterior, ingest.EyesOpen, UnitRatio, why)
	case whyC != "" || whyO != "":
		why := whyC
		if why == "" {
			why = whyO
		}
		m.no(AlphaReactivity, RegionPosterior, ingest.EyesOpen, UnitOne, why)
		m.no(AlphaRatio, RegionPosterior, ingest.EyesOpen, UnitRatio, why)
	default:
		ec := bandPower(a.freqs, closedSpec, b.Alpha)
		eo := bandPower(a.freqs, openSpec, b.Alpha)
		if ec > 0 {
			m.ok(AlphaReactivity, RegionPosterior, ingest.EyesOpen, 1-eo/ec, UnitOne)
			m.ok(AlphaRatio, RegionPosterior, ingest.EyesOpen, eo/ec, UnitRatio)
		} else {
			m.no(AlphaReactivity, RegionPosterior, ingest.EyesOpen, UnitOne, "no eyes-closed alpha power")
			m.no(AlphaRatio, RegionPosterior, ingest.EyesOpen, UnitRatio, "no eyes-closed alpha power")
		}
	}

	// Theta/alpha, posterior and global.
	for _, region := range []string{RegionPosterior, RegionGlobal} {
		spec, why := a.region(st, region)
		if why != "" {
			m.no(ThetaAlphaRatio, region, st, UnitRatio, why)
			continue
		}
		al := bandPower(a.freqs, spec, b.Alpha)
		if al > 0 {
			m.ok(ThetaAlphaRatio, region, st, bandPower(a.freqs, spec, b.Theta)/al, UnitRatio)
		} else {
			m.no(ThetaAlphaRatio, region, st, UnitRatio, "no alpha power")
		}
	}

	// Aperiodic component, global.
	if spec, why := a.region(st, RegionGlobal); why != "" {
		m.no(AperiodicExponent, RegionGlobal, st, UnitOne, why)
		m.no(AperiodicOffset, RegionGlobal, st, UnitLog10PSD, why)
		m.no(AperiodicR2, RegionGlobal, st, UnitOne, why)
	} else if fit, err := a.fitOf(st, RegionGlobal, spec, cache); err != nil {
		why := fmt.Sprintf("aperiodic fit failed: %v", err)
		m.no(AperiodicExponent, RegionGlobal, st, UnitOne, why)
		m.no(AperiodicOffset, RegionGlobal, st, UnitLog10PSD, why)
		m.no(AperiodicR2, RegionGlobal, st, UnitOne, why)
	} else {
		m.ok(AperiodicExponent, RegionGlobal, st, fit.Exponent, UnitOne)
		m.ok(AperiodicOffset, RegionGlobal, st, fit.Offset, UnitLog10PSD)
		m.ok(AperiodicR2, RegionGlobal, st, fit.R2, UnitOne)
	}

	// Relative band powers per region, relative to the Total band.
	for _, region := range relativeRegions {
		spec, why := a.region(st, region)
		var total float64
		if why == "" {
			total = bandPower(a.freqs, spec, b.Total)
			if !(total > 0) {
				why = "no power in 1–30 Hz"
			}
		}
		for _, rb := range []struct {
			name string
			band Band
		}{{RelDelta, b.Delta}, {RelTheta, b.Theta}, {RelAlpha, b.Alpha}, {RelBeta, b.Beta}} {
			if why != "" {
				m.no(rb.name, region, st, UnitShare, why)
				continue
			}
			m.ok(rb.name, region, st, bandPower(a.freqs, spec, rb.band)/total, UnitShare)
		}
	}

	// Slowing ratio, global.
	if spec, why := a.region(st, RegionGlobal); why != "" {
		m.no(SlowingRatio, RegionGlobal, st, UnitRatio, why)
	} else {
		fast := bandPower(a.freqs, spec, b.Alpha) + bandPower(a.freqs, spec, b.Beta)
		slow := bandPower(a.freqs, spec, b.Delta) + bandPower(a.freqs, spec, b.Theta)
		if fast > 0 {
			m.ok(SlowingRatio, RegionGlobal, st, slow/fast, UnitRatio)
		} else {
			m.no(SlowingRatio, RegionGlobal, st, UnitRatio, "no alpha or beta power")
		}
	}

	// Frontal over posterior alpha.
	front, whyF := a.region(st, RegionFrontal)
	post, whyP := a.region(st, RegionPosterior)
	switch {
	case whyF != "":
		m.no(FrontalPosteriorAlpha, RegionFrontal, st, UnitRatio, whyF)
	case whyP != "":
		m.no(FrontalPosteriorAlpha, RegionFrontal, st, UnitRatio, whyP)
	default:
		pa := bandPower(a.freqs, post, b.Alpha)
		if pa > 0 {
			m.ok(FrontalPosteriorAlpha, RegionFrontal, st, bandPower(a.freqs, front, b.Alpha)/pa, UnitRatio)
		} else {
			m.no(FrontalPosteriorAlpha, RegionFrontal, st, UnitRatio, "no posterior alpha power")
		}
	}

	// Drowsiness index (its interval is analytic: not resampled).
	if a.lean {
		a.fits = cache
		return m.list
	}
	if d, known, why := a.drowsinessIndex(); known {
		m.ok(DrowsinessIndex, RegionPosterior, st, d, UnitShare)
	} else {
		m.no(DrowsinessIndex, RegionPosterior, st, UnitShare, why)
	}
	a.fits = cache
	return m.list
}

// drowsiness returns the drowsiness index for Quality.
func (a *analysis) drowsiness() (float64, bool) {
	d, known, _ := a.drowsinessIndex()
	return d, known
}

// drowsinessIndex is the share of clean primary-state epochs whose posterior
// alpha power drops below DropoutFraction × the ReferenceQuantile of that
// power over the same epochs (DrowsinessSettings).
func (a *analysis) drowsinessIndex() (float64, bool, string) {
	if a.v2 != nil {
		return a.drowsinessV2()
	}
	st := a.primary
	if why := a.stateUsable(st); why != "" {
		return 0, false, why
	}
	var post []int
	for _, label := range a.s.Regions[RegionPosterior] {
		for c, l := range a.names {
			if l == label && a.good[c] {
				post = append(post, c)
			}
		}
	}
	if len(post) == 0 {
		return 0, false, "no good channel of the posterior region"
	}
	var alpha []float64
	for e, ep := range a.eps {
		if ep.State != st || ep.Reject != "" {
			continue
		}
		var v float64
		for _, c := range post {
			v += a.stats[c][e].Alpha
		}
		alpha = append(alpha, v/float64(len(post)))
	}
	if len(alpha) == 0 {
		return 0, false, "no clean " + stateWords(st) + " epoch"
	}
	return dropoutShare(alpha, a.s.Drowsiness), true, ""
}

// dropoutShare is the share of alpha powers below DropoutFraction × their
// ReferenceQuantile (DrowsinessSettings).
func dropoutShare(alpha []float64, d DrowsinessSettings) float64 {
	limit := d.DropoutFraction * quantile(alpha, d.ReferenceQuantile)
	n := 0
	for _, v := range alpha {
		if v < limit {
			n++
		}
	}
	return float64(n) / float64(len(alpha))
}
