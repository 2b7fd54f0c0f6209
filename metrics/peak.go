package metrics

import (
	"fmt"
	"math"
)

// peak is the outcome of the posterior-dominant-rhythm search on one
// spectrum.
type peak struct {
	// Hz is the refined frequency, Log10Power the parabola's vertex value
	// (log10 µV²/Hz of the smoothed spectrum) and Margin its height above
	// the aperiodic fit (log10 units).
	Hz, Log10Power, Margin float64
	// Distinct is true when Margin ≥ MinLog10AboveAperiodic; Reason says
	// why not otherwise.
	Distinct bool
	Found    bool
	Reason   string
}

// findPeak searches the largest local maximum of the Savitzky–Golay
// smoothed spectrum (PeakSettings) with SearchBand.LoHz ≤ f ≤ SearchBand.HiHz;
// a maximum needs both neighbours on the grid and must exceed the lower one
// strictly, so a spectrum that falls through the whole band has none. The
// bin is refined by the vertex of the parabola through log10 of the
// smoothed power at the bin and its two neighbours (for a Gaussian peak in
// power this is exact). fit is the spectrum's aperiodic fit; the peak is
// distinct when it stands MinLog10AboveAperiodic above it.
func findPeak(freqs, psd []float64, fit SpectrumFit, ps PeakSettings) peak {
	if len(freqs) < 3 || len(psd) != len(freqs) {
		return peak{Reason: "no spectrum"}
	}
	sm := SavGol(nil, psd, ps.SmoothBins, ps.SmoothOrder)
	best := largestMaximum(freqs, sm, ps)
	if best < 0 {
		return peak{Reason: fmt.Sprintf("no distinct rhythm: the smoothed spectrum has no peak in %g–%g Hz",
			ps.SearchBand.LoHz, ps.SearchBand.HiHz)}
	}
	p := refinePeak(freqs, sm, best)
	ap := fit.AperiodicAt(p.Hz)
	if !(ap > 0) {
		p.Reason = "no distinct rhythm: the aperiodic fit has no positive value at the peak"
		return p
	}
	p.Margin = p.Log10Power - math.Log10(ap)
	if p.Margin >= ps.MinLog10AboveAperiodic {
		p.Distinct = true
		return p
	}
	p.Reason = fmt.Sprintf("no distinct rhythm: peak at %.2f Hz only %.3f log10 above the aperiodic fit, needs %g",
		p.Hz, p.Margin, ps.MinLog10AboveAperiodic)
	return p
}

// largestMaximum returns the bin of the largest local maximum of the
// smoothed spectrum sm in the search band (findPeak's rule), −1 when none.
func largestMaximum(freqs, sm []float64, ps PeakSettings) int {
	best := -1
	for k := 1; k < len(freqs)-1; k++ {
		f := freqs[k]
		if f < ps.SearchBand.LoHz || f > ps.SearchBand.HiHz {
			continue
		}
		if sm[k] > 0 && sm[k] > sm[k-1] && sm[k] >= sm[k+1] && (best < 0 || sm[k] > sm[best]) {
			best = k
		}
	}
	return best
}

// refinePeak refines bin best of the smoothed spectrum sm by the vertex of
// the parabola through log10 of the power at the bin and its neighbours.
func refinePeak(freqs, sm []float64, best int) peak {
	df := freqs[1] - freqs[0]
	y0 := math.Log10(sm[best])
	p := peak{Found: true, Hz: freqs[best], Log10Power: y0}
	if sm[best-1] > 0 && sm[best+1] > 0 {
		ym, yp := math.Log10(sm[best-1]), math.Log10(sm[best+1])
		if den := ym - 2*y0 + yp; den < 0 {
			d := 0.5 * (ym - yp) / den
			p.Hz = freqs[best] + d*df
			p.Log10Power = y0 - 0.25*(ym-yp)*d
		}
	}
	return p
}

// peakFrequency is the refined frequency of findPeak without the
// distinctness test (no aperiodic fit needed): what a bootstrap resample
// of a spectrum whose rhythm was found distinct measures.
func peakFrequency(freqs, psd []float64, ps PeakSettings) (float64, bool) {
	if len(freqs) < 3 || len(psd) != len(freqs) {
		return 0, false
	}
	sm := SavGol(nil, psd, ps.SmoothBins, ps.SmoothOrder)
	best := largestMaximum(freqs, sm, ps)
	if best < 0 {
		return 0, false
	}
	return refinePeak(freqs, sm, best).Hz, true
}
