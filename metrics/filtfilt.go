package metrics

import "fmt"

// PadLen returns the number of samples FiltFilt adds at each end of its
// input by odd extension: 3·(2·len(sos) + 1 − m), where m is the smaller of
// the number of sections with b2 = 0 and with a2 = 0 (scipy.signal.sosfiltfilt's
// default). FiltFilt needs len(x) > PadLen(sos).
func PadLen(sos SOS) int {
	nb, na := 0, 0
	for _, s := range sos {
		if s[2] == 0 {
			nb++
		}
		if s[5] == 0 {
			na++
		}
	}
	return 3 * (2*len(sos) + 1 - min(nb, na))
}

// FiltFilt applies the cascade sos forward and then backward to x (zero
// phase; the magnitude response is squared) and returns the result in dst,
// with the defaults of scipy.signal.sosfiltfilt(sos, x):
//
//   - x is extended at each end by n = PadLen(sos) samples of odd
//     reflection about its end points: 2·x[0] − x[n..1] before and
//     2·x[last] − x[last−1..last−n] after;
//   - each pass starts from the steady-state section states of a unit step
//     (scipy.signal.sosfilt_zi) scaled by the first sample the pass sees;
//   - each section runs in direct form II transposed:
//     y = b0·x + s1; s1 = b1·x − a1·y + s2; s2 = b2·x − a2·y;
//   - the padding is cut off again.
//
// The result is written to dst[:len(x)] and returned when cap(dst) ≥ len(x);
// dst may be x itself (in-place filtering). When cap(dst) is smaller, or dst
// is nil, a new slice is returned. When cap(dst) ≥ len(x) + 2·PadLen(sos),
// FiltFilt uses dst as its work space and allocates nothing; otherwise it
// allocates a work buffer of that size.
//
// FiltFilt panics if len(x) ≤ PadLen(sos) or sos is empty: callers check the
// length first (a programmer error, like a mismatched FFT length).
func FiltFilt(dst, x []float64, sos SOS) []float64 {
	if len(sos) == 0 {
		panic("metrics: FiltFilt: no filter sections")
	}
	pad := PadLen(sos)
	n := len(x)
	if n <= pad {
		panic(fmt.Sprintf("metrics: FiltFilt: %d samples, need more than the padding of %d", n, pad))
	}
	total := n + 2*pad
	var work []float64
	if cap(dst) >= total {
		work = dst[:total]
	} else {
		work = make([]float64, total)
	}
	// The centre first (copy is a memmove, so dst may alias x), then the
	// odd extensions from the centre copy.
	copy(work[pad:pad+n], x)
	mid := work[pad : pad+n]
	first, last := mid[0], mid[n-1]
	for i := 1; i <= pad; i++ {
		work[pad-i] = 2*first - mid[i]
		work[pad+n-1+i] = 2*last - mid[n-1-i]
	}

	zi := steadyState(sos)
	state := make([][2]float64, len(sos))
	for i := range sos {
		state[i] = [2]float64{zi[i][0] * work[0], zi[i][1] * work[0]}
	}
	runSections(work, sos, state, false)
	y0 := work[total-1]
	for i := range sos {
		state[i] = [2]float64{zi[i][0] * y0, zi[i][1] * y0}
	}
	runSections(work, sos, state, true)

	if cap(dst) >= n && &work[0] != &dst[:1][0] {
		// dst could hold the result but not the padding: the work space
		// was separate, copy the result back so dst always holds it.
		dst = dst[:n]
		copy(dst, work[pad:pad+n])
		return dst
	}
	copy(work[:n], work[pad:pad+n])
	return work[:n]
}

// steadyState returns the initial section states of scipy.signal.sosfilt_zi:
// the states each section holds after a unit step has run forever through
// the cascade (the step reaching section i is scaled by the DC gains of the
// sections before it). For one section with a0 = 1 the states solve
// (I − Aᵀ)·s = b[1:] − a[1:]·b0, A the companion matrix of a.
func steadyState(sos SOS) [][2]float64 {
	out := make([][2]float64, len(sos))
	scale := 1.0
	for i, s := range sos {
		b0, b1, b2 := s[0]/s[3], s[1]/s[3], s[2]/s[3]
		a1, a2 := s[4]/s[3], s[5]/s[3]
		r1 := b1 - a1*b0
		r2 := b2 - a2*b0
		s1 := (r1 + r2) / (1 + a1 + a2)
		s2 := r2 - a2*s1
		out[i] = [2]float64{scale * s1, scale * s2}
		scale *= (s[0] + s[1] + s[2]) / (s[3] + s[4] + s[5])
	}
	return out
}

// runSections filters buf in place through all sections, forward or (when
// backward) from the last sample to the first, updating state. Sections are
// run in groups of up to three, sample by sample within a group, so that the
// independent recurrences of a group overlap in the processor; each
// section's arithmetic is exactly that of one sample-by-sample cascade, so
// the grouping does not change a single bit of the result.
func runSections(buf []float64, sos SOS, state [][2]float64, backward bool) {
	for i := 0; i < len(sos); {
		switch len(sos) - i {
		case 1:
			run1(buf, &sos[i], &state[i], backward)
			i++
		case 2:
			run2(buf, &sos[i], &sos[i+1], &state[i], &state[i+1], backward)
			i += 2
		default:
			run3(buf, &sos[i], &sos[i+1], &sos[i+2], &state[i], &state[i+1], &state[i+2], backward)
			i += 3
		}
	}
}

func run1(buf []float64, s *[6]float64, st *[2]float64, backward bool) {
	b0, b1, b2, a1, a2 := s[0], s[1], s[2], s[4], s[5]
	z1, z2 := st[0], st[1]
	step := func(x float64) float64 {
		y := b0*x + z1
		z1 = b1*x - a1*y + z2
		z2 = b2*x - a2*y
		return y
	}
	if backward {
		for i := len(buf) - 1; i >= 0; i-- {
			buf[i] = step(buf[i])
		}
	} else {
		for i, x := range buf {
			buf[i] = step(x)
		}
	}
	st[0], st[1] = z1, z2
}

func run2(buf []float64, s, t *[6]float64, ss, ts *[2]float64, backward bool) {
	sb0, sb1, sb2, sa1, sa2 := s[0], s[1], s[2], s[4], s[5]
	tb0, tb1, tb2, ta1, ta2 := t[0], t[1], t[2], t[4], t[5]
	s1, s2 := ss[0], ss[1]
	t1, t2 := ts[0], ts[1]
	if backward {
		for i := len(buf) - 1; i >= 0; i-- {
			x := buf[i]
			y := sb0*x + s1
			s1 = sb1*x - sa1*y + s2
			s2 = sb2*x - sa2*y
			u := tb0*y + t1
			t1 = tb1*y - ta1*u + t2
			t2 = tb2*y - ta2*u
			buf[i] = u
		}
	} else {
		for i, x := range buf {
			y := sb0*x + s1
			s1 = sb1*x - sa1*y + s2
			s2 = sb2*x - sa2*y
			u := tb0*y + t1
			t1 = tb1*y - ta1*u + t2
			t2 = tb2*y - ta2*u
			buf[i] = u
		}
	}
	ss[0], ss[1] = s1, s2
	ts[0], ts[1] = t1, t2
}

func run3(buf []float64, s, t, r *[6]float64, ss, ts, rs *[2]float64, backward bool) {
	sb0, sb1, sb2, sa1, sa2 := s[0], s[1], s[2], s[4], s[5]
	tb0, tb1, tb2, ta1, ta2 := t[0], t[1], t[2], t[4], t[5]
	rb0, rb1, rb2, ra1, ra2 := r[0], r[1], r[2], r[4], r[5]
	s1, s2 := ss[0], ss[1]
	t1, t2 := ts[0], ts[1]
	r1, r2 := rs[0], rs[1]
	if backward {
		for i := len(buf) - 1; i >= 0; i-- {
			x := buf[i]
			y := sb0*x + s1
			s1 = sb1*x - sa1*y + s2
			s2 = sb2*x - sa2*y
			u := tb0*y + t1
			t1 = tb1*y - ta1*u + t2
			t2 = tb2*y - ta2*u
			v := rb0*u + r1
			r1 = rb1*u - ra1*v + r2
			r2 = rb2*u - ra2*v
			buf[i] = v
		}
	} else {
		for i, x := range buf {
			y := sb0*x + s1
			s1 = sb1*x - sa1*y + s2
			s2 = sb2*x - sa2*y
			u := tb0*y + t1
			t1 = tb1*y - ta1*u + t2
			t2 = tb2*y - ta2*u
			v := rb0*u + r1
			r1 = rb1*u - ra1*v + r2
			r2 = rb2*u - ra2*v
			buf[i] = v
		}
	}
	ss[0], ss[1] = s1, s2
	ts[0], ts[1] = t1, t2
	rs[0], rs[1] = r1, r2
}
