package ingest

import (
	"bytes"
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"longwave/ingest/testenv"
)

// The golden files in testdata/ingest/mne/ are written by make_golden.py
// beside them, which reads each file with MNE-Python 1.3.0's EDF/BDF reader
// (Debian python3-mne; mne.io.read_raw_edf/read_raw_bdf, preload=True,
// stim_channel=None, infer_types=False). CI re-runs the script before this
// test, so a change in the library or the data shows here.
const mneDir = "../testdata/ingest/mne"

// halfStep is the agreement asked of every sample: half a digital step of
// the channel. Both readers scale the same integers with the same formula;
// a wrong integer or gain shows as at least a whole step.
const halfStep = 0.5

// float32Rel bounds the relative rounding of a float64 value to float32
// (round to nearest: 2^-24); longwave holds samples as float32, MNE as
// float64, so a sum over n samples may differ by up to 2^-24·Σ|x|. We allow
// twice that, plus 1e-9 of slack for the libraries' different summation order.
const float32Rel = 1.0 / (1 << 23)

type mneGolden struct {
	File          string  `json:"file"`
	Source        string  `json:"source"`
	MNEVersion    string  `json:"mne_version"`
	MNEError      string  `json:"mne_error"`
	SFreq         float64 `json:"sfreq"`
	NTimes        int     `json:"n_times"`
	NRecords      int     `json:"n_records"`
	TrailingZeros int     `json:"trailing_zeros"`
	Channels      []struct {
		Name             string    `json:"name"`
		Unit             string    `json:"unit"`
		SamplesPerRecord int       `json:"samples_per_record"`
		Resampled        bool      `json:"resampled"`
		Indices          []int     `json:"indices"`
		Values           []float64 `json:"values"`
		Sum              float64   `json:"sum"`
		SumSq            float64   `json:"sumsq"`
	} `json:"channels"`
}

func loadGoldens(t *testing.T) []mneGolden {
	t.Helper()
	paths, err := filepath.Glob(filepath.Join(mneDir, "*.json"))
	if err != nil || len(paths) == 0 {
		t.Fatalf("no golden JSON in %s: run /usr/bin/python3 testdata/ingest/mne/make_golden.py", mneDir)
	}
	var out []mneGolden
	for _, p := range paths {
		b, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		var g mneGolden
		if err := json.Unmarshal(b, &g); err != nil {
			t.Fatalf("%s: %v", p, err)
		}
		out = append(out, g)
	}
	return out
}

// mneFigures collects the agreement reached, for the log.
type mneFigures struct {
	files, channels, values int
	worstSteps              float64 // largest |ours − MNE| in digital steps
	worstSumRel             float64 // largest sum difference over its tolerance
}

func TestMNEAgreement(t *testing.T) {
	var fig mneFigures
	for _, g := range loadGoldens(t) {
		t.Run(g.File, func(t *testing.T) {
			var path string
			if g.Source == "synthetic" {
				path = filepath.Join(mneDir, g.File)
			} else {
				path = filepath.Join(sharedDataDir(t), g.File)
			}
			b, err := os.ReadFile(path)
			if err != nil && g.Source == "synthetic" {
				t.Fatalf("%s: %v", g.File, err)
			}
			if err != nil {
				testenv.Missing(t, testenv.RequireDataVar, "%s: %v (needs the file the golden was made from)", g.File, err)
			}
			rec, err := decode(bytes.NewReader(b), int64(len(b)), filepath.Base(path), Options{}, false)
			if err != nil {
				t.Fatalf("decode: %v", err)
			}
			if g.MNEError != "" {
				// MNE reads no data channel from an annotation-only file
				// (sleep-edfx hypnogram); longwave must find none either.
				if len(rec.Channels) != 0 {
					t.Errorf("MNE: %s; longwave found %d channels", g.MNEError, len(rec.Channels))
				}
				return
			}
			compareWithMNE(t, g, rec, &fig)
			fig.files++
		})
	}
	t.Logf("MNE %s agreement: %d files, %d channels, %d sample values; worst sample difference %.3g digital steps (limit %g); worst sum difference %.3g of its float32 bound",
		"1.3.0", fig.files, fig.channels, fig.values, fig.worstSteps, halfStep, fig.worstSumRel)
}

func compareWithMNE(t *testing.T, g mneGolden, rec *Recording, fig *mneFigures) {
	if len(rec.Channels) != len(g.Channels) {
		t.Fatalf("%d channels, MNE %d", len(rec.Channels), len(g.Channels))
	}
	trimmed := hasCaution(rec, "zero_padding_cut")
	for k, mc := range g.Channels {
		ch := &rec.Channels[k]
		if ch.Original != mc.Name {
			t.Errorf("channel %d label %q, MNE %q", k, ch.Original, mc.Name)
			continue
		}
		_, volt := unitFactor(ch.Unit)
		_, mneVolt := unitFactor(mc.Unit)
		if volt != mneVolt {
			t.Errorf("%s: unit %q, MNE %q", mc.Name, ch.Unit, mc.Unit)
		}
		n := len(ch.Samples)
		if mc.Resampled {
			// MNE resamples slower channels to sfreq; longwave keeps the
			// channel's own rate: compare the count of stored samples.
			if want := g.NRecords * mc.SamplesPerRecord; n != want {
				t.Errorf("%s: %d samples, want %d records × %d", mc.Name, n, g.NRecords, mc.SamplesPerRecord)
			}
			continue
		}
		if ch.SampleRate != g.SFreq {
			t.Errorf("%s: rate %v, MNE %v", mc.Name, ch.SampleRate, g.SFreq)
		}
		switch {
		case n == g.NTimes:
		case trimmed && n < g.NTimes && n >= g.NTimes-g.TrailingZeros:
			// longwave cut zero padding that MNE keeps; the cut part is zeros.
		default:
			t.Errorf("%s: %d samples, MNE %d (trailing zeros %d)", mc.Name, n, g.NTimes, g.TrailingZeros)
			continue
		}
		step := ch.UVPerStep
		for j, idx := range mc.Indices {
			want := mc.Values[j]
			if idx >= n {
				if want != 0 {
					t.Errorf("%s[%d]: cut, but MNE has %v", mc.Name, idx, want)
				}
				continue
			}
			d := math.Abs(float64(ch.Samples[idx]) - want)
			fig.worstSteps = math.Max(fig.worstSteps, d/step)
			fig.values++
			if d > halfStep*step {
				t.Errorf("%s[%d] = %v, MNE %v: %.3g steps apart", mc.Name, idx, ch.Samples[idx], want, d/step)
			}
		}
		var sum, sumSq, sumAbs, sumSqAbs float64
		for _, v := range ch.Samples {
			x := float64(v)
			sum += x
			sumSq += x * x
			sumAbs += math.Abs(x)
		}
		sumSqAbs = sumSq
		tolSum := float32Rel*sumAbs + 1e-9*float64(n)
		tolSq := 2*float32Rel*sumSqAbs + 1e-9*float64(n)
		if d := math.Abs(sum - mc.Sum); d > tolSum {
			t.Errorf("%s: sum %v, MNE %v (diff %g > %g)", mc.Name, sum, mc.Sum, d, tolSum)
		} else if tolSum > 0 {
			fig.worstSumRel = math.Max(fig.worstSumRel, d/tolSum)
		}
		if d := math.Abs(sumSq - mc.SumSq); d > tolSq {
			t.Errorf("%s: sum of squares %v, MNE %v (diff %g > %g)", mc.Name, sumSq, mc.SumSq, d, tolSq)
		}
		fig.channels++
	}
}

// TestMNEGoldenCoverage asserts that every EDF/BDF file of ../shared/data and
// every synthetic file has a golden JSON, so a new file cannot go unchecked.
func TestMNEGoldenCoverage(t *testing.T) {
	have := map[string]bool{}
	for _, g := range loadGoldens(t) {
		have[g.File] = true
	}
	data := sharedDataDir(t)
	files, _ := filepath.Glob(filepath.Join(data, "*", "*"))
	for _, p := range files {
		l := strings.ToLower(p)
		if !strings.HasSuffix(l, ".edf") && !strings.HasSuffix(l, ".bdf") {
			continue
		}
		rel, _ := filepath.Rel(data, p)
		if !have[filepath.ToSlash(rel)] {
			t.Errorf("%s has no golden JSON: run /usr/bin/python3 testdata/ingest/mne/make_golden.py", rel)
		}
	}
	synthetic, _ := filepath.Glob(filepath.Join(mneDir, "synthetic", "*"))
	if len(synthetic) < 4 {
		t.Errorf("%d synthetic files, want 4 (run the -update tests)", len(synthetic))
	}
	for _, p := range synthetic {
		if !have["synthetic/"+filepath.Base(p)] {
			t.Errorf("synthetic/%s has no golden JSON: run make_golden.py", filepath.Base(p))
		}
	}
}

type syntheticFile struct {
	name string
	file testFile
}

// syntheticMNEFiles are small files written by this package's test writer
// (invented signals, seeded math/rand/v2) that exercise scalings the shared
// files lack: mV and V units, inverted and asymmetric ranges, comma
// decimals, 0.5-s records, the Latin-1 micro sign 0xB5, BDF+ with
// negative 24-bit values. The sum tolerance is 2^-23·Σ|x|, which for
// full-scale 24-bit data is of the order of n half steps: float32 keeps a
// 24-bit value times its gain to within half a step, no better. The synthetic
// writer of package ingest/synth is compared with MNE by its own tests.
func syntheticMNEFiles() []syntheticFile {
	stream := uint64(0)
	noise := func(lo, hi int) func(r, j int) int {
		stream++
		rng := rand.New(rand.NewPCG(2026, stream))
		return func(r, j int) int { return lo + rng.IntN(hi-lo+1) }
	}
	edf := testFile{Reserved: "EDF+C", NRecords: 6, Duration: "0.5", Signals: []testSignal{
		{Label: "EEG Fp1-REF", Unit: "uV", PhysMin: "-3276.8", PhysMax: "3276.7", DigMin: "-32768", DigMax: "32767", N: 64, Digital: noise(-32768, 32767)},
		{Label: "EEG T3-REF", Unit: "uV", PhysMin: "812,5", PhysMax: "-812,5", DigMin: "-2048", DigMax: "2047", N: 64, Digital: noise(-2048, 2047)},
		{Label: "O1..", Unit: "mV", PhysMin: "-0.25", PhysMax: "0.75", DigMin: "-100", DigMax: "3000", N: 64, Digital: noise(-100, 3000)},
		{Label: "ECG", Unit: "V", PhysMin: "-0.005", PhysMax: "0.005", DigMin: "-32768", DigMax: "32767", N: 64, Digital: noise(-32768, 32767)},
		annotationSignal(30, 0.5, func(r int) []byte {
			if r == 1 {
				return []byte("+0.5\x151.5\x14eyes closed\x14\x00")
			}
			return nil
		}),
	}}
	bdf := testFile{BDF: true, Reserved: "BDF+C", NRecords: 4, Signals: []testSignal{
		{Label: "Cz", Unit: "uV", PhysMin: "-262144", PhysMax: "262143", DigMin: "-8388608", DigMax: "8388607", N: 256, Digital: noise(-8388608, 8388607)},
		{Label: "Pz", Unit: "\xb5V", PhysMin: "-1000", PhysMax: "1000", DigMin: "-8388608", DigMax: "8388607", N: 256, Digital: noise(-50000, 50000)},
		{Label: "Status", Unit: "", PhysMin: "-8388608", PhysMax: "8388607", DigMin: "-8388608", DigMax: "8388607", N: 256, Digital: noise(0, 255)},
		{Label: "BDF Annotations", PhysMin: "-1", PhysMax: "1", DigMin: "-8388608", DigMax: "8388607", N: 20,
			TAL: func(r int) []byte { return []byte("+" + string(rune('0'+r)) + "\x14\x14\x00") }},
	}}
	return []syntheticFile{{"synthetic_edfplus.edf", edf}, {"synthetic_bdfplus.bdf", bdf}}
}

// TestMNESyntheticFiles keeps the committed synthetic files equal to their
// generator (go test ./ingest/ -run TestMNESyntheticFiles -update rewrites
// them; then re-run make_golden.py).
func TestMNESyntheticFiles(t *testing.T) {
	dir := filepath.Join(mneDir, "synthetic")
	for _, s := range syntheticMNEFiles() {
		b := s.file.build()
		p := filepath.Join(dir, s.name)
		if *update {
			if err := os.MkdirAll(dir, 0o755); err != nil {
				t.Fatal(err)
			}
			if err := os.WriteFile(p, b, 0o644); err != nil {
				t.Fatal(err)
			}
		}
		got, err := os.ReadFile(p)
		if err != nil {
			t.Fatalf("%v (run with -update)", err)
		}
		if !bytes.Equal(got, b) {
			t.Errorf("%s differs from its generator (run with -update, then make_golden.py)", s.name)
		}
	}
}
