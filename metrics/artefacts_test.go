package metrics

import (
	"math"
	"math/rand/v2"
	"slices"
	"sort"
	"testing"

	"longwave/ingest"
)

func TestApplyRules(t *testing.T) {
	r := V1().Artefacts
	base := epochStat{PeakToPeak: 60, Variance: 100, Muscle: 2, MuscleTotal: 40, Alpha: 10}
	const nEp = 12
	mk := func() ([]epoch, [][]epochStat) {
		eps := make([]epoch, nEp)
		stats := [][]epochStat{make([]epochStat, nEp), make([]epochStat, nEp)}
		for e := range eps {
			eps[e] = epoch{State: ingest.EyesClosed, First: e * 10}
			for c := range stats {
				st := base
				st.Variance *= 1 + 0.02*float64((e*7+c*3)%5) // a little spread
				stats[c][e] = st
			}
		}
		return eps, stats
	}
	cases := []struct {
		name string
		edit func(stats [][]epochStat)
		want string
	}{
		{"clean", func([][]epochStat) {}, ""},
		{"peak-to-peak above the limit on one channel", func(s [][]epochStat) { s[1][3].PeakToPeak = r.PeakToPeakMicrovolts + 1 }, RuleAmplitude},
		{"flat on one channel", func(s [][]epochStat) { s[0][3].PeakToPeak = r.FlatMicrovolts / 2 }, RuleFlat},
		{"tonic muscle share", func(s [][]epochStat) { s[0][3].Muscle = 0.7 * s[0][3].MuscleTotal }, RuleMuscle},
		{"muscle burst above 4× the channel median", func(s [][]epochStat) { s[1][3].Muscle = 10 }, RuleMuscle},
		{"variance outlier", func(s [][]epochStat) { s[0][3].Variance = 1000 }, RuleVariance},
		{"first rule wins: amplitude over variance", func(s [][]epochStat) {
			s[0][3].Variance = 1000
			s[1][3].PeakToPeak = 1000
		}, RuleAmplitude},
	}
	for _, c := range cases {
		eps, stats := mk()
		c.edit(stats)
		counts := applyRules(eps, stats, []int{0, 1}, r)
		if got := eps[3].Reject; got != c.want {
			t.Errorf("%s: epoch 3 rejected by %q, want %q", c.name, got, c.want)
		}
		total := 0
		for e, ep := range eps {
			if e != 3 && ep.Reject != "" {
				t.Errorf("%s: epoch %d rejected by %q, want clean", c.name, e, ep.Reject)
			}
			if ep.Reject != "" {
				total++
			}
		}
		sum := 0
		for _, n := range counts {
			sum += n
		}
		if sum != total {
			t.Errorf("%s: counts %v sum to %d, %d epochs rejected", c.name, counts, sum, total)
		}
	}
}

// TestPeriodogramPower: the band power of a sinusoid of amplitude A is its
// mean square A²/2 (Parseval; the density scaling makes Σ P·Δf the
// variance); a 10 Hz sine lies wholly in the alpha band, none in the muscle
// band.
func TestPeriodogramPower(t *testing.T) {
	const fs, n, amp = 125.0, 500, 20.0
	const tol = 1e-9 // the sine sits on a bin: exact up to rounding
	x := make([]float32, n)
	for i := range x {
		x[i] = float32(amp * math.Sin(2*math.Pi*10*float64(i)/fs))
	}
	st := newPeriodogram(n, fs).stat(x, V1().Artefacts, V1().Bands.Alpha, V1().Bands.Delta)
	want := amp * amp / 2
	if math.Abs(st.Alpha/want-1) > 1e-6 {
		t.Errorf("alpha power %g, want %g", st.Alpha, want)
	}
	if st.Muscle > tol*want {
		t.Errorf("muscle power %g, want 0", st.Muscle)
	}
	if math.Abs(st.Variance/want-1) > 1e-6 || math.Abs(st.PeakToPeak-2*amp) > 0.1 { // samples miss the crests by a little
		t.Errorf("variance %g, p2p %g; want %g, %g", st.Variance, st.PeakToPeak, want, 2*amp)
	}
}

// TestQuantile: values of numpy.quantile(v, q) (default "linear" method),
// worked by hand: [1 2 3 4 5] at 0.8 → 4.2; [3 1 2] at 0.5 → 2; [4 1 3 2] at
// 0.5 → 2.5.
func TestQuantile(t *testing.T) {
	cases := []struct {
		v    []float64
		q    float64
		want float64
	}{
		{[]float64{1, 2, 3, 4, 5}, 0.8, 4.2},
		{[]float64{3, 1, 2}, 0.5, 2},
		{[]float64{4, 1, 3, 2}, 0.5, 2.5},
		{[]float64{7}, 0.8, 7},
		{nil, 0.5, 0},
	}
	for _, c := range cases {
		if got := quantile(c.v, c.q); math.Abs(got-c.want) > 1e-12 {
			t.Errorf("quantile(%v, %g) = %g, want %g", c.v, c.q, got, c.want)
		}
	}
}

func TestCommonAverage(t *testing.T) {
	data := [][]float32{{1, 2, 3}, {3, 4, 5}, {100, 100, 100}, {2, 0, 1}}
	good := []bool{true, true, false, true}
	commonAverage(data, good, 3, 2)
	for i := 0; i < 3; i++ {
		var sum float32
		for c := range data {
			if good[c] {
				sum += data[c][i]
			}
		}
		if math.Abs(float64(sum)) > 1e-6 {
			t.Errorf("sample %d: good channels sum to %g after referencing, want 0", i, sum)
		}
	}
	// The bad channel is re-referenced too (mean of the good ones at t=0 is 2).
	if data[2][0] != 98 {
		t.Errorf("bad channel sample 0 = %g, want 98", data[2][0])
	}
}

// TestQuantileMatchesSort: quantile by selection gives, bit for bit, what
// interpolating the fully sorted copy gives (the definition it replaced),
// on lengths 1–300 with and without ties, for the quantiles the pipeline
// asks (median, 0.025/0.975 interval ends, the drop-out reference) and
// random ones; and a NaN keeps sort.Float64s's ordering.
func TestQuantileMatchesSort(t *testing.T) {
	bySort := func(v []float64, q float64) float64 {
		s := append([]float64(nil), v...)
		sort.Float64s(s)
		pos := q * float64(len(s)-1)
		i := int(math.Floor(pos))
		if i >= len(s)-1 {
			return s[len(s)-1]
		}
		return s[i] + (pos-float64(i))*(s[i+1]-s[i])
	}
	r := rand.New(rand.NewPCG(21, 22))
	for n := 1; n <= 300; n++ {
		for _, ties := range []bool{false, true} {
			v := make([]float64, n)
			for i := range v {
				v[i] = r.NormFloat64() * 10
				if ties {
					v[i] = math.Round(v[i] / 5)
				}
			}
			orig := append([]float64(nil), v...)
			for _, q := range []float64{0, 0.025, 0.1, 0.5, 0.9, 0.975, 1, r.Float64()} {
				got, want := quantile(v, q), bySort(v, q)
				if math.Float64bits(got) != math.Float64bits(want) {
					t.Fatalf("n=%d ties=%v q=%g: selection %v, sort %v", n, ties, q, got, want)
				}
			}
			if !slices.Equal(v, orig) {
				t.Fatalf("n=%d: quantile changed its input", n)
			}
		}
	}
	withNaN := []float64{3, math.NaN(), 1, 2}
	if got, want := quantile(withNaN, 0.5), bySort(withNaN, 0.5); got != want {
		t.Errorf("with a NaN: %v, sort gives %v", got, want)
	}
}

// TestStat2MatchesStat: two epochs measured together (periodogram.stat2,
// one complex transform for both) give each epoch's time-domain statistics
// exactly as stat does alone, and its band powers to rounding (1e-12).
func TestStat2MatchesStat(t *testing.T) {
	set := V2()
	p := newPeriodogram(125, 125)
	r := rand.New(rand.NewPCG(1, 2))
	for k := 0; k < 500; k++ {
		x, y := make([]float32, 125), make([]float32, 125)
		for i := range x {
			x[i] = float32(r.NormFloat64() * 50)
			y[i] = float32(r.NormFloat64()*5 + 100)
		}
		gx, gy := p.stat2(x, y, set.Artefacts, set.Bands.Alpha, set.Bands.Delta)
		for _, c := range []struct{ got, want epochStat }{
			{gx, p.stat(x, set.Artefacts, set.Bands.Alpha, set.Bands.Delta)},
			{gy, p.stat(y, set.Artefacts, set.Bands.Alpha, set.Bands.Delta)},
		} {
			if c.got.PeakToPeak != c.want.PeakToPeak || c.got.Variance != c.want.Variance {
				t.Fatalf("case %d: peak-to-peak, variance %v, %v together; %v, %v alone",
					k, c.got.PeakToPeak, c.got.Variance, c.want.PeakToPeak, c.want.Variance)
			}
			for _, v := range [][2]float64{{c.got.Muscle, c.want.Muscle}, {c.got.MuscleTotal, c.want.MuscleTotal},
				{c.got.Alpha, c.want.Alpha}, {c.got.Slow, c.want.Slow}} {
				if math.Abs(v[0]-v[1]) > 1e-12*math.Abs(v[1]) {
					t.Fatalf("case %d: band power %v together, %v alone", k, v[0], v[1])
				}
			}
		}
	}
}
