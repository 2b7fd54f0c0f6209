package metrics

import (
	"errors"
	"fmt"
	"math"
	"math/cmplx"
	"sort"
)

// SOS is a cascade of second-order IIR sections in scipy's layout: each row
// is b0 b1 b2 a0 a1 a2 of
//
//	H(z) = (b0 + b1 z⁻¹ + b2 z⁻²) / (a0 + a1 z⁻¹ + a2 z⁻²),  a0 = 1,
//
// and the filter is the product of the rows, applied first row first.
type SOS [][6]float64

// ErrFilterDesign is returned (wrapped) when a filter cannot be designed
// from the given order, frequencies and sampling rate.
var ErrFilterDesign = errors.New("metrics: filter design")

// Butterworth design limits. Order 1–maxButterOrder covers every filter
// longwave uses with a wide margin; higher orders are numerically poor as
// second-order sections of the bilinear transform and are refused.
const maxButterOrder = 16

// ButterLowpass designs a digital Butterworth low-pass filter of the given
// order with its −3 dB point at cutoffHz for sampling rate fs (Hz), as
// second-order sections. It equals scipy.signal.butter(order, cutoffHz,
// 'lowpass', fs=fs, output='sos') section by section.
//
// Method: the analog prototype has its poles on the unit circle,
// p_m = −exp(iπm/(2N)) for m = −N+1, −N+3, …, N−1; the cutoff is prewarped
// to ω = 4·tan(π·Wn/2) with Wn = 2·cutoff/fs (so the digital −3 dB point lands
// on the cutoff), the prototype is scaled to ω, mapped to the z-plane by the
// bilinear transform s = 4(z−1)/(z+1) (sampling rate 2 in normalised units),
// and the poles and zeros are grouped into sections by pairSections.
func ButterLowpass(order int, cutoffHz, fs float64) (SOS, error) {
	w, err := prewarp("low-pass", order, cutoffHz, fs)
	if err != nil {
		return nil, err
	}
	z, p, k := butterPrototype(order)
	// Low-pass to low-pass: s → s/ω.
	for i := range p {
		p[i] *= complex(w, 0)
	}
	k *= math.Pow(w, float64(len(p)-len(z)))
	z, p, k = bilinear(z, p, k)
	return pairSections(z, p, k), nil
}

// ButterHighpass designs a digital Butterworth high-pass filter with its
// −3 dB point at cutoffHz; it equals scipy.signal.butter(order, cutoffHz,
// 'highpass', fs=fs, output='sos'). The prototype is mapped by s → ω/s, which
// moves the poles to ω/p and puts order zeros at s = 0 (z = 1 after the
// bilinear transform); otherwise as ButterLowpass.
func ButterHighpass(order int, cutoffHz, fs float64) (SOS, error) {
	w, err := prewarp("high-pass", order, cutoffHz, fs)
	if err != nil {
		return nil, err
	}
	z, p, k := butterPrototype(order)
	k *= real(prodNeg(z) / prodNeg(p))
	for i := range p {
		p[i] = complex(w, 0) / p[i]
	}
	for range order {
		z = append(z, 0)
	}
	z, p, k = bilinear(z, p, k)
	return pairSections(z, p, k), nil
}

// ButterBandstop designs a digital Butterworth band-stop filter rejecting
// loHz–hiHz (−3 dB points) of 2·order poles; it equals
// scipy.signal.butter(order, [loHz, hiHz], 'bandstop', fs=fs, output='sos').
// Both edges are prewarped; the prototype is mapped by
// s → (s·B)/(s² + ω0²) with B = ω_hi − ω_lo and ω0 = √(ω_lo·ω_hi): each pole
// p becomes the pair B/(2p) ± √((B/(2p))² − ω0²), the gain is multiplied by
// Re(1/Π(−p)), and order zeros go to each of +iω0 and −iω0.
func ButterBandstop(order int, loHz, hiHz, fs float64) (SOS, error) {
	if !(loHz < hiHz) {
		return nil, fmt.Errorf("%w: band-stop: low edge %g Hz must be below high edge %g Hz", ErrFilterDesign, loHz, hiHz)
	}
	wlo, err := prewarp("band-stop", order, loHz, fs)
	if err != nil {
		return nil, err
	}
	whi, err := prewarp("band-stop", order, hiHz, fs)
	if err != nil {
		return nil, err
	}
	bw := whi - wlo
	w0 := math.Sqrt(wlo * whi)
	z, p, k := butterPrototype(order)
	k *= real(prodNeg(z) / prodNeg(p))
	half := make([]complex128, len(p))
	for i := range p {
		half[i] = complex(bw/2, 0) / p[i]
	}
	w0sq := complex(w0*w0, 0)
	pb := make([]complex128, 0, 2*len(p))
	for _, h := range half {
		pb = append(pb, h+cmplx.Sqrt(h*h-w0sq))
	}
	for _, h := range half {
		pb = append(pb, h-cmplx.Sqrt(h*h-w0sq))
	}
	zb := make([]complex128, 0, 2*order)
	for range order {
		zb = append(zb, complex(0, w0))
	}
	for range order {
		zb = append(zb, complex(0, -w0))
	}
	z, p, k = bilinear(zb, pb, k)
	return pairSections(z, p, k), nil
}

// IIRNotch designs a second-order notch at f0 Hz with quality factor q
// (f0 over the −3 dB bandwidth) for sampling rate fs; it equals
// scipy.signal.iirnotch(f0, q, fs) as one section. With w0 = 2π·f0/fs and
// bandwidth Δ = w0/q (rad/sample), β = tan(Δ/2) (the −3 dB gain 1/√2 makes the
// general factor √(1−g²)/g equal 1) and gain g = 1/(1+β):
//
//	b = g·[1, −2cos w0, 1],  a = [1, −2g·cos w0, 2g − 1].
//
// Source of the form: the second-order notch of the bilinear transform
// (common practice; also the documented result of the scipy call).
func IIRNotch(f0, q, fs float64) (SOS, error) {
	if !(fs > 0) || math.IsInf(fs, 0) {
		return nil, fmt.Errorf("%w: notch: sampling rate %g Hz must be positive", ErrFilterDesign, fs)
	}
	if !(f0 > 0 && f0 < fs/2) {
		return nil, fmt.Errorf("%w: notch: frequency %g Hz must lie strictly between 0 and Nyquist %g Hz", ErrFilterDesign, f0, fs/2)
	}
	if !(q > 0) || math.IsInf(q, 0) {
		return nil, fmt.Errorf("%w: notch: quality factor %g must be positive", ErrFilterDesign, q)
	}
	w0 := 2 * f0 / fs
	bw := w0 / q * math.Pi
	w0 *= math.Pi
	gb := 1 / math.Sqrt2
	beta := (math.Sqrt(1-gb*gb) / gb) * math.Tan(bw/2)
	gain := 1 / (1 + beta)
	c := math.Cos(w0)
	return SOS{{gain, -2 * c * gain, gain, 1, -2 * gain * c, 2*gain - 1}}, nil
}

// prewarp checks the design inputs and returns the prewarped analog edge
// frequency 4·tan(π·Wn/2) (normalised sampling rate 2), Wn = 2·f/fs.
func prewarp(kind string, order int, f, fs float64) (float64, error) {
	if order < 1 || order > maxButterOrder {
		return 0, fmt.Errorf("%w: %s: order %d outside 1–%d", ErrFilterDesign, kind, order, maxButterOrder)
	}
	if !(fs > 0) || math.IsInf(fs, 0) {
		return 0, fmt.Errorf("%w: %s: sampling rate %g Hz must be positive", ErrFilterDesign, kind, fs)
	}
	wn := 2 * f / fs
	if !(wn > 0 && wn < 1) {
		return 0, fmt.Errorf("%w: %s: edge %g Hz must lie strictly between 0 and Nyquist %g Hz", ErrFilterDesign, kind, f, fs/2)
	}
	const normFs = 2.0
	return 2 * normFs * math.Tan(math.Pi*wn/normFs), nil
}

// butterPrototype returns the zeros (none), poles and gain (1) of the analog
// Butterworth low-pass of the given order with cutoff 1 rad/s.
func butterPrototype(order int) (z, p []complex128, k float64) {
	p = make([]complex128, 0, order)
	for m := -order + 1; m < order; m += 2 {
		p = append(p, -cmplx.Exp(complex(0, math.Pi*float64(m)/float64(2*order))))
	}
	return nil, p, 1
}

// prodNeg returns Π(−r) over r (1 for none).
func prodNeg(r []complex128) complex128 {
	out := complex(1, 0)
	for _, v := range r {
		out *= -v
	}
	return out
}

// bilinear maps analog zeros, poles and gain to the z-plane with
// z = (4 + s)/(4 − s) (sampling rate 2); zeros at infinity go to z = −1.
func bilinear(z, p []complex128, k float64) ([]complex128, []complex128, float64) {
	const fs2 = 4.0
	num, den := complex(1, 0), complex(1, 0)
	for _, v := range z {
		num *= fs2 - v
	}
	for _, v := range p {
		den *= fs2 - v
	}
	zz := make([]complex128, 0, len(p))
	for _, v := range z {
		zz = append(zz, (fs2+v)/(fs2-v))
	}
	for range len(p) - len(z) {
		zz = append(zz, -1)
	}
	pz := make([]complex128, len(p))
	for i, v := range p {
		pz[i] = (fs2 + v) / (fs2 - v)
	}
	return zz, pz, k * real(num/den)
}

// conjTol is the relative tolerance below which an imaginary part counts
// as rounding noise of a real root (100 machine epsilons, the tolerance
// scipy documents for its conjugate-pair matching).
const conjTol = 100 * 2.220446049250313e-16

// splitConj returns the roots with positive imaginary part (one of each
// conjugate pair, the pair averaged so the two halves match exactly) and the
// real roots, each group sorted by real part and then by |imaginary part|.
// It assumes the roots come in conjugate pairs, which holds for every design
// here.
func splitConj(r []complex128) (cplx []complex128, reals []float64) {
	s := append([]complex128(nil), r...)
	sort.SliceStable(s, func(i, j int) bool {
		if real(s[i]) != real(s[j]) {
			return real(s[i]) < real(s[j])
		}
		return math.Abs(imag(s[i])) < math.Abs(imag(s[j]))
	})
	var pos, neg []complex128
	for _, v := range s {
		switch {
		case math.Abs(imag(v)) <= conjTol*cmplx.Abs(v):
			reals = append(reals, real(v))
		case imag(v) > 0:
			pos = append(pos, v)
		default:
			neg = append(neg, v)
		}
	}
	// Within runs of equal real part, order each half by |imag|.
	byImag := func(h []complex128) {
		for start := 0; start < len(h); {
			stop := start + 1
			for stop < len(h) && real(h[stop])-real(h[stop-1]) <= conjTol*cmplx.Abs(h[stop-1]) {
				stop++
			}
			run := h[start:stop]
			sort.SliceStable(run, func(i, j int) bool { return math.Abs(imag(run[i])) < math.Abs(imag(run[j])) })
			start = stop
		}
	}
	byImag(pos)
	byImag(neg)
	n := min(len(pos), len(neg))
	for i := range n {
		cplx = append(cplx, (pos[i]+cmplx.Conj(neg[i]))/2)
	}
	return cplx, reals
}

// root is a pole or zero kept during pairing: complex roots stand for their
// conjugate pair.
type root struct {
	v    complex128
	real bool
}

func rootsOf(r []complex128) []root {
	c, re := splitConj(r)
	out := make([]root, 0, len(c)+len(re))
	for _, v := range c {
		out = append(out, root{v: v})
	}
	for _, v := range re {
		out = append(out, root{v: complex(v, 0), real: true})
	}
	return out
}

// worstIndex returns the index of the root closest to the unit circle
// (first one on ties), or the real root closest when onlyReal.
func worstIndex(r []root, onlyReal bool) int {
	best, bestD := -1, math.Inf(1)
	for i, v := range r {
		if onlyReal && !v.real {
			continue
		}
		if d := math.Abs(1 - cmplx.Abs(v.v)); d < bestD {
			best, bestD = i, d
		}
	}
	return best
}

// nearestIndex returns the index of the root of r nearest to target among
// all roots (kind 0), real ones (kind 1) or complex ones (kind 2); −1 when
// none qualifies. Ties go to the lower index.
func nearestIndex(r []root, target complex128, kind int) int {
	best, bestD := -1, math.Inf(1)
	for i, v := range r {
		if (kind == 1 && !v.real) || (kind == 2 && v.real) {
			continue
		}
		if d := cmplx.Abs(v.v - target); d < bestD {
			best, bestD = i, d
		}
	}
	return best
}

func countReal(r []root) int {
	n := 0
	for _, v := range r {
		if v.real {
			n++
		}
	}
	return n
}

func remove(r []root, i int) []root { return append(r[:i], r[i+1:]...) }

// pairSections groups digital zeros and poles into second-order sections the
// way scipy.signal.zpk2sos does with its default "nearest" pairing, so that
// the rows match scipy's:
//
//  1. pad poles and zeros with roots at the origin to equal, even counts;
//     keep one root of each conjugate pair;
//  2. repeatedly take the remaining pole closest to the unit circle; a
//     complex pole takes its conjugate as partner, a real pole the next real
//     pole closest to the circle; the section's zeros are the zero nearest
//     that pole (with its conjugate, or else the nearest real zero), except
//     that the last real pole takes the nearest real zero alone, and a
//     complex pole must take a complex zero when one real pole and one real
//     zero are left;
//  3. emit the sections in the reverse order of selection (poles nearest the
//     unit circle last, where their high gain sees the least amplified
//     signal), with the overall gain k in the first section.
//
// The documented algorithm is scipy's (scipy.signal.zpk2sos, "nearest"); this
// is an independent implementation of it.
func pairSections(zs, ps []complex128, k float64) SOS {
	for len(ps) < len(zs) {
		ps = append(ps, 0)
	}
	for len(zs) < len(ps) {
		zs = append(zs, 0)
	}
	nSections := (len(ps) + 1) / 2
	if len(ps)%2 == 1 {
		ps = append(ps, 0)
		zs = append(zs, 0)
	}
	p := rootsOf(ps)
	z := rootsOf(zs)

	type pair struct{ p1, p2, z1, z2 complex128 }
	chosen := make([]pair, 0, nSections)
	for range nSections {
		i := worstIndex(p, false)
		p1 := p[i]
		p = remove(p, i)
		var s pair
		switch {
		case p1.real && countReal(p) == 0:
			// Last real pole: a first-order section with the nearest real zero.
			j := nearestIndex(z, p1.v, 1)
			s = pair{p1: p1.v, z1: z[j].v}
			z = remove(z, j)
		case len(p)+1 == len(z) && !p1.real && countReal(p) == 1 && countReal(z) == 1:
			// One real pole and one real zero remain for later: this complex
			// pole must take a complex zero.
			j := nearestIndex(z, p1.v, 2)
			s = pair{p1: p1.v, p2: cmplx.Conj(p1.v), z1: z[j].v, z2: cmplx.Conj(z[j].v)}
			z = remove(z, j)
		default:
			if p1.real {
				j := worstIndex(p, true)
				s.p1, s.p2 = p1.v, p[j].v
				p = remove(p, j)
			} else {
				s.p1, s.p2 = p1.v, cmplx.Conj(p1.v)
			}
			j := nearestIndex(z, p1.v, 0)
			z1 := z[j]
			z = remove(z, j)
			s.z1 = z1.v
			if !z1.real {
				s.z2 = cmplx.Conj(z1.v)
			} else if j2 := nearestIndex(z, p1.v, 1); j2 >= 0 {
				s.z2 = z[j2].v
				z = remove(z, j2)
			}
		}
		chosen = append(chosen, s)
	}
	sos := make(SOS, nSections)
	for i := range nSections {
		s := chosen[nSections-1-i]
		g := 1.0
		if i == 0 {
			g = k
		}
		// b = g·(1 − z1 z⁻¹)(1 − z2 z⁻¹), a = (1 − p1 z⁻¹)(1 − p2 z⁻¹).
		sos[i] = [6]float64{
			g, g * real(-s.z1-s.z2), g * real(s.z1*s.z2),
			1, real(-s.p1 - s.p2), real(s.p1 * s.p2),
		}
	}
	return sos
}
