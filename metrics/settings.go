package metrics

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"reflect"
	"sort"
	"strconv"
	"strings"

	"longwave/ingest"
)

// SettingsVersion is the version of V1's processing settings. A change of
// any number in V1 must come with a new version (DESIGN.md, "Fixed
// processing settings, version 1").
const SettingsVersion = "1"

// Band is a half-open frequency interval [LoHz, HiHz) in Hz.
type Band struct {
	LoHz float64 `json:"lo_hz"`
	HiHz float64 `json:"hi_hz"`
}

// Contains reports whether f lies in [LoHz, HiHz).
func (b Band) Contains(f float64) bool { return f >= b.LoHz && f < b.HiHz }

// FilterSettings are the zero-phase Butterworth filters applied to every
// analysed channel before referencing (forward–backward second-order
// sections, so the magnitude response is squared). The low-pass runs at the
// recording's rate; the high-pass and notch run after decimation to the
// analysis rate (AnalysisRateHz), designed for that rate.
type FilterSettings struct {
	HighPassHz    float64 `json:"high_pass_hz"`
	HighPassOrder int     `json:"high_pass_order"`
	LowPassHz     float64 `json:"low_pass_hz"`
	LowPassOrder  int     `json:"low_pass_order"`
	// NotchQ is the quality factor of the notch at the line frequency
	// (scipy.signal.iirnotch convention: bandwidth = f0 / Q at −3 dB).
	NotchQ float64 `json:"notch_q"`
	// CorrectResponse divides every Welch spectrum by the power response of
	// the high- and low-pass filters (|H(f)|⁴ for forward–backward filtering)
	// so that the analysed band is not bent near the 45 Hz corner; the notch
	// is not corrected (its band lies outside every analysed band).
	CorrectResponse bool `json:"correct_response"`
	// CorrectFloor is the smallest power response that is still divided out;
	// below it the spectrum is left as measured.
	CorrectFloor float64 `json:"correct_floor"`
}

// LineSettings say how the line (mains) frequency is found: the sidecar's
// value (BIDS PowerLineFrequency) when there is one; else, of the candidate
// frequencies below the Nyquist frequency, the one whose raw-spectrum peak
// stands highest over its neighbourhood: prominence = power at the candidate
// bin over the median power of the bins 2–5 Hz away on both sides, in a
// Welch spectrum of the raw channels (1 s Hann segments, no overlap, first
// AnalysisSeconds of each analysed channel, channels averaged). A candidate
// counts only when its prominence is at least MinProminence; when none does,
// no notch is applied and the line frequency is reported as 0 with source
// "none".
type LineSettings struct {
	CandidatesHz    []float64 `json:"candidates_hz"`
	AnalysisSeconds float64   `json:"analysis_seconds"`
	SegmentSeconds  float64   `json:"segment_seconds"`
	NeighbourLoHz   float64   `json:"neighbour_lo_hz"`
	NeighbourHiHz   float64   `json:"neighbour_hi_hz"`
	MinProminence   float64   `json:"min_prominence"`
}

// ChannelRules mark an analysed channel bad (left out of the reference and
// of every spectrum). The channel's level is the median, over its
// consecutive non-overlapping windows of WindowSeconds, of the window's
// standard deviation after filtering (before referencing). Flat: level below
// FlatSDMicrovolts. Noisy: level above NoisyFactor times the median level of
// the analysed channels. Failing: after referencing, the channel on its own
// fails artefact rules 1–3 in more than MaxFailShare of the epochs (while
// fewer than half of the channels do); the others are then re-referenced
// without it.
type ChannelRules struct {
	WindowSeconds    float64 `json:"window_seconds"`
	FlatSDMicrovolts float64 `json:"flat_sd_uv"`
	NoisyFactor      float64 `json:"noisy_factor"`
	MaxFailShare     float64 `json:"max_fail_share"`
}

// ArtefactRules reject an epoch. They are checked in this order and an
// epoch is counted under the first rule it fails:
//  1. "amplitude": peak-to-peak above PeakToPeakMicrovolts on any used channel;
//  2. "flat": peak-to-peak below FlatMicrovolts on any used channel;
//  3. "muscle": on any used channel, the power in MuscleBand over the power
//     in MuscleTotalBand (periodogram of the epoch, Hann window) above
//     MuscleShareMax;
//  4. "variance": log10 of the epoch's variance (mean over used channels)
//     above median + VarianceK · 1.4826 · MAD of that value over the epochs
//     of the same state that passed rules 1–3 (robust z-score; 1.4826 makes
//     the MAD estimate the SD of normal data).
//
// Under settings v2 (WindowSettings) the same rules judge each channel in
// each 1-s window before referencing, and a failing channel is left out of
// that window instead of rejecting it for every channel.
//
// Reasoning of the muscle rule (rule 3). Scalp muscle (temporalis,
// frontalis) adds broad-band power from about 20 Hz upwards, strongest at
// the temporal and frontal sites (a fact of the trade, common practice;
// Goncharova II, McFarland DJ, Vaughan TM, Wolpaw JR (2003). EMG
// contamination of EEG: spectral and topographical characteristics. Clin
// Neurophysiol 114(9):1580–1593 — citation from memory). Resting EEG,
// falling as 1/f, puts a small share of its 1–45 Hz power above 20 Hz
// (measured on ../shared/data/eegmmidb S002 eyes open: median share 0.12–
// 0.18 at the posterior sites, 0.20–0.33 frontal and central), so a share
// above MuscleShareMax = 0.6 (the 20–45 Hz band carrying more than all the
// rest together, with a margin) is muscle, not brain; MuscleRelativeMax =
// 4 catches a burst on a channel whose own level is lower. What the rule
// did to S002 under V1 (R02 closed joined with R01 open): in the eyes-open
// run T7 carries steady muscle (its share has a median of 0.69, up to
// 0.87; T8 reaches 0.60 once); T7 fails in 10 of the visit's 28 epochs,
// under the half that would mark it bad, so rule 3, which fires on any used
// channel, rejected 9 of the 14 eyes-open epochs for every channel on T7
// alone (the visit's 11 "muscle" epochs: these 9, one closed epoch on T7
// and one on Fp1); a variance outlier took one more, 16 s of eyes-open
// data were left, and alpha reactivity was lost to one temporal electrode.
// Under V2 T7 is left out of the windows where it fails (47 % of them) and
// the posterior region keeps 57 of 58 eyes-open seconds. The thresholds
// are unchanged; what changed is what a failure costs.
type ArtefactRules struct {
	PeakToPeakMicrovolts float64 `json:"peak_to_peak_uv"`
	FlatMicrovolts       float64 `json:"flat_uv"`
	MuscleBand           Band    `json:"muscle_band"`
	MuscleTotalBand      Band    `json:"muscle_total_band"`
	MuscleShareMax       float64 `json:"muscle_share_max"`
	MuscleRelativeMax    float64 `json:"muscle_relative_max"`
	VarianceK            float64 `json:"variance_k"`
}

// WelchSettings are the spectral estimate's: Hann (periodic) windows of
// SegmentSeconds with the given overlap fraction, one-sided density in
// µV²/Hz, mean over segments, segments only inside runs of consecutive clean
// epochs of one state (Welch 1967).
type WelchSettings struct {
	Window         string  `json:"window"`
	SegmentSeconds float64 `json:"segment_seconds"`
	Overlap        float64 `json:"overlap"`
}

// BandSettings are the fixed bands (half-open) and the total that relative
// powers divide by.
type BandSettings struct {
	Delta Band `json:"delta"`
	Theta Band `json:"theta"`
	Alpha Band `json:"alpha"`
	Beta  Band `json:"beta"`
	// Total is the denominator of the relative powers: [1, 30) Hz, the
	// union of the four bands.
	Total Band `json:"total"`
}

// PeakSettings define the posterior dominant rhythm search (after Corcoran
// et al. 2018, adapted): the Welch spectrum (linear power, all bins from 0
// Hz to Nyquist) is smoothed by a Savitzky–Golay filter of SmoothBins bins
// (at the 0.25 Hz resolution of 4 s segments: a 2.75 Hz frame) and order
// SmoothOrder, Corcoran's published frame and order, with scipy's 'interp'
// edge mode; the search window is widened from their 7–13 Hz to 5–14 Hz so
// that a slowed rhythm is still found, and their "20 % above the next peak"
// rule is not used. The largest local maximum of the smoothed spectrum with
// SearchBand.Lo ≤ f ≤ SearchBand.Hi (above its lower neighbour, not below
// its upper one) is refined by the vertex of the parabola through log10 of
// the smoothed power at the bin and its two neighbours. The rhythm is
// distinct when log10(smoothed power) − log10(aperiodic fit of the same
// spectrum) at the refined frequency is at least MinLog10AboveAperiodic (0.1
// log10 = 26 % above the background; this design's choice). CentroidBand is
// the centre-of-gravity band (Klimesch 1999), bins lo ≤ f ≤ hi of the
// unsmoothed spectrum.
type PeakSettings struct {
	SearchBand             Band    `json:"search_band"`
	SmoothBins             int     `json:"smooth_bins"`
	SmoothOrder            int     `json:"smooth_order"`
	MinLog10AboveAperiodic float64 `json:"min_log10_above_aperiodic"`
	CentroidBand           Band    `json:"centroid_band"`
}

// AperiodicSettings is the spectral parameterisation of Donoghue et al.
// (2020), fixed mode (no knee), with the published default limits.
type AperiodicSettings struct {
	FreqLoHz      float64 `json:"freq_lo_hz"`
	FreqHiHz      float64 `json:"freq_hi_hz"`
	PeakWidthMin  float64 `json:"peak_width_min_hz"`
	PeakWidthMax  float64 `json:"peak_width_max_hz"`
	PeakThreshold float64 `json:"peak_threshold_sd"`
	MinPeakHeight float64 `json:"min_peak_height_log10"`
	MaxPeaks      int     `json:"max_peaks"`
}

// SpecParam returns the settings in the fitting routine's form.
func (a AperiodicSettings) SpecParam() SpecParamSettings {
	return SpecParamSettings{
		FreqLo: a.FreqLoHz, FreqHi: a.FreqHiHz,
		PeakWidthMin: a.PeakWidthMin, PeakWidthMax: a.PeakWidthMax,
		PeakThreshold: a.PeakThreshold, MinPeakHeight: a.MinPeakHeight,
		MaxPeaks: a.MaxPeaks,
	}
}

// DrowsinessSettings define alpha dropout: a clean eyes-closed epoch drops
// out when its posterior alpha power (periodogram of the epoch, mean over the
// good posterior channels, Alpha band) is below DropoutFraction times the
// ReferenceQuantile-quantile of that power over the clean eyes-closed epochs.
// The index is the share of clean eyes-closed epochs that drop out. The upper
// quantile (not the median) keeps the reference on alert epochs as long as
// fewer than 1 − ReferenceQuantile of them are drowsy.
type DrowsinessSettings struct {
	DropoutFraction   float64 `json:"dropout_fraction"`
	ReferenceQuantile float64 `json:"reference_quantile"`
}

// DisplaySettings are the visit screen's products: posterior spectra over
// SpectrumBand (bins lo ≤ f ≤ hi), and TraceSeconds of each of
// TraceChannels per state, from the start of the state's longest clean run.
type DisplaySettings struct {
	SpectrumBand Band    `json:"spectrum_band"` // inclusive, Hz
	TraceSeconds float64 `json:"trace_seconds"`
	// TraceRateHz is the lowest display rate: traces are decimated by the
	// integer factor floor(fs / TraceRateHz) (at least 1) after the 45 Hz
	// low-pass, so the display rate stays above twice the low-pass corner.
	TraceRateHz   float64  `json:"trace_rate_hz"`
	TraceChannels []string `json:"trace_channels"`
}

// Settings hold every number of the processing. V1 is the only version; a
// Settings value is compared across visits by its Hash.
type Settings struct {
	Version  string   `json:"version"`
	Channels []string `json:"channels"`
	// Reference is the re-referencing scheme, in words (one scheme only).
	// Regions maps each region to its channels; a region's spectrum is the
	// mean of its good channels' spectra.
	Reference string         `json:"reference"`
	Filters   FilterSettings `json:"filters"`
	Line      LineSettings   `json:"line"`
	// AnalysisRateHz: after filtering, every q-th sample is kept, q =
	// max(1, floor(fs / AnalysisRateHz)), so analysis runs at fs/q in
	// [125, 250) Hz for fs ≥ 125 Hz. Plain sub-sampling is safe after the
	// 45 Hz low-pass: what folds into 0–45 Hz comes from above fs/q − 45 ≥
	// 80 Hz, where the forward–backward low-pass leaves less than 10⁻⁴ of
	// the power. Epochs, artefact rules, spectra and traces all use the
	// analysis rate; the filters and the line-frequency search use fs.
	AnalysisRateHz float64 `json:"analysis_rate_hz"`
	// PeriodSkipSeconds are skipped after every change of eye state and
	// every segment start.
	PeriodSkipSeconds float64       `json:"period_skip_s"`
	EpochSeconds      float64       `json:"epoch_s"`
	Channel           ChannelRules  `json:"channel_rules"`
	Artefacts         ArtefactRules `json:"artefacts"`
	Welch             WelchSettings `json:"welch"`
	Bands             BandSettings  `json:"bands"`
	// MinCleanSeconds is the least clean data of a state that its markers
	// need (20 s = 5 epochs = 9 Welch segments; the one-minute runs of
	// public data sets leave about 56 s at best). Package trends flags less
	// than 60 s as a caution.
	MinCleanSeconds float64             `json:"min_clean_s"`
	Regions         map[string][]string `json:"regions"`
	Peak            PeakSettings        `json:"peak"`
	Aperiodic       AperiodicSettings   `json:"aperiodic"`
	Drowsiness      DrowsinessSettings  `json:"drowsiness"`
	Display         DisplaySettings     `json:"display"`

	// Settings added in version 2. They are pointers so that a version
	// without them (V1) keeps its canonical JSON and hash: a nil pointer
	// field is left out of CanonicalJSON.

	// Ocular is the correction of eye artefacts before referencing (nil: none).
	Ocular *OcularSettings `json:"ocular,omitempty"`
	// Uncertainty is how every marker's interval is made (nil: none).
	Uncertainty *UncertaintySettings `json:"uncertainty,omitempty"`
	// Windows are the per-channel, per-window and per-region artefact
	// decisions (nil: V1's 4-s epochs judged on every channel at once).
	Windows *WindowSettings `json:"windows,omitempty"`
}

// V1 returns processing settings version 1. Sources: DESIGN.md for the
// channel set, reference, filter corners, skip, epoch, Welch and bands;
// Corcoran et al. (2018) for the smoothing frame and order (11 bins, order
// 5); Donoghue et al. (2020) for the peak-width limits, threshold and
// minimum height; the remaining thresholds are this design's own choices,
// stated here and in the report of issue 3.
func V1() Settings {
	return Settings{
		Version:   SettingsVersion,
		Channels:  append([]string(nil), ingest.Standard19[:]...),
		Reference: "common average of the good channels",
		Filters: FilterSettings{
			HighPassHz: 0.5, HighPassOrder: 4,
			LowPassHz: 45, LowPassOrder: 4,
			NotchQ:          30,
			CorrectResponse: true,
			CorrectFloor:    0.05,
		},
		Line: LineSettings{
			CandidatesHz:    []float64{50, 60},
			AnalysisSeconds: 120,
			SegmentSeconds:  1,
			NeighbourLoHz:   2,
			NeighbourHiHz:   5,
			MinProminence:   3,
		},
		AnalysisRateHz:    125,
		PeriodSkipSeconds: 2,
		EpochSeconds:      4,
		Channel: ChannelRules{
			WindowSeconds:    4,
			FlatSDMicrovolts: 0.5,
			NoisyFactor:      5,
			MaxFailShare:     0.5,
		},
		Artefacts: ArtefactRules{
			PeakToPeakMicrovolts: 500,
			FlatMicrovolts:       1,
			MuscleBand:           Band{20, 45},
			MuscleTotalBand:      Band{1, 45},
			MuscleShareMax:       0.6,
			MuscleRelativeMax:    4,
			VarianceK:            5,
		},
		Welch: WelchSettings{Window: "hann", SegmentSeconds: 4, Overlap: 0.5},
		Bands: BandSettings{
			Delta: Band{1, 4}, Theta: Band{4, 8}, Alpha: Band{8, 13}, Beta: Band{13, 30},
			Total: Band{1, 30},
		},
		MinCleanSeconds: 20,
		Regions: map[string][]string{
			RegionPosterior:      {"O1", "O2", "P3", "P4", "Pz"},
			RegionLeftOccipital:  {"O1"},
			RegionRightOccipital: {"O2"},
			RegionFrontal:        {"Fp1", "Fp2", "F3", "F4", "Fz"},
			RegionGlobal:         append([]string(nil), ingest.Standard19[:]...),
		},
		Peak: PeakSettings{
			SearchBand:             Band{5, 14},
			SmoothBins:             11,
			SmoothOrder:            5,
			MinLog10AboveAperiodic: 0.1,
			CentroidBand:           Band{7, 13},
		},
		Aperiodic: AperiodicSettings{
			FreqLoHz: 2, FreqHiHz: 40,
			PeakWidthMin: 0.5, PeakWidthMax: 12,
			PeakThreshold: 2, MinPeakHeight: 0,
			MaxPeaks: 6,
		},
		Drowsiness: DrowsinessSettings{DropoutFraction: 0.25, ReferenceQuantile: 0.8},
		Display: DisplaySettings{
			SpectrumBand:  Band{1, 45},
			TraceSeconds:  10,
			TraceRateHz:   100,
			TraceChannels: []string{"O1", "O2", "P3", "P4", "Pz"},
		},
	}
}

// V2 returns processing settings version 2: V1 with ocular correction,
// artefact decisions per region and window, and an interval on every marker
// (DESIGN.md, "Uncertainty and norms").
func V2() Settings {
	s := V1()
	s.Version = "2"
	s.Ocular = defaultOcular()
	s.Uncertainty = defaultUncertainty()
	s.Windows = defaultWindows()
	return s
}

// Current returns the settings new visits are processed with: V2.
func Current() Settings { return V2() }

// ByVersion returns the settings of a known version, and whether it is known.
func ByVersion(version string) (Settings, bool) {
	switch version {
	case "1":
		return V1(), true
	case "2":
		return V2(), true
	}
	return Settings{}, false
}

// CanonicalJSON encodes s with object keys sorted, no white space, and
// every float in the shortest form that reads back to the same float64
// (strconv 'g', precision −1; integral values keep no fraction). Two equal
// Settings values give equal bytes on every platform.
func (s Settings) CanonicalJSON() []byte {
	var b bytes.Buffer
	writeCanonical(&b, reflect.ValueOf(s))
	return b.Bytes()
}

// Hash returns the lowercase hex SHA-256 of CanonicalJSON.
func (s Settings) Hash() string {
	sum := sha256.Sum256(s.CanonicalJSON())
	return hex.EncodeToString(sum[:])
}

func writeCanonical(b *bytes.Buffer, v reflect.Value) {
	switch v.Kind() {
	case reflect.Struct:
		t := v.Type()
		type kv struct {
			key string
			val reflect.Value
		}
		fields := make([]kv, 0, t.NumField())
		for i := 0; i < t.NumField(); i++ {
			f := t.Field(i)
			if !f.IsExported() {
				continue
			}
			name, _, _ := strings.Cut(f.Tag.Get("json"), ",")
			if name == "" || name == "-" {
				name = f.Name
			}
			fv := v.Field(i)
			if fv.Kind() == reflect.Pointer {
				if fv.IsNil() {
					continue // a setting a version does not have
				}
				fv = fv.Elem()
			}
			fields = append(fields, kv{name, fv})
		}
		sort.Slice(fields, func(i, j int) bool { return fields[i].key < fields[j].key })
		b.WriteByte('{')
		for i, f := range fields {
			if i > 0 {
				b.WriteByte(',')
			}
			writeString(b, f.key)
			b.WriteByte(':')
			writeCanonical(b, f.val)
		}
		b.WriteByte('}')
	case reflect.Map:
		keys := make([]string, 0, v.Len())
		for _, k := range v.MapKeys() {
			keys = append(keys, k.String())
		}
		sort.Strings(keys)
		b.WriteByte('{')
		for i, k := range keys {
			if i > 0 {
				b.WriteByte(',')
			}
			writeString(b, k)
			b.WriteByte(':')
			writeCanonical(b, v.MapIndex(reflect.ValueOf(k).Convert(v.Type().Key())))
		}
		b.WriteByte('}')
	case reflect.Slice, reflect.Array:
		b.WriteByte('[')
		for i := 0; i < v.Len(); i++ {
			if i > 0 {
				b.WriteByte(',')
			}
			writeCanonical(b, v.Index(i))
		}
		b.WriteByte(']')
	case reflect.String:
		writeString(b, v.String())
	case reflect.Float32, reflect.Float64:
		b.WriteString(strconv.FormatFloat(v.Float(), 'g', -1, 64))
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
		b.WriteString(strconv.FormatInt(v.Int(), 10))
	case reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64:
		b.WriteString(strconv.FormatUint(v.Uint(), 10))
	case reflect.Bool:
		b.WriteString(strconv.FormatBool(v.Bool()))
	default:
		// Settings holds only the kinds above; a new kind is a programmer error.
		panic(fmt.Sprintf("metrics: canonical JSON: unsupported kind %s", v.Kind()))
	}
}

func writeString(b *bytes.Buffer, s string) {
	enc, _ := json.Marshal(s) // a string always marshals
	b.Write(enc)
}
