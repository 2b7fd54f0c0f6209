package metrics

import "longwave/ingest"

// Marker names (the `name` field of the markers output, and the store key).
const (
	PDRFrequency          = "pdr_frequency"
	PDRCentroid           = "pdr_centroid"
	PDRLeft               = "pdr_left"
	PDRRight              = "pdr_right"
	PDRAsymmetry          = "pdr_asymmetry"
	AlphaReactivity       = "alpha_reactivity"
	AlphaRatio            = "alpha_open_closed_ratio"
	ThetaAlphaRatio       = "theta_alpha_ratio"
	AperiodicExponent     = "aperiodic_exponent"
	AperiodicOffset       = "aperiodic_offset"
	AperiodicR2           = "aperiodic_r2"
	RelDelta              = "rel_delta"
	RelTheta              = "rel_theta"
	RelAlpha              = "rel_alpha"
	RelBeta               = "rel_beta"
	SlowingRatio          = "slowing_ratio"
	FrontalPosteriorAlpha = "frontal_posterior_alpha"
	DrowsinessIndex       = "drowsiness_index"
)

// Regions over which spectra are averaged.
const (
	RegionPosterior      = "posterior"       // O1 O2 P3 P4 Pz
	RegionGlobal         = "global"          // all good channels of the 19
	RegionLeftOccipital  = "left_occipital"  // O1
	RegionRightOccipital = "right_occipital" // O2
	RegionFrontal        = "frontal"         // Fp1 Fp2 F3 F4 Fz
)

// Marker is one number of a recording, or the reason it could not be had.
// A marker that is not computable has Value 0 and a Reason; it never carries
// NaN or a sentinel value.
type Marker struct {
	Name       string          `json:"name"`
	Region     string          `json:"region"`
	State      ingest.EyeState `json:"state"`
	Value      float64         `json:"value"`
	Unit       string          `json:"unit"`
	Computable bool            `json:"computable"`
	Reason     string          `json:"reason,omitempty"`
	// Uncertainty is the marker's own interval from the visit's data (settings
	// v2 onward); nil for a marker that is not computable or for settings
	// that make none (v1).
	Uncertainty *Uncertainty `json:"uncertainty,omitempty"`
}

// Uncertainty is a marker's interval from the visit's own data: the
// standard error SE and the interval [Low, High] at Level (0.95), how they
// were made (Method, in words with the method's source) and, for a
// bootstrap, the number of resamples (0 for an analytic formula).
type Uncertainty struct {
	SE        float64 `json:"se"`
	Low       float64 `json:"low"`
	High      float64 `json:"high"`
	Level     float64 `json:"level"`
	Method    string  `json:"method"`
	Resamples int     `json:"resamples"`
}

// Window is one analysis window of a recording and what the artefact rules
// decided about it, for the screens that show which seconds were used:
// recording time [Start, End) in seconds, the eye state, the region the
// decision applies to ("" for every region), whether it was kept, and the
// rule that rejected it (a rule key; "" when kept).
type Window struct {
	Start  float64         `json:"start"`
	End    float64         `json:"end"`
	State  ingest.EyeState `json:"state"`
	Region string          `json:"region,omitempty"`
	Kept   bool            `json:"kept"`
	Reason string          `json:"reason,omitempty"`
}

// Key identifies a marker series across visits: name, region and state.
func (m Marker) Key() string { return m.Name + "/" + m.Region + "/" + string(m.State) }

// Severity of a flag.
type Severity string

// Severities.
const (
	Caution       Severity = "caution"
	NotComparable Severity = "not_comparable"
)

// Flag is a finding about a visit: the rule that fired, its severity, the
// markers it affects (marker names; empty means all), a reason in plain words
// with the values involved, and the rule's source. The rules themselves live
// in package trends; the type lives here so that every stage can carry it.
type Flag struct {
	Rule     string   `json:"rule"`
	Severity Severity `json:"severity"`
	Markers  []string `json:"markers"`
	Reason   string   `json:"reason"`
	Source   string   `json:"source"`
}

// Quality is what analysis tells about a recording beyond its header.
type Quality struct {
	// LineFrequency in Hz and where it came from: "sidecar" or "spectrum".
	LineFrequency       float64 `json:"line_frequency_hz"`
	LineFrequencySource string  `json:"line_frequency_source"`
	// BadChannels of the 19 left out of the reference (flat, noisy or marked
	// bad by a sidecar), and UsedChannels those kept.
	BadChannels  []string `json:"bad_channels"`
	UsedChannels []string `json:"used_channels"`
	// Clean seconds per state after artefact rejection (keys "closed",
	// "open", "unknown"), epochs per state, rejected epochs per rule.
	// Under settings v2 the epochs are the 1-s analysis windows, the
	// rejected ones those rejected for every channel, and the clean
	// seconds the posterior region's (Regions has every region's).
	CleanSeconds   map[ingest.EyeState]float64 `json:"clean_seconds"`
	EpochsTotal    map[ingest.EyeState]int     `json:"epochs_total"`
	RejectedByRule map[string]int              `json:"rejected_by_rule"`
	// RejectedShare is rejected epochs over all epochs (0 when none).
	RejectedShare float64 `json:"rejected_share"`
	// Drowsiness is the share of clean eyes-closed epochs with posterior
	// alpha dropout; DrowsinessKnown is false when there were none.
	Drowsiness      float64 `json:"drowsiness_index"`
	DrowsinessKnown bool    `json:"drowsiness_known"`
	// Windows are the analysis windows in time order with the decision on
	// each (kept, or the rule that rejected it).
	Windows []Window `json:"windows,omitempty"`
	// Regions (settings v2 onward) are, per region and state, the seconds
	// analysed, the seconds the region's spectrum used and why the rest
	// went. ChannelWindowsLeftOut is, per channel, the share of windows it
	// was left out of while the window was kept for the others.
	Regions               []RegionTime       `json:"regions,omitempty"`
	ChannelWindowsLeftOut map[string]float64 `json:"channel_windows_left_out,omitempty"`
	// Ocular is what the ocular correction did (settings v2 onward; nil
	// when the settings have none).
	Ocular *OcularReport `json:"ocular,omitempty"`
}

// Spectrum is a display spectrum of one state over 1–45 Hz at the Welch
// resolution, with the fitted aperiodic line (same frequencies, µV²/Hz) and
// the peak found (PeakHz 0 when none).
type Spectrum struct {
	State     ingest.EyeState `json:"state"`
	Region    string          `json:"region"`
	Freqs     []float64       `json:"freqs_hz"`
	Power     []float64       `json:"power_uv2_per_hz"`
	Aperiodic []float64       `json:"aperiodic_uv2_per_hz,omitempty"`
	PeakHz    float64         `json:"peak_hz"`
	PeakPower float64         `json:"peak_power"`
}

// Trace is a display excerpt: 10 s of one posterior channel in one state,
// after referencing and filtering, decimated for display.
type Trace struct {
	State   ingest.EyeState `json:"state"`
	Channel string          `json:"channel"`
	Rate    float64         `json:"rate_hz"`
	Start   float64         `json:"start_s"` // recording time of the first sample
	Samples []float32       `json:"samples_uv"`
}

// Display holds the products the visit screen draws.
type Display struct {
	Spectra []Spectrum `json:"spectra"`
	Traces  []Trace    `json:"traces"`
}

// Result is everything metrics makes of one recording.
type Result struct {
	SettingsVersion string            `json:"settings_version"`
	SettingsHash    string            `json:"settings_hash"`
	Conditions      ingest.Conditions `json:"conditions"`
	Quality         Quality           `json:"quality"`
	Markers         []Marker          `json:"markers"`
	Display         Display           `json:"display"`
}

// Marker returns the marker with the given name, region and state, and
// whether there is one.
func (r *Result) Marker(name, region string, state ingest.EyeState) (Marker, bool) {
	for _, m := range r.Markers {
		if m.Name == name && m.Region == region && m.State == state {
			return m, true
		}
	}
	return Marker{}, false
}
