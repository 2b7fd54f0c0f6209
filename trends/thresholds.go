package trends

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
	sourceDrowsy     = "longwave design (limit 0.25); clinical sleep handbook definition (secondary): alpha slows by 0.5–1.5 Hz and spreads forward in drowsiness"
	sourceReference  = "longwave design: common average of the good channels of the 19 positions; ACNS Guideline 1 (2016): at least 16 channels recorded at once"
)
