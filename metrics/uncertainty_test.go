package metrics

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sync"
	"testing"

	"longwave/ingest"
	"longwave/ingest/synth"
)

// Coverage of the marker intervals (issue 9 point 4), against the
// generator's ground truth (ingest/synth), over 200 seeds.
const (
	coverageSeeds   = 200
	coverageMinRate = 0.90 // the band for a 95 % interval
	coverageMaxRate = 0.98
)

// coverageSpec is a 2-minute eyes-closed recording whose numbers the
// generator knows and the estimators target without a bias of their own,
// so that the interval is judged on the spread it is meant to carry:
//
//   - the posterior rhythm is a Gaussian spectral bump (synth's BetaHz/
//     BetaWidthHz/BetaPower; the sinusoid rhythms are off) centred on
//     f0 ∈ [9.5, 11] Hz: a rhythm of one exact frequency (synth's AlphaHz)
//     has next to no sampling spread, so its interval would measure the
//     peak refinement's sub-bin bias instead; the generating PDR is f0;
//   - the exponent χ ∈ [1, 2] is the generating one (synth's
//     AperiodicExponent);
//   - theta/alpha: the model's band powers after the same common average
//     (ExpectedBandPowerAverageRef), over the spans the Welch bins cover,
//     [lo − Δf/2, hi − Δf/2) with Δf = 0.25 Hz: the bins k·Δf, lo ≤ k·Δf <
//     hi, each hold the power of the span Δf centred on them;
//   - no blinks or muscle bursts (the model's band powers leave them out),
//     50 Hz line noise present.
func coverageSpec(seed int) synth.Spec {
	r := rand.New(rand.NewPCG(uint64(seed), 0x636f766572))
	s := synth.Default()
	s.Seed = uint64(20000 + seed)
	s.Duration = 120
	s.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 120}}
	s.AlphaPower, s.ThetaPower = 0, 0
	s.BetaHz = 9.5 + 1.5*r.Float64()
	s.BetaWidthHz = 0.75
	s.BetaPower = 20 + 40*r.Float64()
	s.AperiodicExponent = 1 + r.Float64()
	s.BlinksPerMinute, s.MuscleBurstsPerMinute = 0, 0
	return s
}

// binSpan is band b as the Welch bins of width df cover it.
func binSpan(b Band, df float64) Band { return Band{b.LoHz - df/2, b.HiHz - df/2} }

func TestIntervalCoverage(t *testing.T) {
	if testing.Short() {
		t.Skip("200 synthetic recordings: skipped under -short")
	}
	b := V2().Bands
	df := 1 / V2().Welch.SegmentSeconds
	type tally struct{ hit, n int }
	var mu sync.Mutex
	got := map[string]*tally{}
	t.Run("seeds", func(t *testing.T) {
		for seed := 1; seed <= coverageSeeds; seed++ {
			t.Run(fmt.Sprint(seed), func(t *testing.T) {
				t.Parallel()
				s := coverageSpec(seed)
				res, err := Compute(mustRecording(t, s, ingest.Options{}), V2())
				if err != nil {
					t.Fatal(err)
				}
				want := map[string]float64{
					PDRFrequency:      s.BetaHz,
					AperiodicExponent: s.AperiodicExponent,
					ThetaAlphaRatio: expectedRegion(s, posteriorChannels, ingest.EyesClosed, binSpan(b.Theta, df)) /
						expectedRegion(s, posteriorChannels, ingest.EyesClosed, binSpan(b.Alpha, df)),
				}
				region := map[string]string{PDRFrequency: RegionPosterior, AperiodicExponent: RegionGlobal, ThetaAlphaRatio: RegionPosterior}
				mu.Lock()
				defer mu.Unlock()
				for name, w := range want {
					m := marker(t, res, name, region[name], ingest.EyesClosed)
					if !m.Computable || m.Uncertainty == nil {
						t.Errorf("seed %d: %s has no interval (%s)", seed, name, m.Reason)
						continue
					}
					tl := got[name]
					if tl == nil {
						tl = &tally{}
						got[name] = tl
					}
					tl.n++
					if m.Uncertainty.Low <= w && w <= m.Uncertainty.High {
						tl.hit++
					}
				}
			})
		}
	})
	for _, name := range []string{PDRFrequency, AperiodicExponent, ThetaAlphaRatio} {
		tl := got[name]
		if tl == nil {
			t.Fatalf("%s: no cases", name)
		}
		rate := float64(tl.hit) / float64(tl.n)
		t.Logf("%s: the 95 %% interval covers the generating value in %d of %d seeds (%.1f %%)", name, tl.hit, tl.n, 100*rate)
		if rate < coverageMinRate || rate > coverageMaxRate {
			t.Errorf("%s: coverage %.1f %%, want %g–%g %%", name, 100*rate, 100*coverageMinRate, 100*coverageMaxRate)
		}
	}
}

// TestIntervalNarrowsWithDuration: the same signal over 2 and 8 minutes;
// the SE should shrink by about √4 = 2 (the bootstrap over four times as
// many blocks). Median ratio over seeds, within [1.5, 2.7] (a 4-fold
// longer recording, with the spread of SE estimates from 15 and 60 blocks).
func TestIntervalNarrowsWithDuration(t *testing.T) {
	// Two seeds (as -short once used) are too few for a median of ratios
	// whose single values range from 1.3 to 4.3.
	if testing.Short() {
		t.Skip("12 synthetic recordings of 2 and 8 minutes: skipped under -short")
	}
	const seeds = 6
	ratios := map[string][]float64{}
	for seed := 1; seed <= seeds; seed++ {
		se := map[string][2]float64{}
		for i, minutes := range []float64{2, 8} {
			s := coverageSpec(seed)
			s.Duration = 60 * minutes
			s.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: s.Duration}}
			res, err := Compute(mustRecording(t, s, ingest.Options{}), V2())
			if err != nil {
				t.Fatal(err)
			}
			for _, k := range [][2]string{{PDRFrequency, RegionPosterior}, {AperiodicExponent, RegionGlobal}, {ThetaAlphaRatio, RegionPosterior}} {
				m := marker(t, res, k[0], k[1], ingest.EyesClosed)
				if m.Uncertainty == nil {
					t.Fatalf("seed %d, %g min: %s has no interval", seed, minutes, k[0])
				}
				v := se[k[0]]
				v[i] = m.Uncertainty.SE
				se[k[0]] = v
			}
		}
		for name, v := range se {
			ratios[name] = append(ratios[name], v[0]/v[1])
		}
	}
	for name, r := range ratios {
		med := median(r)
		t.Logf("%s: SE(2 min)/SE(8 min) per seed %.2f, median %.2f (1/√duration: 2)", name, r, med)
		if med < 1.5 || med > 2.7 {
			t.Errorf("%s: SE ratio %.2f, want about 2 (1.5–2.7)", name, med)
		}
	}
}

// TestIntervalSameFileSameInterval: the interval is a function of the
// file: the same bytes twice give the same interval, another SHA-256 a
// different one; V1 makes none.
func TestIntervalSameFileSameInterval(t *testing.T) {
	s := coverageSpec(1)
	s.Duration = 60
	s.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 60}}
	iv := func(sha string, set Settings) *Uncertainty {
		rec := mustRecording(t, s, ingest.Options{})
		rec.SHA256 = sha
		res, err := Compute(rec, set)
		if err != nil {
			t.Fatal(err)
		}
		return marker(t, res, AperiodicExponent, RegionGlobal, ingest.EyesClosed).Uncertainty
	}
	const shaA = "a3f1c2d4e5f60718293a4b5c6d7e8f90a1b2c3d4e5f60718293a4b5c6d7e8f90"
	const shaB = "0b1c2d3e4f5061728394a5b6c7d8e9f00b1c2d3e4f5061728394a5b6c7d8e9f0"
	a1, a2, b := iv(shaA, V2()), iv(shaA, V2()), iv(shaB, V2())
	if a1 == nil || a2 == nil || b == nil {
		t.Fatal("no interval under V2")
	}
	if *a1 != *a2 {
		t.Errorf("same file, different intervals: %+v and %+v", *a1, *a2)
	}
	if a1.Low == b.Low && a1.High == b.High {
		t.Errorf("another SHA-256 gave the identical interval %+v: the seed is not taken from it", *a1)
	}
	if a1.Level != 0.95 || a1.Resamples != V2().Uncertainty.Resamples || a1.Method == "" || !(a1.Low < a1.High) {
		t.Errorf("interval %+v: want level 0.95, %d resamples, a method, low < high", *a1, V2().Uncertainty.Resamples)
	}
	if u := iv(shaA, V1()); u != nil {
		t.Errorf("V1 made an interval %+v", *u)
	}
}

// TestWilsonInterval checks the drowsiness index's interval against the
// Wilson score formula (Wilson 1927) evaluated independently in Python
// (math module, z = 1.959963985): p = 0.2, n = 25 → centre 0.239958, half
// width 0.151352, interval [0.088606, 0.391310].
func TestWilsonInterval(t *testing.T) {
	a := &analysis{s: V2(), fs: 100, primary: ingest.EyesClosed, v2: &windowAnalysis{wlen: 100,
		regions: map[fitKey]*regionSegments{{ingest.EyesClosed, RegionPosterior}: {covered: map[int]bool{}}}}}
	for w := 0; w < 100; w++ { // 100 s kept = 25 segments of 4 s
		a.v2.regions[fitKey{ingest.EyesClosed, RegionPosterior}].covered[w] = true
	}
	u := a.wilson(0.2, 0.95)
	if math.Abs(u.Low-0.088606) > 1e-6 || math.Abs(u.High-0.391310) > 1e-6 {
		t.Errorf("Wilson interval [%.6f, %.6f], want [0.088606, 0.391310]", u.Low, u.High)
	}
}
