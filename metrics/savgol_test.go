package metrics

import (
	"errors"
	"fmt"
	"math"
	"testing"
)

// savgolTol is the agreement asked of SavGol against scipy: 1e-9 of the
// largest |output| of the case. scipy computes the centre weights by
// lstsq and the edges by numpy.polyfit; we take both from one projection
// matrix, so results differ by rounding only (scaled by the conditioning of
// the Vandermonde matrix, largest for the 161-sample cubic).
const savgolTol = 1e-9

// TestSavGolGolden compares with scipy 1.10.1 scipy.signal.savgol_filter(x,
// window, order) (mode='interp') for windows 3–161 and orders 0–6, including
// the 11-bin, order-5 smoothing of Corcoran et al. (2018) and a window as
// long as the data (golden/savgol.json, testdata/metrics/make_golden.py,
// numpy default_rng(11)).
func TestSavGolGolden(t *testing.T) {
	var g struct {
		Cases []struct {
			Window int       `json:"window"`
			Order  int       `json:"order"`
			X      []float64 `json:"x"`
			Y      []float64 `json:"y"`
		} `json:"cases"`
	}
	readDSPGolden(t, "savgol.json", &g)
	if len(g.Cases) < 8 {
		t.Fatalf("golden/savgol.json holds %d cases", len(g.Cases))
	}
	worst := 0.0
	for _, c := range g.Cases {
		name := fmt.Sprintf("window %d order %d n %d", c.Window, c.Order, len(c.X))
		got := SavGol(nil, c.X, c.Window, c.Order)
		e := scaledError(got, c.Y)
		worst = math.Max(worst, e)
		if e > savgolTol {
			t.Errorf("%s: scaled error %.3g > %g", name, e, savgolTol)
		}
	}
	t.Logf("%d cases, worst scaled error %.3g", len(g.Cases), worst)
}

// TestSavGolKeepsPolynomials: a polynomial of degree ≤ order passes
// unchanged, edges included (the defining property of the least-squares
// fit).
func TestSavGolKeepsPolynomials(t *testing.T) {
	const polyTol = 1e-9
	x := make([]float64, 60)
	for i := range x {
		f := float64(i) / 10
		x[i] = 2 - 3*f + 0.5*f*f - 0.1*f*f*f
	}
	got := SavGol(nil, x, 11, 3)
	if e := scaledError(got, x); e > polyTol {
		t.Errorf("cubic through SavGol(11, 3): scaled error %.3g", e)
	}
}

func TestCheckSavGol(t *testing.T) {
	for _, c := range []struct {
		n, window, order int
		ok               bool
	}{
		{100, 11, 5, true}, {11, 11, 5, true}, {10, 11, 5, false}, {100, 10, 5, false},
		{100, 5, 5, false}, {100, 5, -1, false}, {100, -3, 1, false}, {100, 1, 0, true},
	} {
		err := CheckSavGol(c.n, c.window, c.order)
		if (err == nil) != c.ok || (err != nil && !errors.Is(err, ErrSavGol)) {
			t.Errorf("CheckSavGol(%d, %d, %d) = %v, want ok=%v", c.n, c.window, c.order, err, c.ok)
		}
	}
	defer func() {
		if recover() == nil {
			t.Error("SavGol with an even window did not panic")
		}
	}()
	SavGol(nil, make([]float64, 50), 10, 3)
}
