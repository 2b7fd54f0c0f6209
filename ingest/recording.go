// Package ingest turns a visit's recording file (EDF, EDF+, BDF) or a
// BIDS-EEG folder into one in-memory Recording: channels under 10-10 names,
// samples in µV, eye-state periods and the recording conditions.
//
// Identifying header fields (the EDF patient field, the investigation and
// technician codes of the recording field, free-text annotations that are not
// eye-state markers) are dropped at decode time and never reach a Recording,
// an error message or a log line.
//
// This file holds the types only; the decoders live in edf.go and bids.go, so
// that package metrics may use the types without the file code.
package ingest

// Format names the container a recording came in.
type Format string

// Formats recognised by the decoders.
const (
	FormatEDF      Format = "EDF"   // plain EDF (Kemp et al. 1992)
	FormatEDFPlusC Format = "EDF+C" // EDF+ continuous (Kemp & Olivan 2003)
	FormatEDFPlusD Format = "EDF+D" // EDF+ discontinuous
	FormatBDF      Format = "BDF"   // BioSemi 24-bit
	FormatBDFPlusC Format = "BDF+C"
	FormatBDFPlusD Format = "BDF+D"
	FormatCombined Format = "combined" // two runs of one visit joined by Combine
)

// ChannelKind says what a channel measures, from its label and transducer.
type ChannelKind string

// Channel kinds.
const (
	KindEEG   ChannelKind = "EEG"
	KindEOG   ChannelKind = "EOG"
	KindECG   ChannelKind = "ECG"
	KindEMG   ChannelKind = "EMG"
	KindOther ChannelKind = "other"
)

// Standard19 lists the 19 positions of the 10-20 system in 10-10 names, in
// the order longwave reports them (ACNS Guideline 2, 2016).
var Standard19 = [19]string{
	"Fp1", "Fp2", "F7", "F3", "Fz", "F4", "F8",
	"T7", "C3", "Cz", "C4", "T8",
	"P7", "P3", "Pz", "P4", "P8",
	"O1", "O2",
}

// Channel is one ordinary (non-annotation) signal of a recording.
type Channel struct {
	// Label is the 10-10 name when the original label maps to one ("O1",
	// "Fp1", "T7"), else the cleaned original.
	Label string
	// Original is the label exactly as the file has it (trailing spaces cut).
	Original string
	// Reference is the reference part of a label such as "O1-A1" ("A1"),
	// empty when the label names none.
	Reference string
	Kind      ChannelKind
	// Unit is the physical dimension as the file spells it ("uV", "mV", "V").
	Unit string
	// SampleRate in Hz: samples per record over the record duration.
	SampleRate float64
	// Samples in µV for EEG/EOG/EMG channels whose unit is a volt unit
	// (converted from V or mV); in the file's own unit otherwise. float32
	// holds every 16- and 24-bit digital value times its gain exactly enough
	// (24 bits of mantissa).
	Samples []float32
	// UVPerStep is the amplitude resolution: |physical range / digital range|
	// in µV (for volt units), the size of one digital step.
	UVPerStep float64
	// Digital and physical extremes from the header.
	DigitalMin, DigitalMax   int
	PhysicalMin, PhysicalMax float64
	// Prefilter is the header's prefiltering text; Transducer its transducer type.
	Prefilter  string
	Transducer string
	// Bad is true when a sidecar (BIDS channels.tsv status) marks it bad.
	Bad bool
}

// Duration returns the channel's length in seconds.
func (c *Channel) Duration() float64 {
	if c.SampleRate <= 0 {
		return 0
	}
	return float64(len(c.Samples)) / c.SampleRate
}

// EyeState is the resting condition of a stretch of recording.
type EyeState string

// Eye states.
const (
	EyesClosed  EyeState = "closed"
	EyesOpen    EyeState = "open"
	EyesUnknown EyeState = "unknown"
)

// Words names the eye state for people ("eyes closed", "eyes open", "eye
// state unknown"); "" for no state or one of no known name.
func (s EyeState) Words() string {
	switch s {
	case EyesClosed:
		return "eyes closed"
	case EyesOpen:
		return "eyes open"
	case EyesUnknown:
		return "eye state unknown"
	}
	return ""
}

// Period is a stretch of one eye state, in seconds of recording time
// (seconds after the first sample of the recording).
type Period struct {
	State EyeState `json:"state"`
	Start float64  `json:"start"`
	End   float64  `json:"end"`
}

// PeriodSource says where a recording's eye-state periods came from.
type PeriodSource string

// Period sources.
const (
	FromAnnotations PeriodSource = "annotations"   // EDF+ annotations
	FromEvents      PeriodSource = "events"        // BIDS events.tsv
	FromRuns        PeriodSource = "separate_runs" // an eyes-closed and an eyes-open run
	FromUser        PeriodSource = "user"          // declared for the whole file
	FromNothing     PeriodSource = "unknown"       // no source: state unknown
)

// Segment is a stretch of contiguous samples. Continuous recordings have one;
// EDF+D files and combined runs have one per contiguous block. Sample indices
// are at the EEG rate (Conditions.SampleRate).
type Segment struct {
	// Onset is the segment's start in seconds of recording time.
	Onset float64
	// First is the index of its first sample; Count the number of samples.
	First, Count int
}

// Caution is a finding of the decoder that does not stop the decode: a short
// last record dropped, a record count that disagrees with the file size.
type Caution struct {
	Code string `json:"code"` // stable, machine-readable: "short_last_record", "records_mismatch", …
	Text string `json:"text"` // plain words with the values involved
}

// Frequency is a filter edge that may be unknown. Known false means the
// source said nothing usable; it is never guessed.
type Frequency struct {
	Hz    float64 `json:"hz"`
	Known bool    `json:"known"`
}

// Filters are the hardware filters a recording declares.
type Filters struct {
	HighPass Frequency `json:"high_pass"` // "HP:" in EDF prefiltering; 0 Hz known for "DC"
	LowPass  Frequency `json:"low_pass"`  // "LP:"
	Notch    Frequency `json:"notch"`     // "N:"
	// Text is the declared text as read (the first EEG channel's, or the BIDS
	// HardwareFilters summary).
	Text string `json:"text"`
}

// Conditions are the recording conditions kept for every recording
// (DESIGN.md, "Recording conditions"). The decoder fills what the file
// says; package metrics adds what only analysis can tell (line frequency from
// the spectrum, clean seconds, drowsiness) in its own Quality value.
type Conditions struct {
	Format Format `json:"format"`
	// SampleRate is the EEG rate in Hz: the most common rate among the
	// channels of the 19 positions (other EEG channels when none).
	SampleRate float64 `json:"sample_rate"`
	// UVPerStep is the coarsest amplitude resolution among the EEG channels
	// of the 19 positions, in µV per digital step; Bits the bit depth that
	// its digital range spans (ceil(log2(dmax − dmin + 1))).
	UVPerStep float64 `json:"uv_per_step"`
	Bits      int     `json:"bits"`
	Filters   Filters `json:"filters"`
	// LineFrequency in Hz when a sidecar states it (BIDS PowerLineFrequency),
	// else 0 (metrics then finds it in the spectrum).
	LineFrequency float64 `json:"line_frequency"`
	// Reference as declared (BIDS EEGReference), else the reference token
	// common to the labels ("REF", "A1"), else "".
	Reference string `json:"reference"`
	// ChannelsFound and ChannelsMissing partition Standard19; BadChannels
	// lists those marked bad by a sidecar.
	ChannelsFound   []string `json:"channels_found"`
	ChannelsMissing []string `json:"channels_missing"`
	BadChannels     []string `json:"bad_channels"`
	// Duration of the EEG channels in seconds.
	Duration float64 `json:"duration"`
	// StartTimeOfDay as "hh:mm:ss" (local time at the recording site, as
	// EDF keeps it), "" when the header has none that parses.
	StartTimeOfDay string `json:"start_time_of_day"`
	// Equipment is the equipment code of the EDF+ recording field (its fifth
	// subfield) or the BIDS Manufacturer/ManufacturersModelName; never the
	// investigation or technician codes.
	Equipment    string       `json:"equipment"`
	PeriodSource PeriodSource `json:"period_source"`
	Cautions     []Caution    `json:"cautions"`
}

// Annotation is an EDF+ or events.tsv event. Only the annotations that the
// eye-state phrase list recognises are kept in a Recording (free text can
// identify a patient); Text is then the phrase as written.
type Annotation struct {
	Onset    float64 `json:"onset"`
	Duration float64 `json:"duration"`
	Text     string  `json:"text"`
}

// Recording is one visit's recording in memory.
type Recording struct {
	// Name is the file's base name, for messages only; it is never stored.
	Name     string
	Channels []Channel
	Segments []Segment
	// Periods are sorted by Start and do not overlap.
	Periods     []Period
	Annotations []Annotation
	Conditions  Conditions
}

// Channel returns the channel with the given 10-10 label, or nil.
func (r *Recording) Channel(label string) *Channel {
	for i := range r.Channels {
		if r.Channels[i].Label == label {
			return &r.Channels[i]
		}
	}
	return nil
}
