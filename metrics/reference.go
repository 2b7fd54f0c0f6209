package metrics

// commonAverage re-references the channels in place to the common average of
// the good ones: x_c[t] ← x_c[t] − (1/G) Σ_{g good} x_g[t], for every channel
// c (good or not, so that a bad channel's display stays comparable) and every
// t < n. Work is split over time in blocks across the worker pool; each
// sample's mean is accumulated in float64.
func commonAverage(data [][]float32, good []bool, n, workers int) {
	var idx []int
	for c, ok := range good {
		if ok {
			idx = append(idx, c)
		}
	}
	if len(idx) == 0 {
		return
	}
	const block = 8192
	blocks := (n + block - 1) / block
	inv := 1 / float64(len(idx))
	parallel(blocks, workers, func(_, b int) {
		lo := b * block
		hi := min(lo+block, n)
		var mean [block]float64
		m := mean[:hi-lo]
		for _, c := range idx {
			x := data[c][lo:hi]
			for i, v := range x {
				m[i] += float64(v)
			}
		}
		for i := range m {
			m[i] *= inv
		}
		for c := range data {
			x := data[c][lo:hi]
			for i := range x {
				x[i] = float32(float64(x[i]) - m[i])
			}
		}
	})
}
