//go:build !purego

package fft

import "math"

// On amd64 the radix-5 pass runs in SSE2 (pass5_amd64.s), one complex
// value per register: pass5's operations in pass5's order, so the same
// bits as the Go pass (TestPass5MatchesGo) at about half its time.

//go:noescape
func pass5SSE2(in, out []complex128, twx []float64, ns, m int, k *[10]float64)

// consts5 are the assembly's register constants: cos 72°, cos 144°,
// sin 72°, sin 144° in both halves, then +0 and −0.
var consts5 = [10]float64{cos72, cos72, cos144, cos144, sin72, sin72, sin144, sin144, 0, math.Copysign(0, -1)}

// prepareStage writes each twiddle w of a radix-5 stage as
// (re w, re w, −im w, im w), the operands of the assembly's complex
// product.
func prepareStage(st *stage) {
	if st.p != 5 {
		return
	}
	st.twx = make([]float64, 4*len(st.tw))
	for i, w := range st.tw {
		st.twx[4*i], st.twx[4*i+1], st.twx[4*i+2], st.twx[4*i+3] = real(w), real(w), -imag(w), imag(w)
	}
}

func radix5(in, out []complex128, st *stage) {
	pass5SSE2(in, out, st.twx, st.ns, len(in)/5, &consts5)
}
