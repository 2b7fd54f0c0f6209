//go:build !purego

package metrics

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestPairKernelsMatchGo: the SSE2 pair kernels give the Go kernels'
// results bit for bit, forward and backward, with states carried across
// calls (the filter passes run chunk by chunk), on designs of the
// pipeline's kind (low-pass at 500 Hz; high-passes and a notch at 125 Hz).
func TestPairKernelsMatchGo(t *testing.T) {
	lp, _ := ButterLowpass(4, 45, 500)
	hp2, _ := ButterHighpass(2, 0.5, 125)
	hp4, _ := ButterHighpass(4, 0.5, 125)
	notch, _ := IIRNotch(50, 30, 125)
	r := rand.New(rand.NewPCG(11, 12))
	// one, two and three sections: every mix of the two kernels
	for _, sos := range []SOS{hp2, lp, append(append(SOS{}, hp4...), notch...)} {
		for _, backward := range []bool{false, true} {
			n := 2 * 3001
			a, b := make([]float64, n), make([]float64, n)
			for i := range a {
				a[i] = 40 * r.NormFloat64()
			}
			copy(b, a)
			zi := steadyState(sos)
			sa, sb := startStates(zi, a[0], a[1]), startStates(zi, b[0], b[1])
			for lo := 0; lo < n; lo += 2 * 700 { // uneven chunks, the last one short
				hi := min(n, lo+2*700)
				for i := 0; i < len(sos); {
					if len(sos)-i >= 2 {
						run2x2(a[lo:hi], &sos[i], &sos[i+1], &sa[i], &sa[i+1], backward)
						run2x2Go(b[lo:hi], &sos[i], &sos[i+1], &sb[i], &sb[i+1], backward)
						i += 2
						continue
					}
					run1x2(a[lo:hi], &sos[i], &sa[i], backward)
					run1x2Go(b[lo:hi], &sos[i], &sb[i], backward)
					i++
				}
			}
			for i := range a {
				if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
					t.Fatalf("%d sections, backward %v: sample %d: SSE2 %v, Go %v", len(sos), backward, i, a[i], b[i])
				}
			}
			for i := range sa {
				if sa[i] != sb[i] {
					t.Fatalf("%d sections, backward %v: section %d ends in states %v (SSE2), %v (Go)", len(sos), backward, i, sa[i], sb[i])
				}
			}
		}
	}
}
