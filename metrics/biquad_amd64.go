//go:build !purego

package metrics

// On amd64 the pair kernels run in SSE2 (biquad_amd64.s), both channels of
// a pair in one register: the same operations as run2x2Go and run1x2Go in
// the same order, so the same bits (TestPairKernelsMatchGo), at about
// the cost of one channel's recurrence for two. SSE2 is part of every
// amd64 processor, so there is no fallback to choose at run time.

//go:noescape
func pair2SSE2(buf []float64, c *[20]float64, st *[8]float64, backward bool)

//go:noescape
func pair1SSE2(buf []float64, c *[10]float64, st *[4]float64, backward bool)

// dup writes the coefficients b0, b1, b2, a1, a2 of s, each twice, to c.
func dup(c []float64, s *[6]float64) {
	for i, v := range [5]float64{s[0], s[1], s[2], s[4], s[5]} {
		c[2*i], c[2*i+1] = v, v
	}
}

// toLanes and fromLanes convert one section's states between the Go
// kernels' order {s1, s2 of the first channel, s1, s2 of the second} and
// the assembly's {s1 of both, s2 of both}.
func toLanes(dst []float64, st *[4]float64) {
	dst[0], dst[1], dst[2], dst[3] = st[0], st[2], st[1], st[3]
}

func fromLanes(st *[4]float64, src []float64) {
	st[0], st[2], st[1], st[3] = src[0], src[1], src[2], src[3]
}

func run2x2(buf []float64, s, t *[6]float64, ss, ts *[4]float64, backward bool) {
	var c [20]float64
	var st [8]float64
	dup(c[:10], s)
	dup(c[10:], t)
	toLanes(st[:4], ss)
	toLanes(st[4:], ts)
	pair2SSE2(buf, &c, &st, backward)
	fromLanes(ss, st[:4])
	fromLanes(ts, st[4:])
}

func run1x2(buf []float64, s *[6]float64, ss *[4]float64, backward bool) {
	var c [10]float64
	var st [4]float64
	dup(c[:], s)
	toLanes(st[:], ss)
	pair1SSE2(buf, &c, &st, backward)
	fromLanes(ss, st[:])
}
