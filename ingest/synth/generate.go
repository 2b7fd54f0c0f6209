package synth

import (
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"sync"

	"gonum.org/v1/gonum/dsp/fourier"

	"longwave/ingest"
)

// Rendering is a Spec turned into digital samples, exactly as Write stores
// them: what a round-trip test compares a decoder against.
type Rendering struct {
	// Channels are the 10-10 names (Spec.Channels) followed by the EOG
	// labels (Spec.EOG); Labels the header labels in the chosen spelling.
	Channels, Labels []string
	SampleRate       float64
	Records          int
	SamplesPerRecord int
	RecordDuration   float64
	// Digital holds each channel's samples as stored (16- or 24-bit values).
	Digital [][]int32
	// DigitalMin, DigitalMax and the physical extremes as written in the
	// header (PhysicalMin/Max are the 8-character texts).
	DigitalMin, DigitalMax   int
	PhysicalMin, PhysicalMax string
	// Gain (µV per step) and Offset: µV = Offset + Gain·digital, computed
	// from the header's extremes the way EDF readers do.
	Gain, Offset float64
	// Clipped counts samples that fell outside the digital range.
	Clipped int
	// Annotations are the annotations written (eye-state periods, then the
	// extra ones), in file order; nil for formats without annotations.
	Annotations []ingest.Annotation
}

// Microvolts returns sample i of channel c in µV: Offset + Gain·digital.
func (r *Rendering) Microvolts(c, i int) float64 {
	return r.Offset + r.Gain*float64(r.Digital[c][i])
}

// Artefact sizes (synthetic, chosen to look like routine recordings); the
// amplitude and burst-length ranges are the defaults of the Spec fields.
const (
	blinkMinSeconds, blinkMaxSeconds   = 0.2, 0.4   // raised-cosine blink length
	blinkMinUV, blinkMaxUV             = 80.0, 200  // peak at Fp1/Fp2, positive
	muscleMinSeconds, muscleMaxSeconds = 0.5, 1.5   // burst length
	muscleMinUV, muscleMaxUV           = 10.0, 30.0 // RMS at the envelope peak, weight 1
	muscleLoHz, muscleHiHz             = 20.0, 80.0 // burst band, capped at 0.45·fs
)

// Render computes the digital samples of s. Channels are generated in
// parallel, each from its own random stream, so the result does not depend on
// the number of cores.
func Render(s Spec) (*Rendering, error) {
	m, err := newModel(s)
	if err != nil {
		return nil, err
	}
	dmin, dmax := digitalRange(s)
	pminText, pmaxText, gain, err := physicalRange(s)
	if err != nil {
		return nil, err
	}
	pmin := parseHeaderNumber(pminText)
	offset := pmin - float64(dmin)*gain

	n, fs := m.n, s.SampleRate
	nfft := fastLength(n)
	half := nfft / 2 // bins 1..half-1 carry noise; DC and Nyquist are 0

	// Densities sampled at the FFT bins: background (with low-pass) and beta.
	apBins := make([]float64, half)
	betaBins := make([]float64, half)
	for k := 1; k < half; k++ {
		f := float64(k) * fs / float64(nfft)
		h2 := m.lowPass2(f)
		apBins[k] = m.apDensity(f) * h2
		betaBins[k] = m.betaDensity(f) * h2
	}

	shared := make([]float64, n)
	if rho := s.SharedAperiodic; rho > 0 && s.AperiodicLevel > 0 {
		shapedNoise(shared, newNoisePlan(nfft), newRand(s.Seed, streamShared), fs, func(k int) float64 { return rho * apBins[k] })
	}
	alphaWave := make([]float64, n)
	m.alpha.wave(alphaWave, fs)
	scaleSlice(alphaWave, math.Sqrt(m.lowPass2(s.AlphaHz)))
	applyAlphaGain(alphaWave, m, fs)
	thetaWave := make([]float64, n)
	m.theta.wave(thetaWave, fs)
	scaleSlice(thetaWave, math.Sqrt(m.lowPass2(s.ThetaHz)))
	var lineSin, lineCos []float64
	if s.LineAmplitude > 0 {
		lineSin, lineCos = make([]float64, n), make([]float64, n)
		w := 2 * math.Pi * s.LineHz / fs
		h := math.Sqrt(m.lowPass2(s.LineHz))
		for k := range lineSin {
			sn, cs := math.Sincos(w * float64(k))
			lineSin[k], lineCos[k] = h*sn, h*cs
		}
	}
	blinks := blinkTrain(n, fs, s, newRand(s.Seed, streamBlinks))
	muscle := muscleTrain(n, fs, s, m, newRand(s.Seed, streamMuscle))

	all := append(slices.Clip(s.Channels), s.EOG...)
	eog := make(map[string]bool, len(s.EOG))
	for _, c := range s.EOG {
		eog[c] = true
	}

	r := &Rendering{
		Channels: all, SampleRate: fs,
		Records: m.records, SamplesPerRecord: m.perRec, RecordDuration: s.RecordDuration,
		Digital:    make([][]int32, len(all)),
		DigitalMin: dmin, DigitalMax: dmax, PhysicalMin: pminText, PhysicalMax: pmaxText,
		Gain: gain, Offset: offset,
	}
	for _, c := range all {
		if eog[c] {
			r.Labels = append(r.Labels, spellEOG(c, s.Spelling))
			continue
		}
		r.Labels = append(r.Labels, spell(c, s.Spelling))
	}
	if s.hasAnnotations() {
		r.Annotations = m.annotations()
	}

	rho := s.SharedAperiodic
	clipped := make([]int, len(all))
	jobs := make(chan int)
	var wg sync.WaitGroup
	workers := min(runtime.GOMAXPROCS(0), len(all))
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			var plan *noisePlan
			x := make([]float64, n)
			for ci := range jobs {
				c := all[ci]
				digital := make([]int32, n)
				r.Digital[ci] = digital
				if m.flat[c] {
					zero := quantize(0, offset, gain, dmin, dmax)
					for i := range digital {
						digital[i] = zero
					}
					continue
				}
				clear(x)
				if s.AperiodicLevel > 0 && rho < 1 || s.BetaPower > 0 {
					if plan == nil {
						plan = newNoisePlan(nfft)
					}
					wb := betaWeights.of(c)
					wb2, wp2 := wb*wb, 1.0
					if eog[c] {
						wb2, wp2 = 0, eogPrivateGain*eogPrivateGain
					}
					shapedNoise(x, plan, newRand(s.Seed, labelStream(c, streamPrivate)), fs,
						func(k int) float64 { return wp2*(1-rho)*apBins[k] + wb2*betaBins[k] })
				}
				ws, wa, wt := 1.0, alphaWeights.of(c), thetaWeights.of(c)
				wbl, wm := blinkWeights.of(c), muscleWeights.of(c)
				if eog[c] {
					ws, wa, wt, wbl, wm = eogSharedGain, 0, 0, eogBlinkWeight[c], 0
				}
				amp, sinPhi, cosPhi := 0.0, 0.0, 0.0
				if lineSin != nil {
					amp = m.lineAmp[c]
					sinPhi, cosPhi = math.Sincos(m.linePhi[c])
				}
				for i := range x {
					v := x[i] + ws*shared[i] + wa*alphaWave[i] + wt*thetaWave[i] + wbl*blinks[i] + wm*muscle[i]
					if lineSin != nil { // sin(ωt+φ) = sin ωt·cos φ + cos ωt·sin φ
						v += amp * (lineSin[i]*cosPhi + lineCos[i]*sinPhi)
					}
					d := quantize(v, offset, gain, dmin, dmax)
					if d == int32(dmin) || d == int32(dmax) {
						clipped[ci]++
					}
					digital[i] = d
				}
			}
		}()
	}
	for ci := range all {
		jobs <- ci
	}
	close(jobs)
	wg.Wait()
	for _, k := range clipped {
		r.Clipped += k
	}
	return r, nil
}

// quantize maps µV to the nearest digital value, clamped to the range.
func quantize(v, offset, gain float64, dmin, dmax int) int32 {
	d := math.Round((v - offset) / gain)
	if d <= float64(dmin) {
		return int32(dmin)
	}
	if d >= float64(dmax) {
		return int32(dmax)
	}
	return int32(d)
}

func scaleSlice(x []float64, a float64) {
	for i := range x {
		x[i] *= a
	}
}

// noisePlan is an FFT of length N with its scratch buffers, reused across
// channels by one worker.
type noisePlan struct {
	fft   *fourier.FFT
	coeff []complex128
	seq   []float64
}

func newNoisePlan(nfft int) *noisePlan {
	return &noisePlan{fft: fourier.NewFFT(nfft), coeff: make([]complex128, nfft/2+1), seq: make([]float64, nfft)}
}

// shapedNoise fills dst with Gaussian noise whose one-sided density at bin k
// (frequency k·fs/N, N the plan's length) is density(k) µV²/Hz for
// 0 < k < N/2, and 0 at DC and Nyquist: coefficients X_k = σ_k·(a + ib) with
// a, b standard normal and σ_k² = N·fs·density(k)/4, so that E|X_k|² =
// N·fs·S/2 and the inverse transform divided by N has variance
// Σ_k S(f_k)·fs/N. The first len(dst) ≤ N samples are kept.
func shapedNoise(dst []float64, p *noisePlan, rng *rand.Rand, fs float64, density func(k int) float64) {
	nfft := p.fft.Len()
	coeff := p.coeff
	clear(coeff)
	scale := float64(nfft) * fs / 4
	for k := 1; k < nfft/2; k++ {
		sd := math.Sqrt(scale * density(k))
		a, b := rng.NormFloat64(), rng.NormFloat64()
		coeff[k] = complex(sd*a, sd*b)
	}
	seq := p.fft.Sequence(p.seq, coeff)
	inv := 1 / float64(nfft)
	for i := range dst {
		dst[i] = seq[i] * inv
	}
}

// fastLength returns the smallest even length ≥ n (at least 2) whose only
// prime factors are 2, 3 and 5, so that the FFT runs in O(N log N).
func fastLength(n int) int {
	for m := max(n, 2); ; m++ {
		if m%2 != 0 {
			continue
		}
		k := m
		for _, p := range [3]int{2, 3, 5} {
			for k%p == 0 {
				k /= p
			}
		}
		if k == 1 {
			return m
		}
	}
}

// applyAlphaGain multiplies the alpha wave by g(t): √(1 − attenuation) in
// eyes-open periods, 0 in dropout stretches (sample i is at time i/fs).
func applyAlphaGain(x []float64, m *model, fs float64) {
	span := func(p ingest.Period) (int, int) {
		a := int(math.Ceil(p.Start*fs - 1e-9))
		b := int(math.Ceil(p.End*fs - 1e-9))
		return max(a, 0), min(b, len(x))
	}
	open := math.Sqrt(1 - m.s.AlphaOpenAttenuation)
	for _, p := range m.periods {
		if p.State != ingest.EyesOpen {
			continue
		}
		a, b := span(p)
		for i := a; i < b; i++ {
			x[i] *= open
		}
	}
	for _, p := range m.dropouts {
		a, b := span(p)
		clear(x[a:b])
	}
}

// poissonOnsets returns the onsets (s) of a Poisson process of the given rate
// per minute over [0, total).
func poissonOnsets(total, perMinute float64, rng *rand.Rand) []float64 {
	if perMinute <= 0 {
		return nil
	}
	var out []float64
	mean := 60 / perMinute
	for t := rng.ExpFloat64() * mean; t < total; t += rng.ExpFloat64() * mean {
		out = append(out, t)
	}
	return out
}

// blink is one blink of the train: its first sample, length in samples and
// peak in µV at weight 1.
type blink struct {
	start, length int
	peak          float64
}

// blinkEvents draws the blinks of s: Poisson onsets, then per blink a
// length uniform in [blinkMinSeconds, blinkMaxSeconds) and a peak uniform in
// the spec's range.
func blinkEvents(n int, fs float64, s Spec, rng *rand.Rand) []blink {
	lo, hi := s.blinkRange()
	var out []blink
	for _, t0 := range poissonOnsets(float64(n)/fs, s.BlinksPerMinute, rng) {
		length := int((blinkMinSeconds + (blinkMaxSeconds-blinkMinSeconds)*rng.Float64()) * fs)
		out = append(out, blink{start: int(t0 * fs), length: length, peak: lo + (hi-lo)*rng.Float64()})
	}
	return out
}

// blinkTrain returns the blink waveform at weight 1: positive raised-cosine
// bumps peak·(1 − cos(2πj/length))/2 (Fp1/Fp2 positive, as the eyeball's
// upward turn on closing makes them; common practice).
func blinkTrain(n int, fs float64, s Spec, rng *rand.Rand) []float64 {
	out := make([]float64, n)
	for _, b := range blinkEvents(n, fs, s, rng) {
		for j := 0; j < b.length && b.start+j < n; j++ {
			out[b.start+j] += b.peak * 0.5 * (1 - math.Cos(2*math.Pi*float64(j)/float64(b.length)))
		}
	}
	return out
}

// muscleTrain returns the muscle-burst waveform at weight 1: band-limited
// Gaussian noise (flat density in 20–80 Hz, capped at 0.45·fs, times the
// low-pass) under a Hann envelope.
func muscleTrain(n int, fs float64, s Spec, m *model, rng *rand.Rand) []float64 {
	out := make([]float64, n)
	onsets := poissonOnsets(float64(n)/fs, s.MuscleBurstsPerMinute, rng)
	if len(onsets) == 0 {
		return out
	}
	lo, hi := muscleLoHz, min(muscleHiHz, 0.45*fs)
	if hi <= lo {
		lo, hi = 0.25*fs, 0.45*fs
	}
	minS, maxS := s.muscleLength()
	minUV, maxUV := s.muscleRange()
	for _, t0 := range onsets {
		length := max(int((minS+(maxS-minS)*rng.Float64())*fs), 4)
		rms := minUV + (maxUV-minUV)*rng.Float64()
		nfft := fastLength(length)
		plan := newNoisePlan(nfft)
		// unit variance: density 1/(hi − lo) over the band.
		burst := make([]float64, length)
		shapedNoise(burst, plan, rng, fs, func(k int) float64 {
			f := float64(k) * fs / float64(nfft)
			if f < lo || f >= hi {
				return 0
			}
			return m.lowPass2(f) / (hi - lo)
		})
		start := int(t0 * fs)
		for j := 0; j < length && start+j < n; j++ {
			env := 0.5 * (1 - math.Cos(2*math.Pi*float64(j)/float64(length)))
			out[start+j] += rms * env * burst[j]
		}
	}
	return out
}
