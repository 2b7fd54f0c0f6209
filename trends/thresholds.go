package trends

import "longwave/metrics"

// Every number the comparability rules use sits here, beside its source.
// Sources are named as REFERENCES.md names them, with their status there
// ("secondary", "memory", "abstract"); "common practice" marks a fact of the
// trade; "longwave design" marks a choice of this project, with its reason.

// AnalysedBandHigh is the upper edge of the analysed band in Hz: the
// zero-phase low-pass of processing settings version 1 (DESIGN.md, "Fixed
// processing settings"). Source: longwave design.
const AnalysedBandHigh = 45.0

// AnalysedBandLow is the lowest frequency any marker uses, in Hz: the lower
// edge of the delta band 1–4 Hz (DESIGN.md, "Bands"). Source: longwave design.
const AnalysedBandLow = 1.0

// NyquistFactor: a sampled signal represents frequencies only below half the
// sampling rate, so a rate at or below 2 × AnalysedBandHigh cannot hold the
// analysed band. Source: "Principles of digital sampling of a physiologic
// signal", Electroencephalogr Clin Neurophysiol 1993,
// doi:10.1016/0168-5597(93)90075-z (abstract).
const NyquistFactor = 2.0

// SamplingFactor is the rule of sampling at three or more times the
// high-frequency filter setting (the highest frequency of interest). Source:
// Halford et al. (2016), ACNS Guideline 4, J Clin Neurophysiol 33(4):317–319
// (value from memory, citation checked).
const SamplingFactor = 3.0

// MinSampleRateIFCN is the IFCN minimum sampling rate for clinical digital
// EEG in Hz (250–400 Hz preferred). Source: Nuwer et al. (1998), IFCN
// standards for digital recording of clinical EEG, Electroencephalogr Clin
// Neurophysiol 106:259–261 (secondary).
const MinSampleRateIFCN = 200.0

// MaxHighPassHz is the highest acceptable hardware high-pass (low-frequency
// filter) setting in Hz. Source: Sinha et al. (2016), ACNS Guideline 1:
// Minimum Technical Requirements for Performing Clinical EEG (memory).
const MaxHighPassHz = 1.0

// MinRoutineLowPassHz is the lowest routine hardware low-pass (high-frequency
// filter) setting in Hz. Source: Sinha et al. (2016), ACNS Guideline 1 (memory).
const MinRoutineLowPassHz = 70.0

// FilterOctave is how far from a hardware filter's cut-off a marker's band
// must stay to count as unaffected: one octave (a factor of two). A
// first-order (RC) filter, the weakest a hardware filter is, still takes
// 1 − 1/√1.25 of the amplitude (−0.97 dB) one octave inside its pass band;
// headers do not state the order, so longwave assumes the weakest. Source:
// common practice (first-order filter response).
const FilterOctave = 2.0

// MaxUVPerStep is the coarsest acceptable amplitude resolution in µV per
// digital step. Source: Nuwer et al. (1998), IFCN standards: at least 12 bits,
// resolving 0.5 µV (secondary).
const MaxUVPerStep = 0.5

// MinGoodPositions is the fewest good channels of the 19 positions for a
// common average reference that compares across visits. Source: longwave
// design (a common average over fewer than 15 of the 19 positions is
// dominated by the channels left; ACNS Guideline 1 asks for at least 16
// channels recorded at once, abstract-level).
const MinGoodPositions = 15

// MinCleanClosedSeconds is the least clean eyes-closed data, in seconds, for
// eyes-closed markers: 15 clean 4 s epochs. Source: longwave design.
const MinCleanClosedSeconds = 60.0

// MinCleanClosedSeconds above decides comparability only for visits whose
// markers carry no interval of their own (settings v1). From settings v2 on
// every marker has a 95 % interval from the visit's own data, and "too
// little data" is judged per marker by the width of that interval against
// the limits below; short clean data stays a caution. The limits are widths
// of the whole interval (high − low) in the marker's unit, or relative to
// the marker's value for ratios and shares of power, whose changes are
// proportional. Each is chosen against what the marker must resolve between
// two visits; all are longwave design and provisional until the clinic's
// own controls give a visit-to-visit SD per marker.
//
// For orientation (measured with the v2 bootstrap on the shared eegmmidb
// pairs S001–S003 and S038 when these limits were set, about 58 s of clean
// data per state; intervals narrow about as 1/√duration): PDR 0.40–0.60 Hz
// wide, exponent 0.11–0.24, posterior theta/alpha 28–100 % of its value,
// alpha reactivity 0.05–0.23. On the synthetic recordings of the server
// tests (106 s of clean eyes-closed data, 40 s eyes open) posterior
// theta/alpha is 21–31 % of its value wide and alpha reactivity 0.24–0.28.
// So about a minute of clean data a state gives alpha reactivity that can be
// compared and a PDR that cannot; a routine recording of a few minutes
// brings the PDR, the exponent and theta/alpha inside their limits where
// the bands stand above the noise.

// MaxIntervalWidthPDR is the widest interval, in Hz, of the posterior
// dominant rhythm (and of the alpha centre of gravity and the left and right
// occipital peaks, same unit and same question). Source: longwave design, on
// the reliable change index (REFERENCES.md section 2; Jacobson & Truax
// 1991). Reason: the index assumes a measurement error of SE = SD · √(1 − r)
// = 0.57 · √0.16 = 0.228 Hz per visit (provisional SD and r of the PDR). A
// visit whose own noise is larger than the index assumes would turn that
// noise into "reliable change"; the limit keeps the visit's own SE at no
// more than half of it, 0.114 Hz, so that it takes at most a quarter of the
// error variance the index allows for: width 2 · 1.96 · 0.114 = 0.447 Hz,
// rounded to 0.45 Hz.
const MaxIntervalWidthPDR = 0.45

// MaxIntervalWidthAsymmetry is the widest interval, in Hz, of the left minus
// right occipital peak difference. Source: longwave design, on the steps of
// the ACNS terminology (0.5–1 Hz mild, above 1 Hz marked asymmetry; Hirsch et
// al. 2013, secondary): an interval wider than one step cannot place the
// difference in one category.
const MaxIntervalWidthAsymmetry = 0.5

// MaxIntervalWidthReactivity is the widest interval of alpha reactivity
// (the attenuation 1 − EO/EC) and of the eyes-open over eyes-closed ratio,
// both shares on a scale of 0 to 1. Source: longwave design. Reason: no
// normal limit or reliability is published (REFERENCES.md section 1: course
// only); reactivity is high in normal elderly, intermediate in amnestic MCI
// and low in mild AD (Babiloni et al. 2010, abstract, no figures), three
// levels on one scale, so an interval over a fifth of the whole scale cannot
// tell neighbouring levels apart.
const MaxIntervalWidthReactivity = 0.2

// MaxIntervalWidthExponent is the widest interval of the aperiodic exponent.
// Source: longwave design. Reason: ±0.05 is the agreement settings v2 holds
// the exponent to between a blink-laden and a blink-free recording of the
// same signal, the least change longwave treats as material for this
// marker; an interval wider than 0.1 (±0.05 about the value) would hide
// such a change inside one visit's noise. No reliability in the
// marker's unit is published (REFERENCES.md section 2 gives an ICC only).
const MaxIntervalWidthExponent = 0.1

// MaxIntervalWidthOffset is the widest interval of the aperiodic offset, in
// log10 µV²/Hz. Source: longwave design. Reason: ±0.1 in log10 is ±26 % of
// broad-band power, about the difference between two amplifiers or caps
// that the comparability cautions already name; a visit's own noise should
// stay inside it.
const MaxIntervalWidthOffset = 0.2

// MaxIntervalWidthFitR2 is the widest interval of the aperiodic fit's R²
// (0–1). Source: longwave design: ±0.05 tells a good fit (above 0.95) from a
// doubtful one.
const MaxIntervalWidthFitR2 = 0.1

// MaxIntervalRelativeWidth is the widest interval of a ratio of band powers
// (theta/alpha, slowing ratio, frontal/posterior alpha; the eyes-open over
// eyes-closed ratio goes with alpha reactivity) or a relative band power, as
// a share of the marker's value: 0.4, about ±20 %. Source: longwave design,
// on the reasoning of MaxIntervalWidthPDR: the visit's own SE at most half
// the measurement error SD · √(1 − r) that test–retest reliability implies.
// With
// r = 0.84 for broad-band spectral features at 12–16 weeks (Salinsky et al.
// 1991, REFERENCES.md section 2, abstract) and a between-person SD of about
// half the mean for ratios and shares of band power (from memory,
// unverified), the error is 0.5 · √0.16 = 0.2 of the value, half of it 0.1,
// and the width 2 · 1.96 · 0.1 = 0.39 of the value, rounded to 0.4. Ratios of
// power change in proportion, so the limit is relative.
const MaxIntervalRelativeWidth = 0.4

// MaxIntervalWidthDrowsiness is the widest interval of the drowsiness index
// (a share of epochs): the whole span 0 to MaxDrowsiness that the drowsy
// rule allows. Source: longwave design: a wider interval cannot say on which
// side of the limit the visit lies.
const MaxIntervalWidthDrowsiness = MaxDrowsiness

// IntervalLimit is the widest interval at which one marker is compared:
// Width in the marker's unit, or, when Relative, as a share of the
// marker's absolute value. Words name the marker for people.
type IntervalLimit struct {
	Marker   string  `json:"marker"`
	Words    string  `json:"words"`
	Width    float64 `json:"width"`
	Relative bool    `json:"relative"`
}

// IntervalLimits lists the limit of every marker name of package metrics,
// in the order of MarkerNames.
func IntervalLimits() []IntervalLimit {
	abs := func(name, words string, w float64) IntervalLimit { return IntervalLimit{name, words, w, false} }
	rel := func(name, words string) IntervalLimit {
		return IntervalLimit{name, words, MaxIntervalRelativeWidth, true}
	}
	return []IntervalLimit{
		abs(metrics.PDRFrequency, "posterior dominant rhythm", MaxIntervalWidthPDR),
		abs(metrics.PDRCentroid, "alpha centre of gravity", MaxIntervalWidthPDR),
		abs(metrics.PDRLeft, "left occipital peak", MaxIntervalWidthPDR),
		abs(metrics.PDRRight, "right occipital peak", MaxIntervalWidthPDR),
		abs(metrics.PDRAsymmetry, "left minus right occipital peak", MaxIntervalWidthAsymmetry),
		abs(metrics.AlphaReactivity, "alpha reactivity", MaxIntervalWidthReactivity),
		abs(metrics.AlphaRatio, "alpha eyes open over eyes closed", MaxIntervalWidthReactivity),
		rel(metrics.ThetaAlphaRatio, "theta/alpha ratio"),
		abs(metrics.AperiodicExponent, "aperiodic exponent", MaxIntervalWidthExponent),
		abs(metrics.AperiodicOffset, "aperiodic offset", MaxIntervalWidthOffset),
		abs(metrics.AperiodicR2, "aperiodic fit R²", MaxIntervalWidthFitR2),
		rel(metrics.RelDelta, "relative delta power"),
		rel(metrics.RelTheta, "relative theta power"),
		rel(metrics.RelAlpha, "relative alpha power"),
		rel(metrics.RelBeta, "relative beta power"),
		rel(metrics.SlowingRatio, "slowing ratio"),
		rel(metrics.FrontalPosteriorAlpha, "frontal over posterior alpha"),
		abs(metrics.DrowsinessIndex, "drowsiness index", MaxIntervalWidthDrowsiness),
	}
}

// MaxDrowsiness is the highest drowsiness index (share of clean eyes-closed
// epochs with posterior alpha dropout) at which markers are compared. Source:
// longwave design. Reason: in drowsiness alpha slows by 0.5–1.5 Hz (clinical
// sleep handbook definition, REFERENCES.md section 3, secondary); with one
// epoch in four drowsy the mixture can shift the peak by at most
// 0.25 × 1.5 Hz = 0.375 Hz, under 60 % of the provisional reliable-change
// threshold of 0.632 Hz for the PDR (REFERENCES.md section 2). A higher share
// could fake or hide a reliable change.
const MaxDrowsiness = 0.25

// LineFrequencyTolerance is how far, in Hz, two visits' line frequencies may
// differ and still count as the same mains (50 Hz against 60 Hz differ by 10).
// Source: longwave design.
const LineFrequencyTolerance = 1.0

// SampleRateTolerance is the relative difference of two visits' sampling
// rates below which they count as equal (rates in EDF are stored as
// samples per record over a record duration and may round). Source: longwave
// design.
const SampleRateTolerance = 0.001

// FilterTolerance is the difference in Hz below which two visits' hardware
// filter edges count as equal. Source: longwave design.
const FilterTolerance = 0.01

// Sources as they appear in flags.
const (
	sourceNyquist    = "Principles of digital sampling of a physiologic signal. Electroencephalogr Clin Neurophysiol 1993. doi:10.1016/0168-5597(93)90075-z (abstract): sample above twice the highest frequency present"
	sourceACNS4      = "Halford JJ et al. (2016). ACNS Guideline 4: Recording Clinical EEG on Digital Media. J Clin Neurophysiol 33(4):317–319 (value from memory, citation checked): sample at least 3 × the high-frequency filter setting"
	sourceIFCNRate   = "Nuwer MR et al. (1998). IFCN standards for digital recording of clinical EEG. Electroencephalogr Clin Neurophysiol 106:259–261 (secondary): at least 200 Hz, 250–400 Hz preferred"
	sourceIFCNRes    = "Nuwer MR et al. (1998). IFCN standards for digital recording of clinical EEG. Electroencephalogr Clin Neurophysiol 106:259–261 (secondary): at least 12 bits, resolving 0.5 µV"
	sourceACNS1      = "Sinha SR et al. (2016). ACNS Guideline 1: Minimum Technical Requirements for Performing Clinical EEG. J Clin Neurophysiol 33(4):303–307 (from memory): low-frequency filter no higher than 1 Hz, high-frequency filter no lower than 70 Hz"
	sourceFilterEdge = "longwave design: markers are computed over fixed bands up to 45 Hz; common practice: a first-order filter already attenuates one octave inside its pass band"
	sourceDesign     = "longwave design"
	sourceInterval   = "longwave design: the widest 95 % interval of the visit's own data at which the marker is compared, chosen against the change it must resolve between visits (trends/thresholds.go)"
	sourceDrowsy     = "longwave design (limit 0.25); clinical sleep handbook definition (secondary): alpha slows by 0.5–1.5 Hz and spreads forward in drowsiness"
	sourceReference  = "longwave design: common average of the good channels of the 19 positions; ACNS Guideline 1 (2016): at least 16 channels recorded at once"
)
