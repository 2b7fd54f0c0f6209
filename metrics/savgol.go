package metrics

import (
	"errors"
	"fmt"

	"gonum.org/v1/gonum/mat"
)

// ErrSavGol is returned (wrapped) by CheckSavGol for an unusable window.
var ErrSavGol = errors.New("metrics: Savitzky–Golay")

// CheckSavGol reports whether SavGol can smooth n samples with the given
// window and polynomial order: the window must be odd, greater than the
// order, and no longer than the data; the order must be ≥ 0.
func CheckSavGol(n, window, order int) error {
	switch {
	case order < 0:
		return fmt.Errorf("%w: polynomial order %d is negative", ErrSavGol, order)
	case window%2 != 1 || window < 1:
		return fmt.Errorf("%w: window %d must be a positive odd number", ErrSavGol, window)
	case window <= order:
		return fmt.Errorf("%w: window %d must exceed the polynomial order %d", ErrSavGol, window, order)
	case n < window:
		return fmt.Errorf("%w: %d samples, fewer than the window %d", ErrSavGol, n, window)
	}
	return nil
}

// SavGol smooths x by Savitzky–Golay least-squares polynomial fitting
// (Savitzky & Golay 1964, Anal. Chem. 36(8):1627–1639) and returns the result
// in dst (allocated when too short; dst must not overlap x). It equals
// scipy.signal.savgol_filter(x, window, order) with its default
// mode='interp':
//
//   - each sample i with a full window around it, i = m…n−1−m with
//     m = (window−1)/2, becomes the value at its centre of the degree-order
//     least-squares polynomial through x[i−m…i+m], i.e. Σ_j h_j·x[i+j];
//   - the first and last m samples take the values of the polynomial fitted
//     to the first (or last) window, evaluated at their own positions.
//
// All weights are rows of one projection ("hat") matrix H = A·A⁺, A the
// window×(order+1) Vandermonde matrix of the positions −m…m: row m gives
// the centre weights h, rows 0…m−1 and m+1…window−1 the edge values. The
// projection does not depend on the polynomial basis, so centring the
// positions only improves conditioning.
//
// SavGol panics if CheckSavGol(len(x), window, order) fails: the window is
// a fixed setting, so a bad one is a programmer error.
func SavGol(dst, x []float64, window, order int) []float64 {
	if err := CheckSavGol(len(x), window, order); err != nil {
		panic(err.Error())
	}
	n := len(x)
	if cap(dst) < n {
		dst = make([]float64, n)
	}
	dst = dst[:n]
	h := savgolHat(window, order)
	m := (window - 1) / 2

	centre := h.RawRowView(m)
	for i := m; i < n-m; i++ {
		var s float64
		for j, c := range centre {
			s += c * x[i-m+j]
		}
		dst[i] = s
	}
	for r := 0; r < m; r++ {
		var lo, hi float64
		left := h.RawRowView(r)
		right := h.RawRowView(window - m + r)
		for j := range window {
			lo += left[j] * x[j]
			hi += right[j] * x[n-window+j]
		}
		dst[r] = lo
		dst[n-m+r] = hi
	}
	return dst
}

// savgolHat returns H = A·A⁺ for positions −m…m and degree order.
func savgolHat(window, order int) *mat.Dense {
	m := (window - 1) / 2
	a := mat.NewDense(window, order+1, nil)
	for i := range window {
		t := float64(i - m)
		v := 1.0
		for k := 0; k <= order; k++ {
			a.Set(i, k, v)
			v *= t
		}
	}
	// A⁺ by least squares against the identity (A has full column rank as
	// window > order), then H = A·A⁺.
	var pinv mat.Dense
	if err := pinv.Solve(a, eye(window)); err != nil {
		panic(fmt.Sprintf("metrics: SavGol: window %d order %d: %v", window, order, err))
	}
	var h mat.Dense
	h.Mul(a, &pinv)
	return &h
}

func eye(n int) *mat.Dense {
	d := mat.NewDense(n, n, nil)
	for i := range n {
		d.Set(i, i, 1)
	}
	return d
}
