package metrics

import "fmt"

// bandPower integrates a one-sided density over a half-open band:
// Σ psd[k]·Δf over the bins with lo ≤ freqs[k] < hi (the rectangle rule on
// the Welch grid, as scipy users write it: psd[mask].sum()·df). psd in
// µV²/Hz gives µV². freqs must be evenly spaced from 0.
func bandPower(freqs, psd []float64, b Band) float64 {
	if len(freqs) < 2 {
		return 0
	}
	df := freqs[1] - freqs[0]
	var sum float64
	for k, f := range freqs {
		if b.Contains(f) {
			sum += psd[k]
		}
	}
	return sum * df
}

// centroid returns the centre of gravity Σ f·P(f) / Σ P(f) over the bins
// with lo ≤ f ≤ hi (Klimesch 1999), and false when the band holds no power.
func centroid(freqs, psd []float64, b Band) (float64, bool) {
	var num, den float64
	for k, f := range freqs {
		if f >= b.LoHz && f <= b.HiHz {
			num += f * psd[k]
			den += psd[k]
		}
	}
	if !(den > 0) {
		return 0, false
	}
	return num / den, true
}

// fmtReason formats a marker's reason.
func fmtReason(format string, args ...any) string {
	return fmt.Sprintf(format, args...)
}
