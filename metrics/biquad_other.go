//go:build !amd64 || purego

package metrics

// Elsewhere the pair kernels are the Go ones.

func run2x2(buf []float64, s, t *[6]float64, ss, ts *[4]float64, backward bool) {
	run2x2Go(buf, s, t, ss, ts, backward)
}

func run1x2(buf []float64, s *[6]float64, ss *[4]float64, backward bool) {
	run1x2Go(buf, s, ss, backward)
}
