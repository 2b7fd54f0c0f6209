package store

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"math/rand/v2"
	"path/filepath"
	"testing"
	"time"

	"longwave/ingest"
	"longwave/metrics"
)

// fixedClock is the clock of every test store: stored times are then known.
func fixedClock() time.Time { return time.Date(2026, 3, 14, 9, 30, 0, 0, time.UTC) }

// mustOpen opens a fresh store in a temporary folder.
func mustOpen(tb testing.TB) *Store {
	tb.Helper()
	s, err := Open(filepath.Join(tb.TempDir(), "clinic.db"), WithClock(fixedClock))
	if err != nil {
		tb.Fatalf("Open: %v", err)
	}
	tb.Cleanup(func() { s.Close() })
	return s
}

// shaOf is the hex SHA-256 of b.
func shaOf(b []byte) string {
	h := sha256.Sum256(b)
	return hex.EncodeToString(h[:])
}

// sampleAnalysis builds an analysis shaped like one metrics.Compute makes
// (markers of every name in both states, display products of realistic
// size: two spectra of 1–45 Hz at 0.25 Hz, ten 10 s traces at 128 Hz).
// The values are arbitrary: these tests are about storage, not analysis.
func sampleAnalysis(seed uint64) Analysis {
	rng := rand.New(rand.NewPCG(seed, 7))
	res := &metrics.Result{
		SettingsVersion: "v1",
		SettingsHash:    "4f2a",
		Conditions: ingest.Conditions{
			Format: ingest.FormatEDFPlusC, SampleRate: 256, UVPerStep: 0.0305, Bits: 16,
			Filters: ingest.Filters{
				HighPass: ingest.Frequency{Hz: 0.1, Known: true},
				LowPass:  ingest.Frequency{Hz: 70, Known: true},
				Text:     "HP:0.1Hz LP:70Hz",
			},
			Reference: "REF", ChannelsFound: ingest.Standard19[:], ChannelsMissing: []string{},
			Duration: 300, StartTimeOfDay: "09:12:00", Equipment: "amp-7", PeriodSource: ingest.FromAnnotations,
			Cautions: []ingest.Caution{{Code: "short_last_record", Text: "last record short by 12 samples"}},
		},
		Quality: metrics.Quality{
			LineFrequency: 50, LineFrequencySource: "spectrum",
			BadChannels: []string{}, UsedChannels: ingest.Standard19[:],
			CleanSeconds:   map[ingest.EyeState]float64{ingest.EyesClosed: 120, ingest.EyesOpen: 96},
			EpochsTotal:    map[ingest.EyeState]int{ingest.EyesClosed: 35, ingest.EyesOpen: 30},
			RejectedByRule: map[string]int{"peak_to_peak": 3, "muscle": 2},
			RejectedShare:  5.0 / 65, Drowsiness: 0.1, DrowsinessKnown: true,
		},
	}
	names := []string{metrics.PDRFrequency, metrics.PDRCentroid, metrics.ThetaAlphaRatio, metrics.RelDelta,
		metrics.RelTheta, metrics.RelAlpha, metrics.RelBeta, metrics.SlowingRatio}
	for _, n := range names {
		for _, region := range []string{metrics.RegionPosterior, metrics.RegionGlobal, metrics.RegionFrontal} {
			for _, st := range []ingest.EyeState{ingest.EyesClosed, ingest.EyesOpen} {
				res.Markers = append(res.Markers, metrics.Marker{Name: n, Region: region, State: st,
					Value: rng.Float64() * 10, Unit: "Hz", Computable: true})
			}
		}
	}
	res.Markers = append(res.Markers, metrics.Marker{Name: metrics.AlphaReactivity, Region: metrics.RegionPosterior,
		Unit: "", Computable: false, Reason: "no eyes-open period"})
	for _, st := range []ingest.EyeState{ingest.EyesClosed, ingest.EyesOpen} {
		sp := metrics.Spectrum{State: st, Region: metrics.RegionPosterior, PeakHz: 9.5, PeakPower: 40}
		for f := 1.0; f <= 45; f += 0.25 {
			sp.Freqs = append(sp.Freqs, f)
			sp.Power = append(sp.Power, 100/f)
			sp.Aperiodic = append(sp.Aperiodic, 90/f)
		}
		res.Display.Spectra = append(res.Display.Spectra, sp)
		for _, ch := range []string{"O1", "O2", "P3", "P4", "Pz"} {
			tr := metrics.Trace{State: st, Channel: ch, Rate: 128, Start: 30}
			for i := 0; i < 1280; i++ {
				tr.Samples = append(tr.Samples, float32(rng.NormFloat64()*20))
			}
			res.Display.Traces = append(res.Display.Traces, tr)
		}
	}
	return Analysis{
		Result: res,
		Flags: []metrics.Flag{{Rule: "no_eyes_open", Severity: metrics.NotComparable,
			Markers: []string{metrics.AlphaReactivity}, Reason: "no eyes-open period", Source: "design"}},
		Periods: []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 150}, {State: ingest.EyesOpen, Start: 150, End: 300}},
	}
}

// sampleVisit is a visit of patient code on date with one recording whose
// content is content.
func sampleVisit(code, date string, content []byte, seed uint64) NewVisit {
	return NewVisit{
		Patient:    Patient{Code: code, Sex: "F", BirthYear: 1950, Group: "patient", Cohort: "north"},
		Visit:      Visit{Date: date, Context: "donepezil 5 mg"},
		Recordings: []Recording{{SHA256: shaOf(content), Format: "EDF+C", Size: int64(len(content)), Role: RoleSingle}},
		Analysis:   sampleAnalysis(seed),
	}
}

// rowCounts counts the rows of every table the store writes.
func rowCounts(tb testing.TB, s *Store) map[string]int {
	tb.Helper()
	out := map[string]int{}
	for _, t := range []string{"patients", "visits", "recordings", "conditions", "markers", "flags", "display_products"} {
		var n int
		if err := s.r.QueryRowContext(context.Background(), `SELECT count(*) FROM `+t).Scan(&n); err != nil {
			tb.Fatalf("count %s: %v", t, err)
		}
		out[t] = n
	}
	return out
}

func fmtCounts(m map[string]int) string { return fmt.Sprint(m) }
