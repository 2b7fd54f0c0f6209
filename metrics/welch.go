package metrics

import (
	"fmt"
	"math"

	"longwave/metrics/fft"
)

// Welch accumulates a power spectral density estimate by Welch's method
// (Welch 1967, IEEE Trans. Audio Electroacoust. AU-15(2):70–73) with the
// conventions of scipy.signal.welch(x, fs, window='hann', nperseg=segment,
// noverlap=overlap, detrend='constant', scaling='density',
// return_onesided=True, average='mean'):
//
//   - segments of `segment` samples start every segment−overlap samples
//     from the first sample of each added stretch; a partial segment at the
//     end of a stretch is dropped;
//   - each segment has its mean removed and is multiplied by the periodic
//     Hann window w[k] = 0.5 − 0.5·cos(2πk/segment), k = 0…segment−1 (the
//     form for spectral analysis; gonum's window.Hann is the symmetric one,
//     with segment−1 in the denominator, and is not used);
//   - its periodogram is |FFT|²/(fs·Σw²), doubled at every bin except DC and,
//     for even segment lengths, Nyquist (one-sided density);
//   - PSD is the mean of the segment periodograms.
//
// Units: with x in µV and fs in Hz, the PSD is in µV²/Hz at frequencies
// k·fs/segment, k = 0…segment/2.
//
// Several stretches (e.g. the clean epochs of one eye state) can be added,
// and accumulators of the same configuration merged (one per goroutine):
// the PSD then equals scipy.signal.welch applied to each stretch separately,
// the results averaged with weights equal to each stretch's segment count —
// that is, the plain mean over all segments. A Welch value is not safe for
// concurrent use; it owns one transform (package fft) with its work buffers.
type Welch struct {
	fs       float64
	segment  int
	step     int
	window   []float64
	scale    float64 // 1/(fs·Σw²)
	fft      *fft.Real
	buf      []float64
	coef     []complex128
	sum      []float64 // Σ over segments of the one-sided periodogram
	one      []float64 // one segment's periodogram
	segments int
}

// NewWelch returns an empty accumulator for sampling rate fs (Hz), segments
// of `segment` samples overlapping by `overlap` samples. It panics unless
// fs > 0, segment ≥ 2 and 0 ≤ overlap < segment: these come from fixed
// settings, so a bad value is a programmer error.
func NewWelch(fs float64, segment, overlap int) *Welch {
	if !(fs > 0) || math.IsInf(fs, 0) || segment < 2 || overlap < 0 || overlap >= segment {
		panic(fmt.Sprintf("metrics: NewWelch: invalid configuration fs=%g segment=%d overlap=%d", fs, segment, overlap))
	}
	w := &Welch{
		fs:      fs,
		segment: segment,
		step:    segment - overlap,
		window:  make([]float64, segment),
		fft:     fft.NewReal(segment),
		buf:     make([]float64, segment),
		coef:    make([]complex128, segment/2+1),
		sum:     make([]float64, segment/2+1),
	}
	var ss float64
	for k := range w.window {
		v := 0.5 - 0.5*math.Cos(2*math.Pi*float64(k)/float64(segment))
		w.window[k] = v
		ss += v * v
	}
	w.scale = 1 / (fs * ss)
	return w
}

// Add adds every whole segment of x and returns how many it added.
func (w *Welch) Add(x []float64) int {
	n := 0
	for start := 0; start+w.segment <= len(x); start += w.step {
		copy(w.buf, x[start:start+w.segment])
		w.addBuf()
		n++
	}
	return n
}

// AddFloat32 is Add for single-precision samples; the arithmetic is in
// float64.
func (w *Welch) AddFloat32(x []float32) int {
	n := 0
	for start := 0; start+w.segment <= len(x); start += w.step {
		for i, v := range x[start : start+w.segment] {
			w.buf[i] = float64(v)
		}
		w.addBuf()
		n++
	}
	return n
}

// addBuf detrends, windows and transforms w.buf and adds its one-sided
// periodogram to the sums.
func (w *Welch) addBuf() {
	if w.one == nil {
		w.one = make([]float64, len(w.sum))
	}
	w.transform(w.one)
	for k, p := range w.one {
		w.sum[k] += p
	}
	w.segments++
}

// transform detrends, windows and transforms w.buf and writes its one-sided
// periodogram to dst (len(dst) = len(w.sum)).
func (w *Welch) transform(dst []float64) {
	var mean float64
	for _, v := range w.buf {
		mean += v
	}
	mean /= float64(w.segment)
	for i, v := range w.buf {
		w.buf[i] = (v - mean) * w.window[i]
	}
	w.coef = w.fft.Coefficients(w.coef, w.buf)
	last := len(w.coef) - 1
	for k, c := range w.coef {
		p := (real(c)*real(c) + imag(c)*imag(c)) * w.scale
		if k > 0 && (k < last || w.segment%2 == 1) {
			p *= 2
		}
		dst[k] = p
	}
}

// Merge adds the segments of o to w. It panics if the two differ in
// sampling rate, segment length or overlap.
func (w *Welch) Merge(o *Welch) {
	if w.fs != o.fs || w.segment != o.segment || w.step != o.step {
		panic("metrics: Welch.Merge: different configurations")
	}
	for k, v := range o.sum {
		w.sum[k] += v
	}
	w.segments += o.segments
}

// Segments returns the number of segments added so far.
func (w *Welch) Segments() int { return w.segments }

// Freqs returns the bin frequencies k·fs/segment in Hz, k = 0…segment/2.
func (w *Welch) Freqs() []float64 {
	f := make([]float64, len(w.sum))
	for k := range f {
		f[k] = float64(k) * w.fs / float64(w.segment)
	}
	return f
}

// PSD writes the mean one-sided density over all segments (µV²/Hz when the
// samples are µV) to dst, allocating when dst is too short, and returns it.
// With no segments added there is no estimate and PSD returns an empty
// slice; callers check Segments first.
func (w *Welch) PSD(dst []float64) []float64 {
	if w.segments == 0 {
		return dst[:0]
	}
	if cap(dst) < len(w.sum) {
		dst = make([]float64, len(w.sum))
	}
	dst = dst[:len(w.sum)]
	inv := float64(w.segments)
	for k, v := range w.sum {
		dst[k] = v / inv
	}
	return dst
}

// Periodogram writes the one-sided density of the single segment x
// (len(x) = the segment length; detrended and windowed as in Add) to dst,
// allocating when dst is too short, and returns it. The accumulated sums
// are not touched.
func (w *Welch) Periodogram(dst []float64, x []float32) []float64 {
	if len(x) != w.segment {
		panic(fmt.Sprintf("metrics: Welch.Periodogram: %d samples, segment is %d", len(x), w.segment))
	}
	for i, v := range x {
		w.buf[i] = float64(v)
	}
	if cap(dst) < len(w.sum) {
		dst = make([]float64, len(w.sum))
	}
	dst = dst[:len(w.sum)]
	w.transform(dst)
	return dst
}
