package trends

import (
	"encoding/json"
	"longwave/ingest/testenv"
	"math"
	"os"
	"path/filepath"
	"testing"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/metrics/clinic"
)

// moduleRoot is the folder holding go.mod.
func moduleRoot(tb testing.TB) string {
	tb.Helper()
	return testenv.ModuleRoot(tb)
}

// golden is testdata/trends/golden.json, made by testdata/trends/make_golden.py.
type golden struct {
	T975 []struct {
		DF int     `json:"df"`
		T  float64 `json:"t"`
	} `json:"t975"`
	Slopes []struct {
		Name                string    `json:"name"`
		Dates               []string  `json:"dates"`
		Values              []float64 `json:"values"`
		Years               []float64 `json:"years"`
		PolyfitSlope        float64   `json:"polyfit_slope"`
		PolyfitIntercept    float64   `json:"polyfit_intercept"`
		LinregressSlope     float64   `json:"linregress_slope"`
		LinregressIntercept float64   `json:"linregress_intercept"`
		LinregressStderr    float64   `json:"linregress_stderr"`
		T975                float64   `json:"t975"`
		CILow               float64   `json:"ci_low"`
		CIHigh              float64   `json:"ci_high"`
	} `json:"slopes"`
	Prediction struct {
		Ages       []float64 `json:"ages"`
		Values     []float64 `json:"values"`
		Intercept  float64   `json:"intercept"`
		Slope      float64   `json:"slope"`
		ResidualSD float64   `json:"residual_sd"`
		MeanAge    float64   `json:"mean_age"`
		Sxx        float64   `json:"sxx"`
		T975       float64   `json:"t975"`
		At         []struct {
			Age   float64 `json:"age"`
			YHat  float64 `json:"yhat"`
			Lower float64 `json:"lower"`
			Upper float64 `json:"upper"`
		} `json:"at"`
	} `json:"prediction"`
}

func loadGolden(tb testing.TB) golden {
	tb.Helper()
	b, err := os.ReadFile(filepath.Join(moduleRoot(tb), "testdata", "trends", "golden.json"))
	if err != nil {
		tb.Fatalf("golden file (run /usr/bin/python3 testdata/trends/make_golden.py): %v", err)
	}
	var g golden
	if err := json.Unmarshal(b, &g); err != nil {
		tb.Fatal(err)
	}
	return g
}

func near(got, want, tol float64) bool { return math.Abs(got-want) <= tol }

// Test settings identity.
const (
	testVersion = "v1"
	testHash    = "4f1c2a9e8b7d6c5f4e3d2c1b0a998877"
)

// goodConditions are recording conditions that pass every gate: 256 Hz,
// 0.1 µV per step, HP 0.5 Hz, LP 70 Hz, all 19 positions.
func goodConditions() ingest.Conditions {
	return ingest.Conditions{
		Format: ingest.FormatEDFPlusC, SampleRate: 256, UVPerStep: 0.1, Bits: 16,
		Filters: ingest.Filters{
			HighPass: ingest.Frequency{Hz: 0.5, Known: true},
			LowPass:  ingest.Frequency{Hz: 70, Known: true},
			Text:     "HP:0.5Hz LP:70Hz",
		},
		LineFrequency: 50, Reference: "REF",
		ChannelsFound: ingest.Standard19[:], Duration: 600,
		Equipment: "Amp-7", PeriodSource: ingest.FromAnnotations,
	}
}

// goodQuality passes every gate: 180 s closed, 90 s open, drowsiness 0.05.
func goodQuality() metrics.Quality {
	return metrics.Quality{
		LineFrequency: 50, LineFrequencySource: "spectrum",
		UsedChannels:    ingest.Standard19[:],
		CleanSeconds:    map[ingest.EyeState]float64{ingest.EyesClosed: 180, ingest.EyesOpen: 90},
		EpochsTotal:     map[ingest.EyeState]int{ingest.EyesClosed: 48, ingest.EyesOpen: 24},
		RejectedShare:   0.06,
		Drowsiness:      0.05,
		DrowsinessKnown: true,
	}
}

// visitRec is a visit that passes every gate, with a PDR, a theta/alpha
// ratio and an aperiodic exponent.
func visitRec(id int64, date string, age, pdr float64) clinic.VisitRecord {
	return clinic.VisitRecord{
		Visit:           clinic.Visit{ID: id, PatientID: 1, Date: date, AgeYears: age, AgeKnown: true},
		SettingsVersion: testVersion, SettingsHash: testHash,
		Conditions: goodConditions(), Quality: goodQuality(),
		Markers: []metrics.Marker{
			{Name: metrics.PDRFrequency, Region: metrics.RegionPosterior, State: ingest.EyesClosed, Value: pdr, Unit: "Hz", Computable: true},
			{Name: metrics.ThetaAlphaRatio, Region: metrics.RegionPosterior, State: ingest.EyesClosed, Value: 0.5, Unit: "", Computable: true},
			{Name: metrics.AperiodicExponent, Region: metrics.RegionGlobal, State: ingest.EyesClosed, Value: 1.1, Unit: "", Computable: true},
		},
	}
}

func fp(v float64) *float64 { return &v }

func hasRule(flags []metrics.Flag, rule string) (metrics.Flag, bool) {
	for _, f := range flags {
		if f.Rule == rule {
			return f, true
		}
	}
	return metrics.Flag{}, false
}
