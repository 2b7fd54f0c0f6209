package metrics

import (
	"fmt"
	"math"
	"sort"
	"sync"
	"testing"

	"longwave/ingest"
	"longwave/ingest/synth"
)

// Ground truth from the synthetic writer (issue 3 point 7). Each case is
// written by ingest/synth, decoded by ingest.Decode and analysed by Compute
// with V1, as a visit's file would be; the true values come from the
// generating model (synth.Spec fields and ExpectedBandPowerAverageRef).

// Tolerances of issue 3 point 7.
const (
	pdrToleranceHz         = 0.1  // PDR frequency recovered within ±0.1 Hz
	attenuationTolerance   = 0.05 // alpha attenuation within ±0.05
	thetaAlphaRelTolerance = 0.05 // theta/alpha within 5 %
	exponentTolerance      = 0.05 // aperiodic exponent within ±0.05
	noRhythmMinShare       = 0.95 // "no distinct rhythm" in ≥ 95 of 100 seeds
)

// shortSpec is a 2-minute recording (eyes closed 0–80 s, open 80–120 s)
// at 250 Hz with the 19 channels and the artefacts of synth.Default:
// blinks, muscle bursts and 50 Hz line noise.
func shortSpec(seed uint64) synth.Spec {
	s := synth.Default()
	s.Seed = seed
	s.Duration = 120
	s.Periods = []ingest.Period{
		{State: ingest.EyesClosed, Start: 0, End: 80},
		{State: ingest.EyesOpen, Start: 80, End: 120},
	}
	return s
}

// spread summarises errors for the log.
func spread(errs []float64) string {
	if len(errs) == 0 {
		return "none"
	}
	s := append([]float64(nil), errs...)
	sort.Float64s(s)
	var sum, abs float64
	for _, e := range s {
		sum += e
		abs = math.Max(abs, math.Abs(e))
	}
	return fmt.Sprintf("n=%d mean %+.4f min %+.4f max %+.4f max|e| %.4f", len(s), sum/float64(len(s)), s[0], s[len(s)-1], abs)
}

type errLog struct {
	mu   sync.Mutex
	errs map[string][]float64
}

func (l *errLog) add(key string, e float64) {
	l.mu.Lock()
	defer l.mu.Unlock()
	if l.errs == nil {
		l.errs = map[string][]float64{}
	}
	l.errs[key] = append(l.errs[key], e)
}

func (l *errLog) report(t *testing.T) {
	keys := make([]string, 0, len(l.errs))
	for k := range l.errs {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		t.Logf("%s: %s", k, spread(l.errs[k]))
	}
}

// TestPDRGroundTruth: the posterior dominant rhythm at ten frequencies, 20
// seeds each, with blinks, muscle bursts and line noise present.
func TestPDRGroundTruth(t *testing.T) {
	freqs := []float64{6.0, 7.0, 7.5, 8.0, 8.5, 9.0, 9.5, 10.0, 10.5, 11.5}
	seeds := 20
	if testing.Short() {
		seeds = 4
	}
	var log errLog
	t.Run("cases", func(t *testing.T) {
		for _, hz := range freqs {
			for seed := 1; seed <= seeds; seed++ {
				t.Run(fmt.Sprintf("%.1fHz/seed%d", hz, seed), func(t *testing.T) {
					t.Parallel()
					s := shortSpec(uint64(1000*hz) + uint64(seed))
					s.AlphaHz = hz
					s.MuscleBurstsPerMinute = 2
					res := mustCompute(t, mustRecording(t, s, ingest.Options{}))
					m := marker(t, res, PDRFrequency, RegionPosterior, ingest.EyesClosed)
					if !m.Computable {
						t.Fatalf("PDR %.1f Hz seed %d: not computable: %s", hz, seed, m.Reason)
					}
					e := m.Value - hz
					log.add(fmt.Sprintf("PDR %4.1f Hz error", hz), e)
					if math.Abs(e) > pdrToleranceHz {
						t.Errorf("PDR %.1f Hz seed %d: got %.3f Hz, want within ±%g Hz", hz, seed, m.Value, pdrToleranceHz)
					}
				})
			}
		}
	})
	log.report(t)
}

// TestNoRhythmGroundTruth: a pure 1/f background (no alpha, theta or beta)
// gives "no distinct rhythm" in at least 95 of 100 seeds.
func TestNoRhythmGroundTruth(t *testing.T) {
	seeds := 100
	if testing.Short() {
		seeds = 20
	}
	var mu sync.Mutex
	none := 0
	t.Run("cases", func(t *testing.T) {
		for seed := 1; seed <= seeds; seed++ {
			t.Run(fmt.Sprintf("seed%d", seed), func(t *testing.T) {
				t.Parallel()
				s := shortSpec(uint64(5000 + seed))
				s.AlphaPower, s.ThetaPower, s.BetaPower = 0, 0, 0
				res := mustCompute(t, mustRecording(t, s, ingest.Options{}))
				m := marker(t, res, PDRFrequency, RegionPosterior, ingest.EyesClosed)
				mu.Lock()
				defer mu.Unlock()
				if !m.Computable {
					none++
				} else {
					t.Logf("seed %d: a rhythm at %.2f Hz was reported in pure 1/f", seed, m.Value)
				}
			})
		}
	})
	t.Logf("no distinct rhythm in %d of %d seeds", none, seeds)
	if share := float64(none) / float64(seeds); share < noRhythmMinShare {
		t.Errorf("no distinct rhythm in %d of %d seeds, want at least %.0f %%", none, seeds, 100*noRhythmMinShare)
	}
}

// posteriorChannels and allChannels for the model's expected values.
var (
	posteriorChannels = []string{"O1", "O2", "P3", "P4", "Pz"}
	allChannels       = ingest.Standard19[:]
)

// expectedRegion is the model's band power averaged over a region after the
// common average of all 19 channels, as Compute's regional spectra are.
func expectedRegion(s synth.Spec, region []string, st ingest.EyeState, b Band) float64 {
	var sum float64
	for _, c := range region {
		sum += s.ExpectedBandPowerAverageRef(c, allChannels, st, b.LoHz, b.HiHz)
	}
	return sum / float64(len(region))
}

// attenuationSpec is the recording of TestAttenuationGroundTruth: 4
// minutes in alternating 30-s blocks of eyes closed and open (the rhythm's
// slow amplitude modulation, periods of 4–17 s, then averages out between
// the states instead of favouring one), a strong rhythm (600 µV² at O1)
// attenuated by att, no blinks or muscle bursts (the epochs they cost are
// random holes in each state, and the rhythm's ±50 % amplitude modulation
// sampled through random holes scatters the state's mean alpha power by
// several per cent).
func attenuationSpec(seed int, att float64) synth.Spec {
	s := synth.Default()
	s.Seed = uint64(7000 + 10*seed + int(10*att))
	s.Duration = 240
	s.Periods = nil
	for b := 0; b < 8; b++ {
		st := ingest.EyesClosed
		if b%2 == 1 {
			st = ingest.EyesOpen
		}
		s.Periods = append(s.Periods, ingest.Period{State: st, Start: float64(30 * b), End: float64(30*b + 30)})
	}
	s.AlphaPower = 600
	s.AlphaOpenAttenuation = att
	s.BlinksPerMinute, s.MuscleBurstsPerMinute = 0, 0
	return s
}

// TestAttenuationGroundTruth: alpha attenuation on eye opening of 0, 0.3,
// 0.6 and 0.9, five seeds each. The measured 1 − EO/EC band-power ratio is
// checked against the model's band-power attenuation (the alpha band also
// holds background power, which does not attenuate) and against the nominal
// attenuation; the alpha rhythm is made strong (600 µV² at O1) so that the
// two differ by less than the tolerance. Line noise is present.
func TestAttenuationGroundTruth(t *testing.T) {
	var log errLog
	alpha := V1().Bands.Alpha
	t.Run("cases", func(t *testing.T) {
		for _, att := range []float64{0, 0.3, 0.6, 0.9} {
			for seed := 1; seed <= 5; seed++ {
				t.Run(fmt.Sprintf("a%.1f/seed%d", att, seed), func(t *testing.T) {
					t.Parallel()
					s := attenuationSpec(seed, att)
					res := mustCompute(t, mustRecording(t, s, ingest.Options{}))
					m := marker(t, res, AlphaReactivity, RegionPosterior, ingest.EyesOpen)
					if !m.Computable {
						t.Fatalf("attenuation %.1f seed %d: not computable: %s", att, seed, m.Reason)
					}
					want := 1 - expectedRegion(s, posteriorChannels, ingest.EyesOpen, alpha)/
						expectedRegion(s, posteriorChannels, ingest.EyesClosed, alpha)
					log.add(fmt.Sprintf("attenuation %.1f vs model band power", att), m.Value-want)
					log.add(fmt.Sprintf("attenuation %.1f vs nominal", att), m.Value-att)
					if math.Abs(m.Value-want) > attenuationTolerance {
						t.Errorf("attenuation %.1f seed %d: got %.3f, model band-power attenuation %.3f, want within ±%g",
							att, seed, m.Value, want, attenuationTolerance)
					}
					if math.Abs(m.Value-att) > attenuationTolerance {
						t.Errorf("attenuation %.1f seed %d: got %.3f, want within ±%g of the nominal", att, seed, m.Value, attenuationTolerance)
					}
					r := marker(t, res, AlphaRatio, RegionPosterior, ingest.EyesOpen)
					if math.Abs(r.Value-(1-m.Value)) > 1e-12 {
						t.Errorf("ratio %.6f is not 1 − attenuation %.6f", r.Value, m.Value)
					}
				})
			}
		}
	})
	log.report(t)
}

// TestThetaAlphaGroundTruth: theta/alpha of known band powers (the model's
// ExpectedBandPowerAverageRef, which applies the same common average),
// posterior and global, within 5 %. The background is set low (1 µV²/Hz at
// 1 Hz) so that the bands are carried by the rhythms: the common average
// removes most of a rhythm with a broad topography, and what is left of a
// noise band scatters by several per cent per channel (the generator draws
// every fine frequency bin at random); the rectangle sum on the 0.25 Hz Welch
// grid also over-reads a steep background by 1–4 % per band (bins centred on
// the edges). Both are properties of any Welch band power, not of this code. Blinks and muscle bursts are off: the
// model's band powers leave them out.
func TestThetaAlphaGroundTruth(t *testing.T) {
	var log errLog
	b := V1().Bands
	cases := []struct{ theta, alpha float64 }{{6, 100}, {30, 60}, {60, 30}, {20, 20}}
	t.Run("cases", func(t *testing.T) {
		for i, c := range cases {
			for seed := 1; seed <= 3; seed++ {
				t.Run(fmt.Sprintf("theta%g_alpha%g/seed%d", c.theta, c.alpha, seed), func(t *testing.T) {
					t.Parallel()
					s := synth.Default()
					s.Seed = uint64(9000 + 10*i + seed)
					s.Duration = 180
					s.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 180}}
					s.ThetaPower, s.AlphaPower = c.theta, c.alpha
					s.BlinksPerMinute, s.MuscleBurstsPerMinute = 0, 0
					s.AperiodicLevel = 1
					res := mustCompute(t, mustRecording(t, s, ingest.Options{}))
					for _, reg := range []struct {
						name  string
						chans []string
					}{{RegionPosterior, posteriorChannels}, {RegionGlobal, allChannels}} {
						m := marker(t, res, ThetaAlphaRatio, reg.name, ingest.EyesClosed)
						if !m.Computable {
							t.Fatalf("%s: not computable: %s", reg.name, m.Reason)
						}
						want := expectedRegion(s, reg.chans, ingest.EyesClosed, b.Theta) /
							expectedRegion(s, reg.chans, ingest.EyesClosed, b.Alpha)
						rel := m.Value/want - 1
						log.add("theta/alpha relative error "+reg.name, rel)
						if math.Abs(rel) > thetaAlphaRelTolerance {
							t.Errorf("theta %g alpha %g seed %d %s: got %.4f, model %.4f (%.1f %%), want within %g %%",
								c.theta, c.alpha, seed, reg.name, m.Value, want, 100*rel, 100*thetaAlphaRelTolerance)
						}
					}
				})
			}
		}
	})
	log.report(t)
}

// TestExponentGroundTruth: the aperiodic exponent 0.8, 1.0, 1.5 and 2.0 with
// and without alpha and beta peaks, three seeds each, within ±0.05. Line
// noise is present; blinks and muscle bursts are not (issue 3 asks for them
// in the PDR cases only): residual blinks that pass the artefact rules add
// 1–4 Hz power and steepen the fit. TestExponentWithArtefacts logs that bias.
func TestExponentGroundTruth(t *testing.T) {
	var log errLog
	t.Run("cases", func(t *testing.T) {
		for _, chi := range []float64{0.8, 1.0, 1.5, 2.0} {
			for _, peaks := range []bool{false, true} {
				for seed := 1; seed <= 3; seed++ {
					name := fmt.Sprintf("chi%.1f/peaks%v/seed%d", chi, peaks, seed)
					t.Run(name, func(t *testing.T) {
						t.Parallel()
						s := shortSpec(uint64(11000 + 100*chi + float64(seed)))
						s.AperiodicExponent = chi
						s.BlinksPerMinute, s.MuscleBurstsPerMinute = 0, 0
						if !peaks {
							s.AlphaPower, s.ThetaPower, s.BetaPower = 0, 0, 0
						} else {
							s.BetaPower = 10
						}
						res := mustCompute(t, mustRecording(t, s, ingest.Options{}))
						m := marker(t, res, AperiodicExponent, RegionGlobal, ingest.EyesClosed)
						if !m.Computable {
							t.Fatalf("%s: not computable: %s", name, m.Reason)
						}
						log.add(fmt.Sprintf("exponent %.1f peaks=%v error", chi, peaks), m.Value-chi)
						if math.Abs(m.Value-chi) > exponentTolerance {
							t.Errorf("%s: got exponent %.3f, want %.1f ± %g", name, m.Value, chi, exponentTolerance)
						}
					})
				}
			}
		}
	})
	log.report(t)
}

// TestExponentWithArtefacts reports (and loosely bounds) the exponent's bias
// when blinks and muscle bursts are present at synth.Default's rates: it
// documents how much the artefact rules leave through.
func TestExponentWithArtefacts(t *testing.T) {
	const looseTolerance = 0.35 // a bound on gross failure, not an accuracy claim
	var log errLog
	t.Run("cases", func(t *testing.T) {
		for _, chi := range []float64{1.0, 1.5} {
			for seed := 1; seed <= 3; seed++ {
				t.Run(fmt.Sprintf("chi%.1f/seed%d", chi, seed), func(t *testing.T) {
					t.Parallel()
					s := shortSpec(uint64(13000 + 100*chi + float64(seed)))
					s.AperiodicExponent = chi
					res := mustCompute(t, mustRecording(t, s, ingest.Options{}))
					m := marker(t, res, AperiodicExponent, RegionGlobal, ingest.EyesClosed)
					if !m.Computable {
						t.Fatalf("not computable: %s", m.Reason)
					}
					log.add(fmt.Sprintf("exponent %.1f with blinks and muscle, error", chi), m.Value-chi)
					if math.Abs(m.Value-chi) > looseTolerance {
						t.Errorf("exponent %.1f seed %d: got %.3f", chi, seed, m.Value)
					}
				})
			}
		}
	})
	log.report(t)
}
