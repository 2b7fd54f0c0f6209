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

// oddExtend2 writes FiltFilt's odd extension at both ends of the
// interleaved pair buf whose centre, n samples per channel, is already at
// buf[2·pad : 2·(pad+n)]: 2·x[0] − x[i] before and 2·x[n−1] − x[n−1−i]
// after, for i = 1…pad, per channel.
func oddExtend2(buf []float64, pad, n int) {
	for ch := 0; ch < 2; ch++ {
		first, last := buf[2*pad+ch], buf[2*(pad+n-1)+ch]
		for i := 1; i <= pad; i++ {
			buf[2*(pad-i)+ch] = 2*first - buf[2*(pad+i)+ch]
			buf[2*(pad+n-1+i)+ch] = 2*last - buf[2*(pad+n-1-i)+ch]
		}
	}
}

// filtFilt2 runs the cascade sos forward and then backward over the
// interleaved, already padded pair buf (len(buf)/2 samples per channel),
// each pass starting from the steady states zi (steadyState(sos)) scaled
// by the first sample it sees, per channel: FiltFilt's passes, without
// its padding and trimming.
func filtFilt2(buf []float64, sos SOS, zi [][2]float64) {
	state := make([][4]float64, len(sos))
	start := func(x0, x1 float64) {
		for i := range sos {
			state[i] = [4]float64{zi[i][0] * x0, zi[i][1] * x0, zi[i][0] * x1, zi[i][1] * x1}
		}
	}
	start(buf[0], buf[1])
	runSections2(buf, sos, state, false)
	end := len(buf) - 2
	start(buf[end], buf[end+1])
	runSections2(buf, sos, state, true)
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

func run1x2(buf []float64, s *[6]float64, st *[4]float64, backward bool) {
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

func run2x2(buf []float64, s, t *[6]float64, ss, ts *[4]float64, backward bool) {
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
func (a *analysis) filterPair(x, y []float32, work, work2 []float64) ([]float32, []float32) {
	padFast, padSlow := PadLen(a.lp), PadLen(a.slow)
	ziFast, ziSlow := steadyState(a.lp), steadyState(a.slow)
	for i, g := range a.segsIn {
		o := a.segs[i]
		outX, outY := x[o.First:o.First+o.Count], y[o.First:o.First+o.Count]
		if g.Count <= padFast || o.Count <= padSlow {
			clear(outX) // too short to filter; no epoch fits in it
			clear(outY)
			continue
		}
		fast := work[:2*(g.Count+2*padFast)]
		centre := fast[2*padFast:]
		for k, v := range x[g.First : g.First+g.Count] {
			centre[2*k] = float64(v)
		}
		for k, v := range y[g.First : g.First+g.Count] {
			centre[2*k+1] = float64(v)
		}
		oddExtend2(fast, padFast, g.Count)
		filtFilt2(fast, a.lp, ziFast)
		// Every q-th sample of the trimmed result, into the centre of
		// the slow stage's padded pair.
		slow := work2[:2*(o.Count+2*padSlow)]
		for k := 0; k < o.Count; k++ {
			j := 2 * (padFast + k*a.q)
			slow[2*(padSlow+k)] = fast[j]
			slow[2*(padSlow+k)+1] = fast[j+1]
		}
		oddExtend2(slow, padSlow, o.Count)
		filtFilt2(slow, a.slow, ziSlow)
		res := slow[2*padSlow:]
		for k := range outX {
			outX[k] = float32(res[2*k])
			outY[k] = float32(res[2*k+1])
		}
	}
	return x[:a.n], y[:a.n]
}
