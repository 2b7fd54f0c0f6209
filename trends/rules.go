package trends

import (
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/metrics/clinic"
)

// Rule names, as they appear in metrics.Flag.Rule.
const (
	RuleSampleRateUnknown   = "sample_rate_unknown"
	RuleSampleRateNyquist   = "sample_rate_nyquist"
	RuleSampleRateBelow3x   = "sample_rate_below_3x"
	RuleSampleRateIFCN      = "sample_rate_below_200"
	RuleLowPassInBand       = "lowpass_in_band"
	RuleLowPassBelowRoutine = "lowpass_below_70"
	RuleHighPassAbove1Hz    = "highpass_above_1hz"
	RuleCoarseResolution    = "resolution_coarse"
	RuleOccipitalMissing    = "occipital_missing"
	RuleFewGoodPositions    = "few_good_positions"
	RuleLittleCleanClosed   = "little_clean_closed"
	RuleIntervalWide        = "interval_too_wide"
	RuleNoEyesOpen          = "no_eyes_open"
	RuleEyeStateUnknown     = "eye_state_unknown"
	RuleDrowsy              = "drowsy"
	RuleOtherSettings       = "other_settings"
	RuleLineFrequencyChange = "line_frequency_changed"
	RuleReferenceChange     = "reference_changed"
	RuleEquipmentChange     = "equipment_changed"
	RuleSampleRateChange    = "sample_rate_changed"
	RuleFiltersChange       = "hardware_filters_changed"
)

// Rule describes one comparability rule for people: its name, severity, the
// markers it affects, its threshold and its source.
type Rule struct {
	Name      string           `json:"name"`
	Severity  metrics.Severity `json:"severity"`
	Scope     string           `json:"scope"` // "visit" (CheckVisit, CheckSettings) or "between visits" (CompareVisits)
	Markers   string           `json:"markers"`
	Threshold string           `json:"threshold"`
	Source    string           `json:"source"`
}

// Rules lists every rule of CheckVisit, CheckSettings and CompareVisits.
func Rules() []Rule {
	band := num(AnalysedBandHigh)
	return []Rule{
		{RuleSampleRateUnknown, metrics.NotComparable, "visit", "all", "sampling rate not stated", sourceDesign},
		{RuleSampleRateNyquist, metrics.NotComparable, "visit", "all", "rate ≤ 2 × " + band + " Hz = " + num(NyquistFactor*AnalysedBandHigh) + " Hz", sourceNyquist},
		{RuleSampleRateBelow3x, metrics.NotComparable, "visit", "all (through epoch rejection); named: markers drawing on power above a third of the rate", "rate < 3 × " + band + " Hz = " + num(SamplingFactor*AnalysedBandHigh) + " Hz", sourceACNS4},
		{RuleSampleRateIFCN, metrics.Caution, "visit", "all", "rate < " + num(MinSampleRateIFCN) + " Hz", sourceIFCNRate},
		{RuleLowPassInBand, metrics.NotComparable, "visit", "markers whose band reaches above half the cut-off", "hardware low-pass known and < " + band + " Hz", sourceFilterEdge},
		{RuleLowPassBelowRoutine, metrics.Caution, "visit", "markers whose band reaches above half the cut-off", "hardware low-pass known and ≥ " + band + " Hz but < " + num(MinRoutineLowPassHz) + " Hz", sourceACNS1},
		{RuleHighPassAbove1Hz, metrics.NotComparable, "visit", "markers whose band reaches below twice the cut-off", "hardware high-pass known and > " + num(MaxHighPassHz) + " Hz", sourceACNS1},
		{RuleCoarseResolution, metrics.Caution, "visit", "all", "amplitude resolution > " + num(MaxUVPerStep) + " µV per step", sourceIFCNRes},
		{RuleOccipitalMissing, metrics.NotComparable, "visit", "PDR, left/right PDR, asymmetry and posterior-region markers", "O1 or O2 missing or bad", sourceDesign},
		{RuleFewGoodPositions, metrics.NotComparable, "visit", "all", "fewer than " + strconv.Itoa(MinGoodPositions) + " of the 19 positions good", sourceReference},
		{RuleLittleCleanClosed, metrics.NotComparable, "visit", "all (markers without an interval of their own, settings v1); a caution only where markers carry intervals", "clean eyes-closed data < " + num(MinCleanClosedSeconds) + " s", sourceDesign},
		{RuleIntervalWide, metrics.NotComparable, "visit", "each marker on its own interval (settings v2 onward)", intervalLimitsText(), sourceInterval},
		{RuleNoEyesOpen, metrics.NotComparable, "visit", metrics.AlphaReactivity + ", " + metrics.AlphaRatio, "no clean eyes-open data", sourceDesign},
		{RuleEyeStateUnknown, metrics.NotComparable, "visit", "all", "eye state not known", sourceDesign},
		{RuleDrowsy, metrics.NotComparable, "visit", "all but " + metrics.DrowsinessIndex, "drowsiness index > " + num(MaxDrowsiness), sourceDrowsy},
		{RuleOtherSettings, metrics.NotComparable, "visit", "all", "settings version or hash other than the current", sourceDesign},
		{RuleLineFrequencyChange, metrics.Caution, "between visits", "all", "line frequency differs by > " + num(LineFrequencyTolerance) + " Hz", sourceDesign},
		{RuleReferenceChange, metrics.Caution, "between visits", "all", "recording reference differs", sourceDesign},
		{RuleEquipmentChange, metrics.Caution, "between visits", "all", "equipment differs", sourceDesign},
		{RuleSampleRateChange, metrics.Caution, "between visits", "all", "sampling rate differs by > 0.1 %", sourceDesign},
		{RuleFiltersChange, metrics.Caution, "between visits", "all", "hardware high-pass or low-pass differs", sourceDesign},
	}
}

// VisitQuality is what the single-visit gates look at.
type VisitQuality struct {
	Conditions ingest.Conditions
	Quality    metrics.Quality
	Markers    []metrics.Marker
}

// posteriorRegionMarkers are the markers that a missing or bad occipital
// channel changes besides the PDR family: every marker taken over the
// posterior region (O1 O2 P3 P4 Pz), the frontal/posterior ratio and the
// drowsiness index (posterior alpha dropout).
var posteriorRegionMarkers = []string{
	metrics.AlphaReactivity + "/" + metrics.RegionPosterior,
	metrics.AlphaRatio + "/" + metrics.RegionPosterior,
	metrics.ThetaAlphaRatio + "/" + metrics.RegionPosterior,
	metrics.RelDelta + "/" + metrics.RegionPosterior,
	metrics.RelTheta + "/" + metrics.RegionPosterior,
	metrics.RelAlpha + "/" + metrics.RegionPosterior,
	metrics.RelBeta + "/" + metrics.RegionPosterior,
	metrics.FrontalPosteriorAlpha,
	metrics.DrowsinessIndex,
}

// occipitalRegionMarkers are the markers of one occipital channel's region
// (metrics.RegionLeftOccipital is O1 alone, RegionRightOccipital O2 alone).
func occipitalRegionMarkers(region string) []string {
	return []string{
		metrics.RelDelta + "/" + region, metrics.RelTheta + "/" + region,
		metrics.RelAlpha + "/" + region, metrics.RelBeta + "/" + region,
	}
}

// CheckVisit applies the single-visit quality gates and returns their flags
// in rule order; none when the visit passes them all.
func CheckVisit(v VisitQuality) []metrics.Flag {
	var out []metrics.Flag
	out = append(out, checkSampleRate(v.Conditions)...)
	out = append(out, checkFilters(v.Conditions.Filters)...)
	out = append(out, checkResolution(v.Conditions)...)
	out = append(out, checkPositions(v.Conditions, v.Quality)...)
	out = append(out, checkEyeStates(v.Conditions, v.Quality, v.Markers)...)
	return out
}

func checkSampleRate(c ingest.Conditions) []metrics.Flag {
	fs := c.SampleRate
	if fs <= 0 || math.IsNaN(fs) || math.IsInf(fs, 0) {
		return []metrics.Flag{{Rule: RuleSampleRateUnknown, Severity: metrics.NotComparable,
			Reason: "sampling rate not stated: the analysed band cannot be checked", Source: sourceDesign}}
	}
	nyq := NyquistFactor * AnalysedBandHigh
	if fs <= nyq {
		return []metrics.Flag{{Rule: RuleSampleRateNyquist, Severity: metrics.NotComparable,
			Reason: fmt.Sprintf("sampled at %s Hz: at or below 2 × %s Hz = %s Hz, so the analysed band up to %s Hz is not represented (frequencies from %s Hz fold back)",
				num(fs), num(AnalysedBandHigh), num(nyq), num(AnalysedBandHigh), num(fs/2)),
			Source: sourceNyquist}}
	}
	var out []metrics.Flag
	if three := SamplingFactor * AnalysedBandHigh; fs < three {
		// Not comparable: the band lies below the Nyquist frequency, but the
		// three-times rule leaves room for the anti-aliasing filter, whose
		// roll-off dims power in the upper part of the analysed band. That
		// power enters the muscle-artefact rule and the global spectrum, so
		// epoch rejection — and through it every marker — differs from a
		// visit sampled fast enough; the clinic's own demo case (128 Hz) is
		// kept apart from the course for that reason.
		third := fs / SamplingFactor
		reason := fmt.Sprintf("sampled at %s Hz: below 3 × %s Hz = %s Hz, the upper edge of the analysed band; power above %s Hz (a third of the rate) may be dimmed by the anti-aliasing filter, which can change epoch rejection for muscle artefact",
			num(fs), num(AnalysedBandHigh), num(three), num(third))
		if direct := markersAbove(third); len(direct) > 0 {
			reason += "; markers drawing on that power: " + strings.Join(direct, ", ")
		}
		out = append(out, metrics.Flag{Rule: RuleSampleRateBelow3x, Severity: metrics.NotComparable,
			Reason: reason, Source: sourceACNS4})
	}
	if fs < MinSampleRateIFCN {
		out = append(out, metrics.Flag{Rule: RuleSampleRateIFCN, Severity: metrics.Caution,
			Reason: fmt.Sprintf("sampled at %s Hz: below the IFCN minimum of %s Hz for clinical digital EEG",
				num(fs), num(MinSampleRateIFCN)),
			Source: sourceIFCNRate})
	}
	return out
}

func checkFilters(f ingest.Filters) []metrics.Flag {
	var out []metrics.Flag
	if lp := f.LowPass; lp.Known && lp.Hz > 0 {
		edge := lp.Hz / FilterOctave
		switch {
		case lp.Hz < AnalysedBandHigh:
			affected := markersAbove(edge)
			out = append(out, metrics.Flag{Rule: RuleLowPassInBand, Severity: metrics.NotComparable,
				Markers: affected,
				Reason: fmt.Sprintf("hardware low-pass at %s Hz: inside the analysed band (up to %s Hz); markers drawing on power above %s Hz (one octave below the cut-off) are affected: %s",
					num(lp.Hz), num(AnalysedBandHigh), num(edge), strings.Join(affected, ", ")),
				Source: sourceFilterEdge})
		case lp.Hz < MinRoutineLowPassHz:
			affected := markersAbove(edge)
			if len(affected) > 0 {
				out = append(out, metrics.Flag{Rule: RuleLowPassBelowRoutine, Severity: metrics.Caution,
					Markers: affected,
					Reason: fmt.Sprintf("hardware low-pass at %s Hz: below the routine %s Hz; markers drawing on power above %s Hz (one octave below the cut-off) may be dimmed: %s",
						num(lp.Hz), num(MinRoutineLowPassHz), num(edge), strings.Join(affected, ", ")),
					Source: sourceACNS1})
			}
		}
	}
	if hp := f.HighPass; hp.Known && hp.Hz > MaxHighPassHz {
		edge := hp.Hz * FilterOctave
		affected := markersBelow(edge)
		if len(affected) > 0 {
			out = append(out, metrics.Flag{Rule: RuleHighPassAbove1Hz, Severity: metrics.NotComparable,
				Markers: affected,
				Reason: fmt.Sprintf("hardware high-pass at %s Hz: above %s Hz; markers drawing on power below %s Hz (one octave above the cut-off) are affected: %s",
					num(hp.Hz), num(MaxHighPassHz), num(edge), strings.Join(affected, ", ")),
				Source: sourceACNS1})
		}
	}
	return out
}

func checkResolution(c ingest.Conditions) []metrics.Flag {
	q := c.UVPerStep
	if q <= MaxUVPerStep || math.IsNaN(q) || math.IsInf(q, 0) {
		return nil
	}
	reason := fmt.Sprintf("amplitude resolution %s µV per step", num(q))
	if c.Bits > 0 {
		reason += fmt.Sprintf(" (%d bits)", c.Bits)
	}
	reason += fmt.Sprintf(": coarser than %s µV", num(MaxUVPerStep))
	if c.SampleRate > 0 {
		// Uniform quantisation noise has variance q²/12, spread evenly over
		// 0…fs/2 in a one-sided density: q²/(6·fs) µV²/Hz.
		reason += fmt.Sprintf("; quantisation noise q²/(6·fs) = %s µV²/Hz raises the floor of the spectrum, most where EEG power is lowest (high frequencies)",
			strconv.FormatFloat(q*q/(6*c.SampleRate), 'g', 2, 64))
	}
	return []metrics.Flag{{Rule: RuleCoarseResolution, Severity: metrics.Caution, Reason: reason, Source: sourceIFCNRes}}
}

// goodPositions returns which of the 19 positions are present and good:
// those metrics used when it says, else those found and not marked bad.
func goodPositions(c ingest.Conditions, q metrics.Quality) []string {
	bad := map[string]bool{}
	for _, b := range c.BadChannels {
		bad[b] = true
	}
	for _, b := range q.BadChannels {
		bad[b] = true
	}
	have := c.ChannelsFound
	if len(q.UsedChannels) > 0 {
		have = q.UsedChannels
	}
	var out []string
	for _, p := range ingest.Standard19 {
		if slices.Contains(have, p) && !bad[p] {
			out = append(out, p)
		}
	}
	return out
}

func checkPositions(c ingest.Conditions, q metrics.Quality) []metrics.Flag {
	good := goodPositions(c, q)
	var out []metrics.Flag
	var lost []string
	affected := []string{metrics.PDRFrequency, metrics.PDRCentroid, metrics.PDRAsymmetry}
	if !slices.Contains(good, "O1") {
		lost = append(lost, "O1")
		affected = append(affected, metrics.PDRLeft)
		affected = append(affected, occipitalRegionMarkers(metrics.RegionLeftOccipital)...)
	}
	if !slices.Contains(good, "O2") {
		lost = append(lost, "O2")
		affected = append(affected, metrics.PDRRight)
		affected = append(affected, occipitalRegionMarkers(metrics.RegionRightOccipital)...)
	}
	if len(lost) > 0 {
		affected = append(affected, posteriorRegionMarkers...)
		out = append(out, metrics.Flag{Rule: RuleOccipitalMissing, Severity: metrics.NotComparable,
			Markers: affected,
			Reason: fmt.Sprintf("%s missing or bad: the posterior dominant rhythm, the left/right occipital peaks and their difference, and the posterior region change",
				strings.Join(lost, " and ")),
			Source: sourceDesign})
	}
	if n := len(good); n < MinGoodPositions {
		out = append(out, metrics.Flag{Rule: RuleFewGoodPositions, Severity: metrics.NotComparable,
			Reason: fmt.Sprintf("%d of the 19 positions good: fewer than %d, the common average reference is unreliable",
				n, MinGoodPositions),
			Source: sourceReference})
	}
	return out
}

func checkEyeStates(c ingest.Conditions, q metrics.Quality, markers []metrics.Marker) []metrics.Flag {
	var out []metrics.Flag
	closed := q.CleanSeconds[ingest.EyesClosed]
	open := q.CleanSeconds[ingest.EyesOpen]
	unknown := q.CleanSeconds[ingest.EyesUnknown]
	if c.PeriodSource == ingest.FromNothing || (closed <= 0 && open <= 0 && unknown > 0) {
		out = append(out, metrics.Flag{Rule: RuleEyeStateUnknown, Severity: metrics.NotComparable,
			Reason: "eye state unknown: no annotation, run or declaration says when the eyes were closed or open",
			Source: sourceDesign})
	}
	out = append(out, checkEnoughData(closed, markers)...)
	if open <= 0 {
		reason := "no eyes-open period: alpha reactivity needs one"
		if q.EpochsTotal[ingest.EyesOpen] > 0 {
			reason = fmt.Sprintf("no clean eyes-open data (all %d eyes-open epochs rejected): alpha reactivity needs some",
				q.EpochsTotal[ingest.EyesOpen])
		}
		out = append(out, metrics.Flag{Rule: RuleNoEyesOpen, Severity: metrics.NotComparable,
			Markers: []string{metrics.AlphaReactivity, metrics.AlphaRatio},
			Reason:  reason, Source: sourceDesign})
	}
	if q.DrowsinessKnown && q.Drowsiness > MaxDrowsiness {
		out = append(out, metrics.Flag{Rule: RuleDrowsy, Severity: metrics.NotComparable,
			Markers: markersExcept(metrics.DrowsinessIndex),
			Reason: fmt.Sprintf("drowsiness index %s: above %s (share of clean eyes-closed epochs with posterior alpha dropout); in drowsiness alpha slows by 0.5–1.5 Hz",
				num(q.Drowsiness), num(MaxDrowsiness)),
			Source: sourceDrowsy})
	}
	return out
}

// checkEnoughData judges whether a visit has data enough to compare its
// markers. Where no marker carries an interval of its own (settings v1),
// under MinCleanClosedSeconds of clean eyes-closed data makes every marker
// not comparable, as before. Where markers carry intervals, each computable
// marker is judged by its own: an interval wider than its IntervalLimit is
// not comparable for that marker alone (one flag per marker, the figures in
// the reason), and short clean data is a caution for all. A computable
// marker without an interval among markers that have them keeps the
// clean-seconds rule.
func checkEnoughData(closed float64, markers []metrics.Marker) []metrics.Flag {
	short := closed < MinCleanClosedSeconds
	shortText := fmt.Sprintf("%s s of clean eyes-closed data: under %s s", num(closed), num(MinCleanClosedSeconds))
	if !hasIntervals(markers) {
		if !short {
			return nil
		}
		return []metrics.Flag{{Rule: RuleLittleCleanClosed, Severity: metrics.NotComparable,
			Reason: shortText, Source: sourceDesign}}
	}
	var out []metrics.Flag
	if short {
		out = append(out, metrics.Flag{Rule: RuleLittleCleanClosed, Severity: metrics.Caution,
			Reason: shortText + "; each marker is judged by its own interval", Source: sourceDesign})
	}
	var bare []string
	for _, m := range markers {
		if !m.Computable {
			continue
		}
		lim, ok := intervalLimit(m.Name)
		if m.Uncertainty == nil || !ok {
			if short {
				bare = append(bare, m.Key())
			}
			continue
		}
		if reason, wide := tooWide(m, lim); wide {
			out = append(out, metrics.Flag{Rule: RuleIntervalWide, Severity: metrics.NotComparable,
				Markers: []string{m.Key()}, Reason: reason, Source: sourceInterval})
		}
	}
	if len(bare) > 0 {
		out = append(out, metrics.Flag{Rule: RuleLittleCleanClosed, Severity: metrics.NotComparable, Markers: bare,
			Reason: shortText + ", and these markers carry no interval of their own", Source: sourceDesign})
	}
	return out
}

// hasIntervals reports whether any computable marker carries an interval.
func hasIntervals(markers []metrics.Marker) bool {
	for _, m := range markers {
		if m.Computable && m.Uncertainty != nil {
			return true
		}
	}
	return false
}

func intervalLimit(name string) (IntervalLimit, bool) {
	for _, l := range IntervalLimits() {
		if l.Marker == name {
			return l, true
		}
	}
	return IntervalLimit{}, false
}

// tooWide compares a marker's interval width high − low with its limit
// (relative limits against the width over |value|) and says so in words.
func tooWide(m metrics.Marker, lim IntervalLimit) (string, bool) {
	u := m.Uncertainty
	width := u.High - u.Low
	level := num(100*u.Level) + " %"
	where := lim.Words + " (" + regionWords(m.Region) + stateWords(m.State) + ")"
	if lim.Relative {
		if width <= lim.Width*math.Abs(m.Value) {
			return "", false
		}
		share := "the value is 0"
		if m.Value != 0 {
			share = strconv.FormatFloat(100*width/math.Abs(m.Value), 'f', 0, 64) + " % of the value " + sig3(m.Value)
		}
		return fmt.Sprintf("%s: %s interval %s to %s is %s wide, %s; wider than %s %% of the value, too wide to compare across visits",
			where, level, sig3(u.Low), sig3(u.High), sig3(width), share, num(100*lim.Width)), true
	}
	if width <= lim.Width {
		return "", false
	}
	unit := ""
	if m.Unit != "" && m.Unit != "1" && m.Unit != "ratio" && m.Unit != "share" {
		unit = " " + m.Unit
	}
	return fmt.Sprintf("%s: %s interval %s to %s%s is %s%s wide, wider than %s%s: too wide to compare across visits",
		where, level, sig3(u.Low), sig3(u.High), unit, sig3(width), unit, num(lim.Width), unit), true
}

// intervalLimitsText is the rule's threshold for the rules list.
func intervalLimitsText() string {
	var parts []string
	for _, l := range IntervalLimits() {
		if l.Relative {
			parts = append(parts, l.Words+" "+num(100*l.Width)+" % of the value")
		} else {
			parts = append(parts, l.Words+" "+num(l.Width))
		}
	}
	return "interval (high − low) wider than: " + strings.Join(parts, "; ")
}

func regionWords(r string) string {
	if r == "" {
		return "no region"
	}
	return strings.ReplaceAll(r, "_", " ") + " region"
}

func stateWords(s ingest.EyeState) string {
	if w := s.Words(); w != "" {
		return ", " + w
	}
	return ""
}

// sig3 formats a value with three significant digits.
func sig3(v float64) string { return strconv.FormatFloat(v, 'g', 3, 64) }

// CheckSettings flags a visit whose markers were made by processing settings
// other than the current version and hash: its numbers are not comparable
// until the recording is processed again. An empty hash skips the hash test.
func CheckSettings(v clinic.VisitRecord, version, hash string) []metrics.Flag {
	switch {
	case v.SettingsVersion == "":
		return []metrics.Flag{{Rule: RuleOtherSettings, Severity: metrics.NotComparable,
			Reason: fmt.Sprintf("no settings version stored with the markers; current version %s: process the recording again", version),
			Source: sourceDesign}}
	case v.SettingsVersion != version:
		return []metrics.Flag{{Rule: RuleOtherSettings, Severity: metrics.NotComparable,
			Reason: fmt.Sprintf("markers made with settings version %s; current version %s: process the recording again", v.SettingsVersion, version),
			Source: sourceDesign}}
	case hash != "" && v.SettingsHash != hash:
		return []metrics.Flag{{Rule: RuleOtherSettings, Severity: metrics.NotComparable,
			Reason: fmt.Sprintf("markers made with settings version %s but hash %s, current hash %s: the settings changed without a new version",
				version, short(v.SettingsHash), short(hash)),
			Source: sourceDesign}}
	}
	return nil
}

// CompareVisits returns the cautions between a patient's previous visit and
// the current one: a change of line frequency, recording reference,
// equipment, sampling rate or hardware filters. Values a visit does not state
// are not compared.
func CompareVisits(prev, cur clinic.VisitRecord) []metrics.Flag {
	var out []metrics.Flag
	when := "at the visit of " + prev.Visit.Date // one small string per pair
	if a, b := lineFrequency(prev), lineFrequency(cur); a > 0 && b > 0 && math.Abs(a-b) > LineFrequencyTolerance {
		out = append(out, metrics.Flag{Rule: RuleLineFrequencyChange, Severity: metrics.Caution,
			Reason: fmt.Sprintf("line frequency %s Hz %s, %s Hz now: the notch and the line noise near the top of the band differ", num(a), when, num(b)),
			Source: sourceDesign})
	}
	if a, b := strings.TrimSpace(prev.Conditions.Reference), strings.TrimSpace(cur.Conditions.Reference); a != "" && b != "" && !strings.EqualFold(a, b) {
		out = append(out, metrics.Flag{Rule: RuleReferenceChange, Severity: metrics.Caution,
			Reason: fmt.Sprintf("recording reference %q %s, %q now (markers are re-referenced to the common average, but the recorded signal differs)", a, when, b),
			Source: sourceDesign})
	}
	if a, b := strings.TrimSpace(prev.Conditions.Equipment), strings.TrimSpace(cur.Conditions.Equipment); a != "" && b != "" && !strings.EqualFold(a, b) {
		out = append(out, metrics.Flag{Rule: RuleEquipmentChange, Severity: metrics.Caution,
			Reason: fmt.Sprintf("equipment %q %s, %q now: amplifiers and their filters differ", a, when, b),
			Source: sourceDesign})
	}
	if a, b := prev.Conditions.SampleRate, cur.Conditions.SampleRate; a > 0 && b > 0 && math.Abs(a-b) > SampleRateTolerance*math.Max(a, b) {
		out = append(out, metrics.Flag{Rule: RuleSampleRateChange, Severity: metrics.Caution,
			Reason: fmt.Sprintf("sampled at %s Hz %s, %s Hz now: the anti-aliasing filters differ", num(a), when, num(b)),
			Source: sourceDesign})
	}
	pf, cf := prev.Conditions.Filters, cur.Conditions.Filters
	var changed []string
	if edgeChanged(pf.HighPass, cf.HighPass) {
		changed = append(changed, fmt.Sprintf("high-pass %s Hz %s, %s Hz now", num(pf.HighPass.Hz), when, num(cf.HighPass.Hz)))
	}
	if edgeChanged(pf.LowPass, cf.LowPass) {
		changed = append(changed, fmt.Sprintf("low-pass %s Hz %s, %s Hz now", num(pf.LowPass.Hz), when, num(cf.LowPass.Hz)))
	}
	if len(changed) > 0 {
		out = append(out, metrics.Flag{Rule: RuleFiltersChange, Severity: metrics.Caution,
			Reason: "hardware filters changed: " + strings.Join(changed, "; "),
			Source: sourceDesign})
	}
	return out
}

func edgeChanged(a, b ingest.Frequency) bool {
	return a.Known && b.Known && math.Abs(a.Hz-b.Hz) > FilterTolerance
}

// lineFrequency is the line frequency metrics found, else the one the
// recording states, else 0.
func lineFrequency(v clinic.VisitRecord) float64 {
	if v.Quality.LineFrequency > 0 {
		return v.Quality.LineFrequency
	}
	return v.Conditions.LineFrequency
}

// num formats a value with at most three decimals and no trailing zeros.
func num(v float64) string {
	s := strconv.FormatFloat(v, 'f', 3, 64)
	if strings.Contains(s, ".") {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	if s == "-0" {
		s = "0"
	}
	return s
}

func short(h string) string {
	if len(h) > 12 {
		return h[:12]
	}
	if h == "" {
		return "(none)"
	}
	return h
}
