package metrics

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"testing"
)

// designTol is the agreement asked of filter coefficients: 1e-9 relative to
// the largest coefficient of the row's numerator or denominator. Both
// designs take the same steps in float64, so they differ only by rounding
// (observed ≤ 1e-13); the row scale is used because single coefficients may
// be exactly or nearly zero.
const designTol = 1e-9

// dspGoldenDir walks up from the package directory to the module root and
// returns testdata/metrics/golden.
func dspGoldenDir(tb testing.TB) string {
	tb.Helper()
	dir, err := os.Getwd()
	if err != nil {
		tb.Fatal(err)
	}
	for {
		if _, err := os.Stat(filepath.Join(dir, "go.mod")); err == nil {
			return filepath.Join(dir, "testdata", "metrics", "golden")
		}
		parent := filepath.Dir(dir)
		if parent == dir {
			tb.Fatal("metrics: module root (go.mod) not found above the test directory")
		}
		dir = parent
	}
}

// readDSPGolden decodes one golden file written by
// testdata/metrics/make_golden.py.
func readDSPGolden(tb testing.TB, name string, v any) {
	tb.Helper()
	b, err := os.ReadFile(filepath.Join(dspGoldenDir(tb), name))
	if err != nil {
		tb.Fatalf("golden file %s: %v (regenerate with /usr/bin/python3 testdata/metrics/make_golden.py)", name, err)
	}
	if err := json.Unmarshal(b, v); err != nil {
		tb.Fatalf("golden file %s: %v", name, err)
	}
}

// rowError returns the largest |got−want| of b and a, each relative to the
// largest |want| of its half of the row.
func rowError(got, want [6]float64) float64 {
	worst := 0.0
	for half := 0; half < 2; half++ {
		scale := 0.0
		for i := 3 * half; i < 3*half+3; i++ {
			scale = math.Max(scale, math.Abs(want[i]))
		}
		for i := 3 * half; i < 3*half+3; i++ {
			worst = math.Max(worst, math.Abs(got[i]-want[i])/scale)
		}
	}
	return worst
}

type butterGolden struct {
	Butter []struct {
		Btype string       `json:"btype"`
		Order int          `json:"order"`
		Fs    float64      `json:"fs"`
		Wn    []float64    `json:"wn"`
		SOS   [][6]float64 `json:"sos"`
	} `json:"butter"`
	Notch []struct {
		F0, Q, Fs float64
		B         []float64 `json:"b"`
		A         []float64 `json:"a"`
	} `json:"notch"`
}

// TestButterGolden compares every design with scipy 1.10.1
// scipy.signal.butter(order, wn, btype, fs=fs, output='sos'), row by row
// (same pairing and order of sections), for orders 1–8 (low/high-pass) and
// 2–4 (band-stop) at fs 128, 160, 200, 250, 256, 500 and 1000 Hz
// (golden/butter.json, script testdata/metrics/make_golden.py).
func TestButterGolden(t *testing.T) {
	var g butterGolden
	readDSPGolden(t, "butter.json", &g)
	if len(g.Butter) < 200 {
		t.Fatalf("golden file holds %d designs, expected the full table", len(g.Butter))
	}
	worst, ties := 0.0, 0
	for _, c := range g.Butter {
		name := fmt.Sprintf("%s order %d wn %v fs %g", c.Btype, c.Order, c.Wn, c.Fs)
		var got SOS
		var err error
		switch c.Btype {
		case "lowpass":
			got, err = ButterLowpass(c.Order, c.Wn[0], c.Fs)
		case "highpass":
			got, err = ButterHighpass(c.Order, c.Wn[0], c.Fs)
		case "bandstop":
			got, err = ButterBandstop(c.Order, c.Wn[0], c.Wn[1], c.Fs)
		}
		if err != nil {
			t.Errorf("%s: %v", name, err)
			continue
		}
		if len(got) != len(c.SOS) {
			t.Errorf("%s: %d sections, want %d", name, len(got), len(c.SOS))
			continue
		}
		inOrder := true
		for i := range got {
			if rowError(got[i], c.SOS[i]) > designTol {
				inOrder = false
			}
		}
		if !inOrder && sameSectionsTiedOrder(got, c.SOS) {
			// Two pole pairs equally near the unit circle (a band-stop
			// centred on fs/4): which is picked first depends on the last
			// bit of |p|, so the order of those sections is arbitrary;
			// the filter (the product) is the same.
			ties++
			t.Logf("%s: sections with equal pole radii in another order", name)
			continue
		}
		for i := range got {
			e := rowError(got[i], c.SOS[i])
			worst = math.Max(worst, e)
			if e > designTol {
				t.Errorf("%s: section %d = %v, want %v (rel. error %.3g)", name, i, got[i], c.SOS[i], e)
			}
		}
	}
	if ties > 2 {
		t.Errorf("%d designs matched only up to the order of tied sections; expected at most the two fs/4-centred band-stops", ties)
	}
	t.Logf("%d designs, worst relative error %.3g", len(g.Butter), worst)
}

// TestIIRNotchGolden compares with scipy 1.10.1 scipy.signal.iirnotch(f0, q,
// fs) (golden/butter.json).
func TestIIRNotchGolden(t *testing.T) {
	var g butterGolden
	readDSPGolden(t, "butter.json", &g)
	if len(g.Notch) == 0 {
		t.Fatal("golden file holds no notch designs")
	}
	worst := 0.0
	for _, c := range g.Notch {
		got, err := IIRNotch(c.F0, c.Q, c.Fs)
		if err != nil {
			t.Errorf("notch %g Hz q %g fs %g: %v", c.F0, c.Q, c.Fs, err)
			continue
		}
		want := [6]float64{c.B[0], c.B[1], c.B[2], c.A[0], c.A[1], c.A[2]}
		e := rowError(got[0], want)
		worst = math.Max(worst, e)
		if len(got) != 1 || e > designTol {
			t.Errorf("notch %g Hz q %g fs %g = %v, want %v", c.F0, c.Q, c.Fs, got, want)
		}
	}
	t.Logf("%d notches, worst relative error %.3g", len(g.Notch), worst)
}

// TestButterResponse checks designs against the defining property of a
// Butterworth filter (textbook fact): |H| = 1/√2 at the cutoff, and
// |H|² = 1/(1 + (tan(πf/fs)/tan(πfc/fs))^(2N)) for the bilinear low-pass.
func TestButterResponse(t *testing.T) {
	// Closed form vs product of sections: rounding only, amplified by poles
	// close to the unit circle (a 0.5 Hz high-pass at 500 Hz: 1.4e-12 seen).
	const responseTol = 1e-10
	for _, c := range []struct {
		order  int
		fc, fs float64
	}{{1, 30, 250}, {4, 45, 500}, {8, 40, 1000}, {5, 12, 128}} {
		sos, err := ButterLowpass(c.order, c.fc, c.fs)
		if err != nil {
			t.Fatal(err)
		}
		for _, f := range []float64{0, c.fc / 3, c.fc, 1.5 * c.fc} {
			got := math.Pow(sosGain(sos, f, c.fs), 2)
			r := math.Tan(math.Pi*f/c.fs) / math.Tan(math.Pi*c.fc/c.fs)
			want := 1 / (1 + math.Pow(r, float64(2*c.order)))
			if math.Abs(got-want) > responseTol {
				t.Errorf("lowpass order %d fc %g fs %g: |H(%g Hz)|² = %.15g, want %.15g", c.order, c.fc, c.fs, f, got, want)
			}
		}
	}
	hp, _ := ButterHighpass(2, 0.5, 500)
	if g := sosGain(hp, 0.5, 500); math.Abs(g-1/math.Sqrt2) > responseTol {
		t.Errorf("highpass order 2 0.5 Hz: |H(0.5 Hz)| = %.15g, want 1/√2", g)
	}
	bs, _ := ButterBandstop(2, 48, 52, 500)
	// Centre of the digital stop band: the prewarped edges' geometric mean
	// mapped back, fs/π·atan(√(tan(π·48/fs)·tan(π·52/fs))).
	centre := 500 / math.Pi * math.Atan(math.Sqrt(math.Tan(math.Pi*48/500)*math.Tan(math.Pi*52/500)))
	if g := sosGain(bs, centre, 500); g > 1e-9 {
		t.Errorf("bandstop 48–52 Hz: gain at the geometric centre %.3g, want ≈ 0", g)
	}
	n, _ := IIRNotch(50, 30, 250)
	if g := sosGain(n, 50, 250); g > 1e-12 {
		t.Errorf("notch 50 Hz: gain at 50 Hz %.3g, want 0", g)
	}
}

// sameSectionsTiedOrder reports whether got and want hold the same
// sections, each numerator taken relative to its b0 and the overall gain
// (the product of the b0s, carried by the first row) equal, in an order that
// differs only between sections whose poles have equal radii (a2 = |p|²
// equal to 1e-12).
func sameSectionsTiedOrder(got, want SOS) bool {
	norm := func(r [6]float64) [6]float64 { return [6]float64{1, r[1] / r[0], r[2] / r[0], r[3], r[4], r[5]} }
	gg, gw := 1.0, 1.0
	used := make([]bool, len(want))
	for i, g := range got {
		gg *= g[0]
		gw *= want[i][0]
		found := false
		for j, w := range want {
			if used[j] || rowError(norm(g), norm(w)) > designTol {
				continue
			}
			if i != j && math.Abs(want[i][5]-w[5]) > 1e-12 {
				return false
			}
			used[j], found = true, true
			break
		}
		if !found {
			return false
		}
	}
	return math.Abs(gg-gw) <= designTol*math.Abs(gw)
}

// sosGain returns |H(e^{iω})| of the cascade at f Hz.
func sosGain(sos SOS, f, fs float64) float64 {
	w := 2 * math.Pi * f / fs
	g := 1.0
	for _, s := range sos {
		z1 := complex(math.Cos(w), -math.Sin(w))
		z2 := z1 * z1
		num := complex(s[0], 0) + complex(s[1], 0)*z1 + complex(s[2], 0)*z2
		den := complex(s[3], 0) + complex(s[4], 0)*z1 + complex(s[5], 0)*z2
		g *= cmplxAbs(num / den)
	}
	return g
}

func cmplxAbs(c complex128) float64 { return math.Hypot(real(c), imag(c)) }

func TestButterErrors(t *testing.T) {
	for _, c := range []struct {
		name string
		f    func() (SOS, error)
	}{
		{"order 0", func() (SOS, error) { return ButterLowpass(0, 10, 250) }},
		{"order 17", func() (SOS, error) { return ButterHighpass(17, 10, 250) }},
		{"cutoff at Nyquist", func() (SOS, error) { return ButterLowpass(2, 125, 250) }},
		{"cutoff 0", func() (SOS, error) { return ButterHighpass(2, 0, 250) }},
		{"negative rate", func() (SOS, error) { return ButterLowpass(2, 10, -250) }},
		{"NaN cutoff", func() (SOS, error) { return ButterLowpass(2, math.NaN(), 250) }},
		{"band reversed", func() (SOS, error) { return ButterBandstop(2, 52, 48, 250) }},
		{"band above Nyquist", func() (SOS, error) { return ButterBandstop(2, 100, 130, 250) }},
		{"notch at 0", func() (SOS, error) { return IIRNotch(0, 30, 250) }},
		{"notch q 0", func() (SOS, error) { return IIRNotch(50, 0, 250) }},
		{"notch above Nyquist", func() (SOS, error) { return IIRNotch(130, 30, 250) }},
	} {
		got, err := c.f()
		if !errors.Is(err, ErrFilterDesign) || got != nil {
			t.Errorf("%s: got %v, %v; want nil and ErrFilterDesign", c.name, got, err)
		}
	}
}
