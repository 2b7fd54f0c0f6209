package fft

import (
	"encoding/json"
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"gonum.org/v1/gonum/dsp/fourier"
)

// tol is the agreement asked, relative to Σ|x_j| (the largest a
// coefficient can be): a fast transform's rounding error grows like
// ε·log n (Gentleman & Sande 1966); 1e-13 is about 500 ε, room for
// n = 1000 with either side's error.
const tol = 1e-13

// direct is the DFT by its definition, O(n²), with each angle reduced
// exactly (jk mod n, in integers) so that the reference itself stays
// accurate for large jk.
func direct(x []float64) []complex128 {
	n := len(x)
	out := make([]complex128, n/2+1)
	for k := range out {
		var s complex128
		for j, v := range x {
			s += complex(v, 0) * expm(j*k%n, n)
		}
		out[k] = s
	}
	return out
}

func scale(x []float64) float64 {
	s := 0.0
	for _, v := range x {
		s += math.Abs(v)
	}
	return math.Max(s, 1e-300)
}

func worst(got, want []complex128) float64 {
	e := 0.0
	for k := range want {
		e = math.Max(e, cmplx.Abs(got[k]-want[k]))
	}
	return e
}

// TestGolden compares with numpy.fft.rfft (numpy 1.24.2) on the stored
// inputs of testdata/metrics/golden/fft.json (made by
// testdata/metrics/make_golden.py, numpy default_rng(20261203)): every
// radix path, the analysis lengths 125, 500, 128, 512, 200, 800.
func TestGolden(t *testing.T) {
	path := filepath.Join("..", "..", "testdata", "metrics", "golden", "fft.json")
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var g struct {
		Cases []struct {
			N      int       `json:"n"`
			X      []float64 `json:"x"`
			Re, Im []float64
		} `json:"cases"`
	}
	if err := json.Unmarshal(b, &g); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	if len(g.Cases) < 20 {
		t.Fatalf("%s: %d cases, want at least 20", path, len(g.Cases))
	}
	for _, c := range g.Cases {
		want := make([]complex128, len(c.Re))
		for k := range want {
			want[k] = complex(c.Re[k], c.Im[k])
		}
		got := NewReal(c.N).Coefficients(nil, c.X)
		if len(got) != len(want) {
			t.Fatalf("n=%d: %d coefficients, numpy has %d", c.N, len(got), len(want))
		}
		if e := worst(got, want) / scale(c.X); e > tol {
			t.Errorf("n=%d: off numpy.fft.rfft by %.2e of Σ|x|, limit %.0e", c.N, e, tol)
		}
	}
}

// TestAgainstDirect checks every length 1…130 and some larger ones
// against the definition, for Coefficients and for both halves of Pair,
// with one Real reused (its work space must not carry anything over).
func TestAgainstDirect(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	lengths := []int{143, 169, 240, 250, 384, 500, 625, 720, 1000, 1331}
	for n := 1; n <= 130; n++ {
		lengths = append(lengths, n)
	}
	for _, n := range lengths {
		f := NewReal(n)
		for round := 0; round < 2; round++ {
			x, y := make([]float64, n), make([]float64, n)
			for j := range x {
				x[j] = 50*r.NormFloat64() + 10
				y[j] = 20 * r.NormFloat64()
			}
			wx, wy := direct(x), direct(y)
			if e := worst(f.Coefficients(nil, x), wx) / scale(x); e > tol {
				t.Errorf("n=%d: Coefficients off the direct DFT by %.2e", n, e)
			}
			px, py := f.Pair(nil, nil, x, y)
			if e := worst(px, wx) / scale(x); e > tol {
				t.Errorf("n=%d: Pair (first) off the direct DFT by %.2e", n, e)
			}
			if e := worst(py, wy) / scale(y); e > tol {
				t.Errorf("n=%d: Pair (second) off the direct DFT by %.2e", n, e)
			}
		}
	}
}

// TestAgainstGonum compares with gonum's FFTPACK port, the transform the
// spectra used before this package, on the analysis lengths: the two
// agree to rounding, so replacing one by the other moves a spectrum by no
// more than that.
func TestAgainstGonum(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	for _, n := range []int{125, 128, 200, 250, 500, 512, 800} {
		g := fourier.NewFFT(n)
		f := NewReal(n)
		x := make([]float64, n)
		for j := range x {
			x[j] = 30 * r.NormFloat64()
		}
		if e := worst(f.Coefficients(nil, x), g.Coefficients(nil, x)) / scale(x); e > 1e-14 {
			t.Errorf("n=%d: off gonum's FFT by %.2e of Σ|x|", n, e)
		}
	}
}

func TestNewRealPanicsOnZeroLength(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Error("NewReal(0) did not panic")
		}
	}()
	NewReal(0)
}

func TestCoefficientsPanicsOnWrongLength(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Error("Coefficients with 9 samples on a length-8 transform did not panic")
		}
	}()
	NewReal(8).Coefficients(nil, make([]float64, 9))
}

// BenchmarkCoefficients times one transform at the analysis lengths,
// beside gonum's for the same length.
func BenchmarkCoefficients(b *testing.B) {
	for _, n := range []int{125, 500} {
		x := make([]float64, n)
		for j := range x {
			x[j] = float64(j%7) - 3
		}
		dst := make([]complex128, n/2+1)
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			f := NewReal(n)
			for b.Loop() {
				f.Coefficients(dst, x)
			}
		})
		b.Run(fmt.Sprintf("pair/n=%d", n), func(b *testing.B) {
			f := NewReal(n)
			dy := make([]complex128, n/2+1)
			for b.Loop() {
				f.Pair(dst, dy, x, x)
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/2, "ns/transform")
		})
		b.Run(fmt.Sprintf("gonum/n=%d", n), func(b *testing.B) {
			g := fourier.NewFFT(n)
			for b.Loop() {
				g.Coefficients(dst, x)
			}
		})
	}
}
