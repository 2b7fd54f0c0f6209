package metrics

import (
	"math"
	"math/rand/v2"
	"testing"

	"longwave/ingest"
)

// filtTol is the agreement asked of FiltFilt against scipy: 1e-9 of the
// largest |output| of the case. Both do the same float64 operations; they
// differ in the initial states (scipy solves a 2×2 system by LU, we by
// elimination) and in the designs' last bits, and poles near the unit circle
// (0.5 Hz high-pass) carry those differences along the signal. A relative
// error per sample would be meaningless near zero crossings.
const filtTol = 1e-9

type filtfiltGolden struct {
	Cases []struct {
		Name string       `json:"name"`
		Fs   float64      `json:"fs"`
		SOS  [][6]float64 `json:"sos"`
		X    []float64    `json:"x"`
		Y    []float64    `json:"y"`
	} `json:"cases"`
}

func maxAbs(v []float64) float64 {
	m := 0.0
	for _, x := range v {
		m = math.Max(m, math.Abs(x))
	}
	return m
}

// scaledError returns max|got−want| / max|want|.
func scaledError(got, want []float64) float64 {
	e := 0.0
	for i := range want {
		e = math.Max(e, math.Abs(got[i]-want[i]))
	}
	return e / maxAbs(want)
}

// TestFiltFiltGolden compares with scipy 1.10.1 scipy.signal.sosfiltfilt(sos,
// x) with its defaults (odd padding, padlen 3·(2·sections+1−…)), on the
// stored inputs and designs of golden/filtfilt.json (made by
// testdata/metrics/make_golden.py from numpy default_rng(20261201)).
func TestFiltFiltGolden(t *testing.T) {
	var g filtfiltGolden
	readDSPGolden(t, "filtfilt.json", &g)
	if len(g.Cases) == 0 {
		t.Fatal("no cases in golden/filtfilt.json")
	}
	worst := 0.0
	for _, c := range g.Cases {
		got := FiltFilt(nil, c.X, SOS(c.SOS))
		if len(got) != len(c.Y) {
			t.Errorf("%s: %d samples, want %d", c.Name, len(got), len(c.Y))
			continue
		}
		e := scaledError(got, c.Y)
		worst = math.Max(worst, e)
		if e > filtTol {
			t.Errorf("%s: scaled error %.3g > %g", c.Name, e, filtTol)
		}
		// In place, with room for the padding: same result.
		buf := make([]float64, len(c.X), len(c.X)+2*PadLen(c.SOS))
		copy(buf, c.X)
		in := FiltFilt(buf, buf, SOS(c.SOS))
		if &in[0] != &buf[0] {
			t.Errorf("%s: FiltFilt did not reuse a dst with enough capacity", c.Name)
		}
		// In place without room for the padding: result still lands in x.
		tight := append([]float64(nil), c.X...)[:len(c.X):len(c.X)]
		out := FiltFilt(tight, tight, SOS(c.SOS))
		if &out[0] != &tight[0] {
			t.Errorf("%s: FiltFilt did not return dst when it could hold the result", c.Name)
		}
		for i := range in {
			if in[i] != got[i] || tight[i] != got[i] {
				t.Errorf("%s: in-place results differ at %d: %g, %g vs %g", c.Name, i, in[i], tight[i], got[i])
				break
			}
		}
	}
	t.Logf("%d cases, worst scaled error %.3g", len(g.Cases), worst)
}

// TestFiltFiltOwnDesigns runs our own designs (not scipy's coefficients)
// through FiltFilt and compares with the golden output of the same scipy
// design, the whole chain as the pipeline uses it.
func TestFiltFiltOwnDesigns(t *testing.T) {
	var g filtfiltGolden
	readDSPGolden(t, "filtfilt.json", &g)
	hp, err1 := ButterHighpass(2, 0.5, 500)
	lp, err2 := ButterLowpass(4, 45, 500)
	n, err3 := IIRNotch(50, 30, 500)
	if err1 != nil || err2 != nil || err3 != nil {
		t.Fatal(err1, err2, err3)
	}
	sos := append(append(append(SOS{}, hp...), lp...), n...)
	for _, c := range g.Cases {
		if c.Name != "pipeline-hp0.5-lp45-notch50-500" {
			continue
		}
		got := FiltFilt(nil, c.X, sos)
		if e := scaledError(got, c.Y); e > filtTol {
			t.Errorf("%s with our designs: scaled error %.3g > %g", c.Name, e, filtTol)
		}
		return
	}
	t.Fatal("pipeline case missing from golden/filtfilt.json")
}

func TestPadLen(t *testing.T) {
	lp1, _ := ButterLowpass(1, 30, 250) // one first-order section: b2 = a2 = 0
	lp4, _ := ButterLowpass(4, 30, 250)
	lp3, _ := ButterLowpass(3, 30, 250)
	for _, c := range []struct {
		name string
		sos  SOS
		want int
	}{{"order 1", lp1, 6}, {"order 4", lp4, 15}, {"order 3", lp3, 12}} {
		if got := PadLen(c.sos); got != c.want {
			t.Errorf("PadLen(%s) = %d, want %d (scipy: 3·(2·n+1−min(#b2=0, #a2=0)))", c.name, got, c.want)
		}
	}
}

func TestFiltFiltPanicsOnShortInput(t *testing.T) {
	sos, _ := ButterLowpass(2, 20, 200)
	defer func() {
		if recover() == nil {
			t.Error("FiltFilt with len(x) = PadLen did not panic")
		}
	}()
	FiltFilt(nil, make([]float64, PadLen(sos)), sos)
}

// BenchmarkFiltFilt filters 30 minutes of one 500 Hz channel (900,000
// samples) through the pipeline's cascade: 0.5 Hz high-pass (order 2),
// 45 Hz low-pass (order 4) and a 50 Hz notch, forward and backward.
func BenchmarkFiltFilt(b *testing.B) {
	hp, _ := ButterHighpass(2, 0.5, 500)
	lp, _ := ButterLowpass(4, 45, 500)
	notch, _ := IIRNotch(50, 30, 500)
	sos := append(append(append(SOS{}, hp...), lp...), notch...)
	r := rand.New(rand.NewPCG(1, 2))
	x := make([]float64, 900_000)
	for i := range x {
		x[i] = 20 * r.NormFloat64()
	}
	dst := make([]float64, 0, len(x)+2*PadLen(sos))
	b.SetBytes(int64(8 * len(x)))
	b.ReportAllocs()
	for b.Loop() {
		FiltFilt(dst, x, sos)
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(len(sos))/1e6, "ms/section")
}

// TestFilterPairEqualsFilterOne: two channels filtered together by
// filterPair are bit for bit what filterOne makes of each alone (the pair
// runs each channel's operations in the same order), and so is a channel
// paired with itself, over segments of several lengths (one too short to
// filter) and cascades of one to three sections.
func TestFilterPairEqualsFilterOne(t *testing.T) {
	a := &analysis{q: 4}
	var err error
	if a.lp, err = ButterLowpass(4, 45, 500); err != nil {
		t.Fatal(err)
	}
	hp2, _ := ButterHighpass(2, 0.5, 125)
	hp4, _ := ButterHighpass(4, 0.5, 125)
	notch, _ := IIRNotch(50, 30, 125)
	// one, two and three sections (the settings' cascade is the last)
	for _, slow := range []SOS{hp2, append(append(SOS{}, hp2...), notch...), append(append(SOS{}, hp4...), notch...)} {
		a.slow = slow
		a.segsIn, a.segs = nil, nil
		next, first := 0, 0
		for _, n := range []int{40_001, 20, 9_998} {
			a.segsIn = append(a.segsIn, ingest.Segment{First: first, Count: n})
			c := (n + a.q - 1) / a.q
			a.segs = append(a.segs, ingest.Segment{First: next, Count: c})
			first, next = first+n, next+c
		}
		a.nIn, a.n = first, next
		r := rand.New(rand.NewPCG(5, 6))
		x, y := make([]float32, a.nIn), make([]float32, a.nIn)
		for i := range x {
			x[i] = float32(30 * r.NormFloat64())
			y[i] = float32(10*r.NormFloat64() + 200)
		}
		lenFast, lenSlow := a.workLens()
		one := func(v []float32) []float32 {
			return a.filterOne(append([]float32(nil), v...), make([]float64, lenFast), make([]float64, lenSlow))
		}
		wantX, wantY := one(x), one(y)
		z := append([]float32(nil), y...) // before the pair filters y in place
		gotX, gotY := a.filterPair(x, y, make([]float64, 2*lenFast), make([]float64, 2*lenSlow))
		for i := range wantX {
			if math.Float32bits(gotX[i]) != math.Float32bits(wantX[i]) || math.Float32bits(gotY[i]) != math.Float32bits(wantY[i]) {
				t.Fatalf("%d slow sections, sample %d: pair (%g, %g), alone (%g, %g)",
					len(slow), i, gotX[i], gotY[i], wantX[i], wantY[i])
			}
		}
		// A channel paired with itself (filter's odd channel out): the
		// same samples as alone.
		gotZ, _ := a.filterPair(z, z, make([]float64, 2*lenFast), make([]float64, 2*lenSlow))
		for i := range wantY {
			if math.Float32bits(gotZ[i]) != math.Float32bits(wantY[i]) {
				t.Fatalf("%d slow sections, sample %d: paired with itself %g, alone %g", len(slow), i, gotZ[i], wantY[i])
			}
		}
	}
}
