//go:build !purego

package fft

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestPass5MatchesGo: the SSE2 radix-5 pass gives pass5's results bit for
// bit, at every stage of the lengths the analysis uses and a few others
// (first stages without twiddles, later ones with), on random values that
// include signed zeros.
func TestPass5MatchesGo(t *testing.T) {
	r := rand.New(rand.NewPCG(31, 32))
	for _, n := range []int{5, 25, 125, 250, 500, 625, 1000, 3125} {
		pl := newPlan(n)
		for i := range pl.stages {
			st := &pl.stages[i]
			if st.p != 5 {
				continue
			}
			in := make([]complex128, n)
			for j := range in {
				in[j] = complex(r.NormFloat64()*30, r.NormFloat64()*30)
				if j%17 == 0 {
					in[j] = complex(math.Copysign(0, -1), 0)
				}
			}
			want, got := make([]complex128, n), make([]complex128, n)
			pass5(in, want, st)
			radix5(in, got, st)
			for j := range want {
				if math.Float64bits(real(got[j])) != math.Float64bits(real(want[j])) ||
					math.Float64bits(imag(got[j])) != math.Float64bits(imag(want[j])) {
					t.Fatalf("n=%d, stage %d (ns=%d): output %d is %v in SSE2, %v in Go", n, i, st.ns, j, got[j], want[j])
				}
			}
		}
	}
}
