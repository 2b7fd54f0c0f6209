package metrics

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// welchTol is the agreement asked of the PSD against scipy: 1e-9 of the
// largest density of the case. The FFTs differ (gonum vs scipy's pocketfft)
// and so do the summation orders, which leaves rounding differences of
// ~1e-15 of the peak; bins far below the peak (stop band, noise floor) carry
// that absolute error, so the per-bin relative check (welchBinTol) covers
// only bins above 1e-6 of the peak.
const (
	welchTol    = 1e-9
	welchBinTol = 1e-9
)

type welchGolden struct {
	Cases []struct {
		Fs        float64     `json:"fs"`
		Nperseg   int         `json:"nperseg"`
		Noverlap  int         `json:"noverlap"`
		Stretches [][]float64 `json:"stretches"`
		Segments  []int       `json:"segments"`
		Freqs     []float64   `json:"freqs"`
		PSD       []float64   `json:"psd"`
	} `json:"cases"`
}

// TestWelchGolden compares with scipy 1.10.1 scipy.signal.welch(x, fs,
// window='hann', nperseg, noverlap, detrend='constant', scaling='density',
// return_onesided=True, average='mean') for even and odd segment lengths,
// overlaps 0 to nperseg−1 and odd input lengths; the last case adds three
// stretches and compares with scipy's per-stretch results averaged by
// segment count (golden/welch.json, testdata/metrics/make_golden.py).
func TestWelchGolden(t *testing.T) {
	var g welchGolden
	readDSPGolden(t, "welch.json", &g)
	if len(g.Cases) < 5 {
		t.Fatalf("golden/welch.json holds %d cases", len(g.Cases))
	}
	worst, worstBin := 0.0, 0.0
	for _, c := range g.Cases {
		w := NewWelch(c.Fs, c.Nperseg, c.Noverlap)
		for i, x := range c.Stretches {
			if got := w.Add(x); got != c.Segments[i] {
				t.Errorf("fs %g nperseg %d noverlap %d stretch %d: %d segments, want %d", c.Fs, c.Nperseg, c.Noverlap, i, got, c.Segments[i])
			}
		}
		f := w.Freqs()
		p := w.PSD(nil)
		if len(p) != len(c.PSD) || len(f) != len(c.Freqs) {
			t.Errorf("fs %g nperseg %d: %d bins, want %d", c.Fs, c.Nperseg, len(p), len(c.PSD))
			continue
		}
		for k := range f {
			if math.Abs(f[k]-c.Freqs[k]) > 1e-12*c.Fs {
				t.Errorf("fs %g nperseg %d: freq %d = %g, want %g", c.Fs, c.Nperseg, k, f[k], c.Freqs[k])
				break
			}
		}
		e := scaledError(p, c.PSD)
		worst = math.Max(worst, e)
		if e > welchTol {
			t.Errorf("fs %g nperseg %d noverlap %d: scaled error %.3g > %g", c.Fs, c.Nperseg, c.Noverlap, e, welchTol)
		}
		peak := maxAbs(c.PSD)
		for k := range p {
			if c.PSD[k] < 1e-6*peak {
				continue
			}
			r := math.Abs(p[k]-c.PSD[k]) / c.PSD[k]
			worstBin = math.Max(worstBin, r)
			if r > welchBinTol {
				t.Errorf("fs %g nperseg %d: bin %d (%g Hz) = %g, want %g", c.Fs, c.Nperseg, k, f[k], p[k], c.PSD[k])
			}
		}
	}
	t.Logf("%d cases, worst scaled error %.3g, worst per-bin relative error %.3g", len(g.Cases), worst, worstBin)
}

// TestWelchMergeAndFloat32: merging accumulators equals adding everything
// to one (up to summation order), and float32 input equals the same values
// added as float64.
func TestWelchMergeAndFloat32(t *testing.T) {
	const mergeTol = 1e-14 // summation order only
	r := rand.New(rand.NewPCG(3, 4))
	x := make([]float64, 10_000)
	x32 := make([]float32, len(x))
	for i := range x {
		x32[i] = float32(10 * r.NormFloat64())
		x[i] = float64(x32[i])
	}
	all := NewWelch(250, 500, 250)
	all.Add(x[:4000])
	all.Add(x[4000:])
	a, b := NewWelch(250, 500, 250), NewWelch(250, 500, 250)
	a.Add(x[:4000])
	b.AddFloat32(x32[4000:])
	a.Merge(b)
	if a.Segments() != all.Segments() || a.Segments() != 15+23 {
		t.Fatalf("segments %d and %d, want 38", a.Segments(), all.Segments())
	}
	if e := scaledError(a.PSD(nil), all.PSD(nil)); e > mergeTol {
		t.Errorf("merged PSD differs by %.3g", e)
	}
	if got := NewWelch(250, 500, 250).PSD(nil); len(got) != 0 {
		t.Errorf("PSD without segments = %d values, want none", len(got))
	}
	if n := NewWelch(250, 500, 250).Add(x[:499]); n != 0 {
		t.Errorf("Add of a stretch shorter than a segment added %d", n)
	}
}

// TestWelchParseval: for white noise of variance σ² the density integrates
// to σ² (Parseval; textbook fact), here within 5 % for 200 segments.
func TestWelchParseval(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	x := make([]float64, 100_000)
	for i := range x {
		x[i] = 3 * r.NormFloat64()
	}
	w := NewWelch(500, 1000, 500)
	w.Add(x)
	p := w.PSD(nil)
	var total float64
	for _, v := range p {
		total += v * 500.0 / 1000
	}
	if math.Abs(total-9)/9 > 0.05 {
		t.Errorf("∫PSD = %g, want ≈ 9 (variance)", total)
	}
}

// BenchmarkWelch: 30 minutes of one 500 Hz channel, 4 s segments with 50 %
// overlap (899 segments of 2000 samples).
func BenchmarkWelch(b *testing.B) {
	r := rand.New(rand.NewPCG(7, 8))
	x := make([]float64, 900_000)
	for i := range x {
		x[i] = 20 * r.NormFloat64()
	}
	w := NewWelch(500, 2000, 1000)
	b.SetBytes(int64(8 * len(x)))
	b.ReportAllocs()
	for b.Loop() {
		w.Add(x)
	}
}

// ExampleWelch estimates the spectrum of a 10 Hz sine sampled at 250 Hz for
// 10 s, in 2 s segments overlapping by half.
func ExampleWelch() {
	const fs = 250.0
	x := make([]float64, 10*fs)
	for i := range x {
		x[i] = 50 * math.Sin(2*math.Pi*10*float64(i)/fs) // µV
	}
	w := NewWelch(fs, 500, 250)
	n := w.Add(x)
	psd := w.PSD(nil)
	freqs := w.Freqs()
	peak := 0
	for k := range psd {
		if psd[k] > psd[peak] {
			peak = k
		}
	}
	fmt.Printf("%d segments, %d bins of %.1f Hz, peak at %.1f Hz\n", n, len(psd), freqs[1], freqs[peak])
	// Output: 9 segments, 251 bins of 0.5 Hz, peak at 10.0 Hz
}
