// Package fft computes discrete Fourier transforms of real sequences, the
// work under every spectrum longwave makes: the Welch segments of the
// regional spectra and the one-second windows of the artefact rules.
//
// The transform is X_k = Σ_{j<n} x_j·e^{−2πi·jk/n}, unnormalised, for
// k = 0…⌊n/2⌋ (numpy.fft.rfft's definition and output). Any length n ≥ 1
// works; lengths whose prime factors are 2, 3 and 5 take n·Σ(factors)
// operations, others fall back on a direct DFT for each prime factor above
// five (O(n·p) for a factor p).
//
// Method: the mixed-radix Cooley–Tukey algorithm (Cooley & Tukey 1965) in
// the self-sorting form of Stockham (Cochran et al. 1967; Van Loan,
// Computational Frameworks for the Fast Fourier Transform, SIAM 1992;
// references from memory), with radix-4, 2, 3 and 5 butterflies and
// twiddle factors tabled once per length. A real sequence of even length n is transformed as a
// complex one of length n/2 (even samples real, odd samples imaginary) and
// separated afterwards; two real sequences of any length are transformed
// at once as the real and imaginary parts of one complex sequence (both
// splits: Brigham, The Fast Fourier Transform and its Applications,
// Prentice Hall 1988, from memory). On amd64 the radix-5 pass, most of the work
// at the analysis lengths 125 and 500, runs in SSE2 (pass5_amd64.s) with
// the Go pass's operations in its order. Checked against numpy.fft.rfft
// and a direct DFT (fft_test.go).
package fft

import (
	"fmt"
	"math"
)

// Real transforms real sequences of one length. It holds work space, so
// one Real serves one goroutine at a time; make one per goroutine.
type Real struct {
	n    int
	half *plan        // even n: the complex transform of length n/2
	full *plan        // the complex transform of length n (Pair, odd n)
	w    []complex128 // even n: e^{−2πi·k/n}, k ≤ n/2
	z    []complex128 // packed input of half or full
}

// NewReal returns the transform of length n. It panics when n < 1 (a
// programmer error, like a negative slice length).
func NewReal(n int) *Real {
	if n < 1 {
		panic(fmt.Sprintf("fft: length %d", n))
	}
	r := &Real{n: n}
	if n%2 == 0 {
		h := n / 2
		r.half = newPlan(h)
		r.w = make([]complex128, h+1)
		for k := range r.w {
			r.w[k] = expm(k, n)
		}
	}
	r.z = make([]complex128, n)
	return r
}

// Len is the length of the sequences r transforms.
func (r *Real) Len() int { return r.n }

// Coefficients writes X_0…X_{n/2} of x (len(x) = Len()) to dst and returns
// it, allocating when cap(dst) < n/2+1.
func (r *Real) Coefficients(dst []complex128, x []float64) []complex128 {
	n := r.n
	if len(x) != n {
		panic(fmt.Sprintf("fft: %d samples for a transform of length %d", len(x), n))
	}
	dst = out(dst, n/2+1)
	if n%2 == 1 {
		r.fullPlan()
		z := r.z[:n]
		for j, v := range x {
			z[j] = complex(v, 0)
		}
		copy(dst, r.full.transform(z)[:n/2+1])
		return dst
	}
	// z_j = x_{2j} + i·x_{2j+1}; Z its transform of length h. With
	// Z_h = Z_0, E_k = (Z_k + conj Z_{h−k})/2 is the transform of the even
	// samples, O_k = (Z_k − conj Z_{h−k})/(2i) that of the odd ones, and
	// X_k = E_k + e^{−2πik/n}·O_k.
	h := n / 2
	z := r.z[:h]
	for j := range z {
		z[j] = complex(x[2*j], x[2*j+1])
	}
	zf := r.half.transform(z)
	w := r.w[:h+1]
	for k := 0; k <= h; k++ {
		ka, kb := k, h-k
		if ka == h {
			ka = 0
		}
		if kb == h {
			kb = 0
		}
		e, o := split(zf[ka], zf[kb])
		er, ei, or, oi := real(e), imag(e), real(o), imag(o)
		wr, wi := real(w[k]), imag(w[k])
		dst[k] = complex(er+wr*or-wi*oi, ei+wr*oi+wi*or)
	}
	return dst
}

// Pair writes the coefficients of x to dx and those of y to dy (as
// Coefficients; len(x) = len(y) = Len()) from one complex transform of
// x + i·y: Z_k = X_k + i·Y_k, so X_k = (Z_k + conj Z_{n−k})/2 and
// Y_k = (Z_k − conj Z_{n−k})/(2i). It returns dx and dy, allocating as
// Coefficients does.
func (r *Real) Pair(dx, dy []complex128, x, y []float64) ([]complex128, []complex128) {
	n := r.n
	if len(x) != n || len(y) != n {
		panic(fmt.Sprintf("fft: %d and %d samples for a transform of length %d", len(x), len(y), n))
	}
	r.fullPlan()
	dx, dy = out(dx, n/2+1), out(dy, n/2+1)
	z := r.z[:n]
	for j := range z {
		z[j] = complex(x[j], y[j])
	}
	zf := r.full.transform(z)
	for k := 0; k <= n/2; k++ {
		kb := n - k
		if k == 0 {
			kb = 0
		}
		dx[k], dy[k] = split(zf[k], zf[kb])
	}
	return dx, dy
}

// split separates a = Z_k and b = Z_{−k} of a complex sequence's transform
// into the transforms of its real part, (a + conj b)/2, and of its
// imaginary part, (a − conj b)/(2i).
func split(a, b complex128) (complex128, complex128) {
	return complex((real(a)+real(b))*0.5, (imag(a)-imag(b))*0.5),
		complex((imag(a)+imag(b))*0.5, (real(b)-real(a))*0.5)
}

func (r *Real) fullPlan() {
	if r.full == nil {
		r.full = newPlan(r.n)
	}
}

func out(dst []complex128, n int) []complex128 {
	if cap(dst) < n {
		return make([]complex128, n)
	}
	return dst[:n]
}

// expm is e^{−2πi·k/n}, from the angle reduced to the first half turn so
// that the table keeps its accuracy for large k.
func expm(k, n int) complex128 {
	k %= n
	theta := -2 * math.Pi * float64(k) / float64(n)
	if 2*k > n {
		theta = 2 * math.Pi * float64(n-k) / float64(n)
	}
	s, c := math.Sincos(theta)
	return complex(c, s)
}

// plan is the complex transform of one length n: its stages and two work
// buffers the stages write in turn.
type plan struct {
	n      int
	stages []stage
	a, b   []complex128
}

// stage is one pass of the Stockham transform: radix p, after passes that
// have formed transforms of length ns. tw[jm·(p−1) + r−1] is the twiddle
// e^{−2πi·jm·r/(ns·p)}, jm < ns, 1 ≤ r < p; dft (radix above 5 only) the
// p-point DFT matrix, dft[r·p+s] = e^{−2πi·rs/p}.
type stage struct {
	p, ns int
	tw    []complex128
	twx   []float64 // tw expanded for the amd64 radix-5 pass (pass5_amd64.go)
	dft   []complex128
}

func newPlan(n int) *plan {
	pl := &plan{n: n, a: make([]complex128, n), b: make([]complex128, n)}
	ns := 1
	for _, p := range factors(n) {
		st := stage{p: p, ns: ns, tw: make([]complex128, ns*(p-1))}
		for jm := 0; jm < ns; jm++ {
			for r := 1; r < p; r++ {
				st.tw[jm*(p-1)+r-1] = expm(jm*r, ns*p)
			}
		}
		if p > 5 {
			st.dft = make([]complex128, p*p)
			for r := 0; r < p; r++ {
				for s := 0; s < p; s++ {
					st.dft[r*p+s] = expm(r*s, p)
				}
			}
		}
		prepareStage(&st)
		pl.stages = append(pl.stages, st)
		ns *= p
	}
	return pl
}

// factors splits n into radices: fours first, then a two, threes, fives,
// then the remaining primes in increasing order.
func factors(n int) []int {
	var f []int
	for n%4 == 0 {
		f, n = append(f, 4), n/4
	}
	for _, p := range []int{2, 3, 5} {
		for n%p == 0 {
			f, n = append(f, p), n/p
		}
	}
	for p := 7; p*p <= n; p += 2 {
		for n%p == 0 {
			f, n = append(f, p), n/p
		}
	}
	if n > 1 {
		f = append(f, n)
	}
	return f
}

// transform returns the DFT of src (len n; src is not changed), in one of
// the plan's buffers: valid until the next call.
//
// Stage (p, ns), m = n/p: for j = jq·ns + jm < m, the inputs
// v_r = in[j + r·m]·e^{−2πi·jm·r/(ns·p)} go through a p-point DFT and
// V_r is written to out[jq·ns·p + jm + r·ns].
func (pl *plan) transform(src []complex128) []complex128 {
	in, out := src, pl.a
	if len(pl.stages) == 0 { // n = 1
		copy(out, in)
		return out
	}
	for i := range pl.stages {
		st := &pl.stages[i]
		switch st.p {
		case 2:
			pass2(in, out, st)
		case 3:
			pass3(in, out, st)
		case 4:
			pass4(in, out, st)
		case 5:
			radix5(in, out, st)
		default:
			passAny(in, out, st)
		}
		if i == 0 {
			in, out = out, pl.b
		} else {
			in, out = out, in
		}
	}
	return in
}

func pass2(in, out []complex128, st *stage) {
	ns, m := st.ns, len(in)/2
	for jm := 0; jm < ns; jm++ {
		w1 := st.tw[jm]
		for j, o := jm, jm; j < m; j, o = j+ns, o+2*ns {
			v0, v1 := in[j], in[j+m]*w1
			out[o], out[o+ns] = v0+v1, v0-v1
		}
	}
}

// sin60 is sin(2π/3).
var sin60 = math.Sqrt(3) / 2

func pass3(in, out []complex128, st *stage) {
	ns, m := st.ns, len(in)/3
	for jm := 0; jm < ns; jm++ {
		w1, w2 := st.tw[2*jm], st.tw[2*jm+1]
		for j, o := jm, jm; j < m; j, o = j+ns, o+3*ns {
			v0, v1, v2 := in[j], in[j+m]*w1, in[j+2*m]*w2
			t1 := v1 + v2
			t2 := v0 - t1*0.5
			d := v1 - v2
			t3 := complex(sin60*imag(d), -sin60*real(d)) // −i·sin60·d
			out[o], out[o+ns], out[o+2*ns] = v0+t1, t2+t3, t2-t3
		}
	}
}

func pass4(in, out []complex128, st *stage) {
	ns, m := st.ns, len(in)/4
	for jm := 0; jm < ns; jm++ {
		w1, w2, w3 := st.tw[3*jm], st.tw[3*jm+1], st.tw[3*jm+2]
		for j, o := jm, jm; j < m; j, o = j+ns, o+4*ns {
			v0, v1, v2, v3 := in[j], in[j+m], in[j+2*m], in[j+3*m]
			if ns > 1 {
				v1, v2, v3 = v1*w1, v2*w2, v3*w3
			}
			t0, t1 := v0+v2, v0-v2
			t2, d := v1+v3, v1-v3
			t3 := complex(imag(d), -real(d)) // −i·d
			out[o], out[o+ns], out[o+2*ns], out[o+3*ns] = t0+t2, t1+t3, t0-t2, t1-t3
		}
	}
}

// Cosines and sines of 2π/5 and 4π/5.
var (
	cos72, sin72   = math.Cos(2 * math.Pi / 5), math.Sin(2 * math.Pi / 5)
	cos144, sin144 = math.Cos(4 * math.Pi / 5), math.Sin(4 * math.Pi / 5)
)

func pass5(in, out []complex128, st *stage) {
	ns, m := st.ns, len(in)/5
	c1, s1, c2, s2 := cos72, sin72, cos144, sin144
	// j = jq·ns + jm: for each jq, the inputs (and outputs) of
	// consecutive jm are consecutive.
	for jq := 0; jq < m/ns; jq++ {
		x := in[jq*ns:]
		y := out[jq*ns*5:]
		for jm := 0; jm < ns; jm++ {
			v0, v1, v2, v3, v4 := x[jm], x[jm+m], x[jm+2*m], x[jm+3*m], x[jm+4*m]
			if ns > 1 {
				tw := st.tw[4*jm : 4*jm+4 : 4*jm+4]
				v1, v2, v3, v4 = v1*tw[0], v2*tw[1], v3*tw[2], v4*tw[3]
			}
			a1r, a1i := real(v1)+real(v4), imag(v1)+imag(v4)
			b1r, b1i := real(v1)-real(v4), imag(v1)-imag(v4)
			a2r, a2i := real(v2)+real(v3), imag(v2)+imag(v3)
			b2r, b2i := real(v2)-real(v3), imag(v2)-imag(v3)
			// V1 = ra − i·ia, V4 = ra + i·ia; V2 = rb − i·ib, V3 = rb + i·ib
			rar, rai := real(v0)+c1*a1r+c2*a2r, imag(v0)+c1*a1i+c2*a2i
			rbr, rbi := real(v0)+c2*a1r+c1*a2r, imag(v0)+c2*a1i+c1*a2i
			iar, iai := s1*b1r+s2*b2r, s1*b1i+s2*b2i
			ibr, ibi := s2*b1r-s1*b2r, s2*b1i-s1*b2i
			y[jm] = complex(real(v0)+a1r+a2r, imag(v0)+a1i+a2i)
			y[jm+ns] = complex(rar+iai, rai-iar)
			y[jm+2*ns] = complex(rbr+ibi, rbi-ibr)
			y[jm+3*ns] = complex(rbr-ibi, rbi+ibr)
			y[jm+4*ns] = complex(rar-iai, rai+iar)
		}
	}
}

// passAny is the stage for a prime radix p above 5: the p-point DFT by
// its matrix.
func passAny(in, out []complex128, st *stage) {
	p, ns := st.p, st.ns
	m := len(in) / p
	v := make([]complex128, p)
	for jm := 0; jm < ns; jm++ {
		tw := st.tw[jm*(p-1) : (jm+1)*(p-1)]
		for j, o := jm, jm; j < m; j, o = j+ns, o+p*ns {
			v[0] = in[j]
			for r := 1; r < p; r++ {
				v[r] = in[j+r*m] * tw[r-1]
			}
			for r := 0; r < p; r++ {
				row := st.dft[r*p : (r+1)*p]
				var s complex128
				for q, x := range v {
					s += x * row[q]
				}
				out[o+r*ns] = s
			}
		}
	}
}
