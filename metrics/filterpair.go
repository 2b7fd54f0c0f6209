package metrics

// Two channels through one zero-phase cascade at once.
//
// A biquad section in direct form II transposed is a recurrence: each
// output waits for the state the previous output left, so one channel
// keeps the processor's floating-point units mostly idle, waiting on the
// latency of a multiply and three adds per sample. Two channels are two
// independent recurrences that overlap in the processor. The pair
// functions below run the same operations, in the same order, on each
// channel as FiltFilt does on one (an IEEE-754 double operation gives the
// same bits whatever runs beside it), so a channel filtered in a pair is
// bit for bit the channel filtered alone (TestFilterPairEqualsFilterOne).
//
// The two channels are stored interleaved, buf[2i] the first and
// buf[2i+1] the second channel's sample i, so one pass reads and writes
// one stream.

// pairChunk is how many samples per channel the pair passes take at a
// time (16 KiB of interleaved doubles): a chunk is converted, filtered and
// read back while it is in the processor's first-level cache, instead of
// streaming the whole channel through memory once per step.
const pairChunk = 1024

// startStates returns each section's states at the start of a pass whose
// first samples are x0 and x1: the steady states zi scaled by them.
func startStates(zi [][2]float64, x0, x1 float64) [][4]float64 {
	st := make([][4]float64, len(zi))
	for i, z := range zi {
		st[i] = [4]float64{z[0] * x0, z[1] * x0, z[0] * x1, z[1] * x1}
	}
	return st
}

// runSections2 is runSections over an interleaved pair: sections two at
// a time, each channel's states in state[i] = {s1, s2 of the first
// channel, s1, s2 of the second}.
func runSections2(buf []float64, sos SOS, state [][4]float64, backward bool) {
	for i := 0; i < len(sos); {
		if len(sos)-i >= 2 {
			run2x2(buf, &sos[i], &sos[i+1], &state[i], &state[i+1], backward)
			i += 2
			continue
		}
		run1x2(buf, &sos[i], &state[i], backward)
		i++
	}
}

func run1x2Go(buf []float64, s *[6]float64, st *[4]float64, backward bool) {
	b0, b1, b2, a1, a2 := s[0], s[1], s[2], s[4], s[5]
	p1, p2, q1, q2 := st[0], st[1], st[2], st[3]
	step := func(i int) {
		x, w := buf[i], buf[i+1]
		y := b0*x + p1
		v := b0*w + q1
		p1 = b1*x - a1*y + p2
		q1 = b1*w - a1*v + q2
		p2 = b2*x - a2*y
		q2 = b2*w - a2*v
		buf[i], buf[i+1] = y, v
	}
	if backward {
		for i := len(buf) - 2; i >= 0; i -= 2 {
			step(i)
		}
	} else {
		for i := 0; i+1 < len(buf); i += 2 {
			step(i)
		}
	}
	st[0], st[1], st[2], st[3] = p1, p2, q1, q2
}

func run2x2Go(buf []float64, s, t *[6]float64, ss, ts *[4]float64, backward bool) {
	sb0, sb1, sb2, sa1, sa2 := s[0], s[1], s[2], s[4], s[5]
	tb0, tb1, tb2, ta1, ta2 := t[0], t[1], t[2], t[4], t[5]
	p1, p2, q1, q2 := ss[0], ss[1], ss[2], ss[3]
	r1, r2, u1, u2 := ts[0], ts[1], ts[2], ts[3]
	step := func(i int) {
		x, w := buf[i], buf[i+1]
		// first section, both channels
		y := sb0*x + p1
		v := sb0*w + q1
		p1 = sb1*x - sa1*y + p2
		q1 = sb1*w - sa1*v + q2
		p2 = sb2*x - sa2*y
		q2 = sb2*w - sa2*v
		// second section
		z := tb0*y + r1
		o := tb0*v + u1
		r1 = tb1*y - ta1*z + r2
		u1 = tb1*v - ta1*o + u2
		r2 = tb2*y - ta2*z
		u2 = tb2*v - ta2*o
		buf[i], buf[i+1] = z, o
	}
	if backward {
		for i := len(buf) - 2; i >= 0; i -= 2 {
			step(i)
		}
	} else {
		for i := 0; i+1 < len(buf); i += 2 {
			step(i)
		}
	}
	ss[0], ss[1], ss[2], ss[3] = p1, p2, q1, q2
	ts[0], ts[1], ts[2], ts[3] = r1, r2, u1, u2
}

// filterPair is filterOne over two channels at once: x and y (at the
// recording's rate, a.nIn samples each) are filtered segment by segment
// in place, and x[:a.n], y[:a.n] returned. work and work2 hold at least
// twice workLens() values.
//
// Each stage is FiltFilt on the interleaved pair: odd extension by
// pad = PadLen samples at both ends, a forward pass from the scaled steady
// states, a backward pass from the states scaled by the last forward
// output, then the padding cut. Chunk by chunk (pairChunk): the forward
// pass converts each chunk's input just before filtering it, and the
// backward pass hands each chunk's kept samples on (every q-th to the slow
// stage, then all to x and y) just after. The backward pass stops at the
// start of the centre: its outputs over the leading padding are cut
// anyway, and nothing after them depends on them.
func (a *analysis) filterPair(x, y []float32, work, work2 []float64) ([]float32, []float32) {
	padFast, padSlow := PadLen(a.lp), PadLen(a.slow)
	ziFast, ziSlow := steadyState(a.lp), steadyState(a.slow)
	for i, g := range a.segsIn {
		o := a.segs[i]
		inX, inY := x[g.First:g.First+g.Count], y[g.First:g.First+g.Count]
		outX, outY := x[o.First:o.First+o.Count], y[o.First:o.First+o.Count]
		if g.Count <= padFast || o.Count <= padSlow {
			clear(outX) // too short to filter; no epoch fits in it
			clear(outY)
			continue
		}
		n, pad := g.Count, padFast
		total := n + 2*pad
		fast := work[:2*total]
		for ch, in := range [2][]float32{inX, inY} {
			first, last := float64(in[0]), float64(in[n-1])
			for i := 1; i <= pad; i++ {
				fast[2*(pad-i)+ch] = 2*first - float64(in[i])
				fast[2*(pad+n-1+i)+ch] = 2*last - float64(in[n-1-i])
			}
		}
		state := startStates(ziFast, fast[0], fast[1])
		for lo := 0; lo < total; lo += pairChunk {
			hi := min(total, lo+pairChunk)
			for i := max(lo, pad); i < min(hi, pad+n); i++ {
				fast[2*i], fast[2*i+1] = float64(inX[i-pad]), float64(inY[i-pad])
			}
			runSections2(fast[2*lo:2*hi], a.lp, state, false)
		}
		// The slow stage's centre: every q-th sample of the trimmed
		// fast result, taken as each backward chunk is done.
		m, spad := o.Count, padSlow
		stotal := m + 2*spad
		slow := work2[:2*stotal]
		state = startStates(ziFast, fast[2*(total-1)], fast[2*(total-1)+1])
		for hi := total; hi > pad; hi -= pairChunk {
			lo := max(pad, hi-pairChunk)
			runSections2(fast[2*lo:2*hi], a.lp, state, true)
			// centre sample k sits at pad + k·q; those in [lo, hi)
			for k := (lo - pad + a.q - 1) / a.q; k < m && pad+k*a.q < hi; k++ {
				j := 2 * (pad + k*a.q)
				slow[2*(spad+k)], slow[2*(spad+k)+1] = fast[j], fast[j+1]
			}
		}
		for ch := 0; ch < 2; ch++ {
			first, last := slow[2*spad+ch], slow[2*(spad+m-1)+ch]
			for i := 1; i <= spad; i++ {
				slow[2*(spad-i)+ch] = 2*first - slow[2*(spad+i)+ch]
				slow[2*(spad+m-1+i)+ch] = 2*last - slow[2*(spad+m-1-i)+ch]
			}
		}
		state = startStates(ziSlow, slow[0], slow[1])
		runSections2(slow, a.slow, state, false)
		state = startStates(ziSlow, slow[2*(stotal-1)], slow[2*(stotal-1)+1])
		for hi := stotal; hi > spad; hi -= pairChunk {
			lo := max(spad, hi-pairChunk)
			runSections2(slow[2*lo:2*hi], a.slow, state, true)
			for i := lo; i < min(hi, spad+m); i++ {
				outX[i-spad], outY[i-spad] = float32(slow[2*i]), float32(slow[2*i+1])
			}
		}
	}
	return x[:a.n], y[:a.n]
}
