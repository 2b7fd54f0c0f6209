package metrics

import (
	"fmt"
	"path/filepath"
	"testing"

	"longwave/ingest"
	"longwave/ingest/testenv"
)

// Real recordings of ../shared/data (issue 3 point 8): healthy adults.
//
// Check values (common practice): the adult posterior dominant rhythm is
// 8 Hz or more (REFERENCES.md §1, "8 Hz as the generally accepted lower
// limit of normal"); 12.5 Hz is the upper end of the alpha band used here
// with a margin. Alpha attenuates on eye opening (Berger's observation,
// common practice): eyes-open posterior alpha power below eyes-closed.
const (
	adultPDRMinHz = 8.0
	adultPDRMaxHz = 12.5
	// The one-minute eegmmidb runs are short: a run whose clean data falls
	// below MinCleanSeconds (eye movements, scalp muscle) gives a marker
	// that is not computable, with its reason, which is the right answer.
	// The checks below apply where the marker is computable, and at least
	// this many of the six subjects must have it.
	minSubjectsWithPDR        = 5
	minSubjectsWithReactivity = 3
)

// eegmmidbSubjects are the subjects of ../shared/data/eegmmidb with both
// baseline runs (R01 eyes open, R02 eyes closed; PROVENANCE.md there).
var eegmmidbSubjects = []string{"S001", "S002", "S003", "S004", "S038", "S040"}

func readRun(t *testing.T, path string, st ingest.EyeState) *ingest.Recording {
	t.Helper()
	rec, err := ingest.ReadFile(path, ingest.Options{DeclaredState: st})
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return rec
}

// TestRealEEGMMIDB: per subject, the eyes-closed run R02 and the eyes-open
// run R01 joined with ingest.Combine: PDR in 8–12.5 Hz, and eyes-open
// posterior alpha power below eyes-closed.
func TestRealEEGMMIDB(t *testing.T) {
	sharedData(t, "eegmmidb")
	withPDR, withRatio := 0, 0
	for _, sub := range eegmmidbSubjects {
		t.Run(sub, func(t *testing.T) {
			closedPath := sharedData(t, "eegmmidb", sub+"R02.edf")
			openPath := sharedData(t, "eegmmidb", sub+"R01.edf")
			closed := readRun(t, closedPath, ingest.EyesClosed)
			open := readRun(t, openPath, ingest.EyesOpen)
			rec, err := ingest.Combine(closed, open)
			if err != nil {
				t.Fatalf("combine: %v", err)
			}
			res := mustCompute(t, rec)
			pdr := marker(t, res, PDRFrequency, RegionPosterior, ingest.EyesClosed)
			ratio := marker(t, res, AlphaRatio, RegionPosterior, ingest.EyesOpen)
			cog := marker(t, res, PDRCentroid, RegionPosterior, ingest.EyesClosed)
			t.Logf("%s: PDR %s, centroid %s, EO/EC alpha %s, clean s %v, rejected %v, bad %v, line %g Hz (%s)",
				sub, show(pdr), show(cog), show(ratio), res.Quality.CleanSeconds, res.Quality.RejectedByRule,
				res.Quality.BadChannels, res.Quality.LineFrequency, res.Quality.LineFrequencySource)
			if pdr.Computable {
				withPDR++
				if pdr.Value < adultPDRMinHz || pdr.Value > adultPDRMaxHz {
					t.Errorf("%s: PDR %.2f Hz outside the adult %g–%g Hz", sub, pdr.Value, adultPDRMinHz, adultPDRMaxHz)
				}
			}
			if ratio.Computable {
				withRatio++
				if ratio.Value >= 1 {
					t.Errorf("%s: eyes-open posterior alpha %.3f × eyes-closed, want below 1", sub, ratio.Value)
				}
			}
			// The physiological fact on every subject, whatever the
			// artefact rules kept: posterior alpha power over all epochs of
			// each run (filtered, referenced, no epoch rejected).
			rec2, err := ingest.Combine(readRun(t, closedPath, ingest.EyesClosed), readRun(t, openPath, ingest.EyesOpen))
			if err != nil {
				t.Fatal(err)
			}
			ec, eo := allEpochAlpha(t, rec2)
			t.Logf("%s: posterior alpha over all epochs: eyes closed %.1f µV², open %.1f µV² (EO/EC %.3f)", sub, ec, eo, eo/ec)
			if !(eo < ec) {
				t.Errorf("%s: eyes-open posterior alpha %.1f µV² not below eyes-closed %.1f µV²", sub, eo, ec)
			}
		})
	}
	t.Logf("PDR computable for %d of %d subjects, EO/EC alpha for %d", withPDR, len(eegmmidbSubjects), withRatio)
	if withPDR < minSubjectsWithPDR {
		t.Errorf("PDR computable for %d subjects, want at least %d", withPDR, minSubjectsWithPDR)
	}
	if withRatio < minSubjectsWithReactivity {
		t.Errorf("EO/EC alpha computable for %d subjects, want at least %d", withRatio, minSubjectsWithReactivity)
	}
}

// TestRealEEGMAT: the resting (_1) recordings of eegmat, declared eyes
// closed: PDR in 8–12.5 Hz.
func TestRealEEGMAT(t *testing.T) {
	dir := sharedData(t, "eegmat")
	files, _ := filepath.Glob(filepath.Join(dir, "*_1.edf"))
	if len(files) == 0 {
		testenv.Missing(t, testenv.RequireDataVar, "needs eegmat *_1.edf files in %s", dir)
	}
	for _, f := range files {
		name := filepath.Base(f)
		t.Run(name, func(t *testing.T) {
			res := mustCompute(t, readRun(t, f, ingest.EyesClosed))
			pdr := marker(t, res, PDRFrequency, RegionPosterior, ingest.EyesClosed)
			cog := marker(t, res, PDRCentroid, RegionPosterior, ingest.EyesClosed)
			ta := marker(t, res, ThetaAlphaRatio, RegionPosterior, ingest.EyesClosed)
			t.Logf("%s: PDR %s, centroid %s, theta/alpha %s, clean s %v, rejected %v, bad %v, line %g Hz (%s)",
				name, show(pdr), show(cog), show(ta), res.Quality.CleanSeconds, res.Quality.RejectedByRule,
				res.Quality.BadChannels, res.Quality.LineFrequency, res.Quality.LineFrequencySource)
			if !pdr.Computable {
				t.Fatalf("%s: PDR not computable: %s", name, pdr.Reason)
			}
			if pdr.Value < adultPDRMinHz || pdr.Value > adultPDRMaxHz {
				t.Errorf("%s: PDR %.2f Hz outside the adult %g–%g Hz", name, pdr.Value, adultPDRMinHz, adultPDRMaxHz)
			}
		})
	}
}

// allEpochAlpha returns the posterior alpha band power (µV²) of the closed
// and open states with every epoch kept.
func allEpochAlpha(t *testing.T, rec *ingest.Recording) (closed, open float64) {
	t.Helper()
	a, err := analyse(rec, V1())
	if err != nil {
		t.Fatal(err)
	}
	for e := range a.eps {
		a.eps[e].Reject = ""
	}
	a.runs = cleanRuns(a.eps, a.length)
	a.spectra()
	for _, st := range []ingest.EyeState{ingest.EyesClosed, ingest.EyesOpen} {
		spec, why := a.region(st, RegionPosterior)
		if why != "" {
			t.Fatalf("%s: %s", st, why)
		}
		if st == ingest.EyesClosed {
			closed = bandPower(a.freqs, spec, a.s.Bands.Alpha)
		} else {
			open = bandPower(a.freqs, spec, a.s.Bands.Alpha)
		}
	}
	return closed, open
}

func show(m Marker) string {
	if !m.Computable {
		return "not computable (" + m.Reason + ")"
	}
	return fmt.Sprintf("%.3f %s", m.Value, m.Unit)
}
