package metrics

import (
	"testing"

	"longwave/ingest"
	"longwave/ingest/synth"
)

func TestZZB(t *testing.T) {
	s := synth.Default()
	s.Seed = uint64(31000 + 100*30 + 10*4 + 4)
	s.Duration = 180
	s.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 120}, {State: ingest.EyesOpen, Start: 120, End: 180}}
	s.AperiodicExponent = 1.3
	s.BlinksPerMinute = 30
	s.BlinkMinUV, s.BlinkMaxUV = 150, 450
	s.MuscleBurstsPerMinute = 2
	res, _ := Compute(mustRecording(t, s, ingest.Options{}), V2())
	o := res.Quality.Ocular
	t.Logf("ocular %s blinks %d secs %.1f reason %q pred %v", o.Method, o.Blinks, o.BlinkSeconds, o.Reason, o.Predictors)
	t.Logf("coef Pz %v O1 %v Cz %v", o.Coefficients["Pz"], o.Coefficients["O1"], o.Coefficients["Cz"])
	t.Logf("left out %v", res.Quality.ChannelWindowsLeftOut)
	m, _ := res.Marker(AperiodicExponent, RegionGlobal, ingest.EyesClosed)
	t.Logf("exp %.4f", m.Value)
}

func TestZZB2(t *testing.T) {
	for _, blinks := range []float64{0, 30} {
		s := synth.Default()
		s.Seed = uint64(31000 + 100*30 + 10*4 + 4)
		s.Duration = 180
		s.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 120}, {State: ingest.EyesOpen, Start: 120, End: 180}}
		s.AperiodicExponent = 1.3
		s.BlinksPerMinute = blinks
		s.BlinkMinUV, s.BlinkMaxUV = 150, 450
		s.MuscleBurstsPerMinute = 2
		noOc := V2()
		noOc.Ocular = nil
		v1oc := V1()
		v1oc.Ocular = defaultOcular()
		for name, set := range map[string]Settings{"v2": V2(), "v2-no-ocular": noOc, "v1+ocular": v1oc, "v1": V1()} {
			res, _ := Compute(mustRecording(t, s, ingest.Options{}), set)
			m, _ := res.Marker(AperiodicExponent, RegionGlobal, ingest.EyesClosed)
			ta, _ := res.Marker(ThetaAlphaRatio, RegionPosterior, ingest.EyesClosed)
			t.Logf("blinks %g %-14s exp %.4f ta %.4f clean %v", blinks, name, m.Value, ta.Value, res.Quality.CleanSeconds)
		}
	}
}
