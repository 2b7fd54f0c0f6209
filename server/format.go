package server

import (
	"math"
	"strconv"
	"strings"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/web"
)

// Number formatting for pages: plain decimal text (no exponent for
// everyday sizes), a minus sign for negatives, trailing zeros cut.

func itoa(n int64) string { return strconv.FormatInt(n, 10) }

// decimals formats v with at most d decimals.
func decimals(v float64, d int) string {
	s := strconv.FormatFloat(v, 'f', d, 64)
	if strings.Contains(s, ".") {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	if s == "-0" {
		s = "0"
	}
	return strings.Replace(s, "-", "−", 1)
}

// sig formats v with about 3 significant digits, for values of any size.
func sig(v float64) string {
	a := v
	if a < 0 {
		a = -a
	}
	switch {
	case a == 0:
		return "0"
	case a >= 100:
		return decimals(v, 0)
	case a >= 10:
		return decimals(v, 1)
	case a >= 1:
		return decimals(v, 2)
	case a >= 0.01:
		return decimals(v, 3)
	default:
		return strings.Replace(strconv.FormatFloat(v, 'g', 3, 64), "-", "−", 1)
	}
}

// withUnit joins a number and its unit ("9.6 Hz"); unitless numbers stand
// alone.
func withUnit(text, unit string) string {
	if unit == "" || unit == "1" || unit == "ratio" || unit == "share" {
		return text
	}
	return text + " " + unit
}

func markerCell(m metrics.Marker) web.Cell {
	if !m.Computable {
		return web.Cell{Text: "–", Note: "not computable: " + peopleText(m.Reason)}
	}
	return web.Cell{Text: sig(m.Value), Unit: displayUnit(m.Unit)}
}

// intervalText is a marker's own interval for people: "9.19 to 9.43 Hz",
// with the level in front when it is not the 95 % the screens name
// ("90 %: …"); "" when the marker has none.
func intervalText(m metrics.Marker) string {
	u := m.Uncertainty
	if u == nil || !m.Computable {
		return ""
	}
	text := withUnit(sig(u.Low)+" to "+sig(u.High), displayUnit(m.Unit))
	if math.Abs(u.Level-0.95) > 1e-9 {
		text = decimals(100*u.Level, 1) + " %: " + text
	}
	return text
}

// methodText says how an interval was made, in words: the method as the
// analysis names it (a key such as "percentile_bootstrap" becomes words)
// and the number of resamples of a bootstrap.
func methodText(u *metrics.Uncertainty) string {
	if u == nil {
		return ""
	}
	text := strings.TrimSpace(u.Method)
	if !strings.Contains(text, " ") {
		text = strings.ReplaceAll(text, "_", " ")
	}
	if u.Resamples > 0 {
		text += ", " + strconv.Itoa(u.Resamples) + " resamples"
	}
	return text
}

// perYearUnit is a unit's yearly change ("Hz/y"; "per year" for a
// unitless marker).
func perYearUnit(unit string) string {
	if unit == "" {
		return "per year"
	}
	return unit + "/y"
}

// bornText is a patient's birth date or year for people.
func bornText(date string, year int, none string) string {
	switch {
	case date != "":
		return date
	case year != 0:
		return strconv.Itoa(year)
	default:
		return none
	}
}

func displayUnit(u string) string {
	if u == "1" || u == "ratio" || u == "share" {
		return ""
	}
	return u
}

// markerTitles are the plain names of markers shown on the screens.
var markerTitles = map[string]string{
	metrics.PDRFrequency:          "Posterior dominant rhythm",
	metrics.PDRCentroid:           "Alpha centre of gravity",
	metrics.PDRLeft:               "Left occipital peak",
	metrics.PDRRight:              "Right occipital peak",
	metrics.PDRAsymmetry:          "Occipital peak difference",
	metrics.AlphaReactivity:       "Alpha reactivity (attenuation)",
	metrics.AlphaRatio:            "Alpha eyes-open / eyes-closed",
	metrics.ThetaAlphaRatio:       "Theta / alpha ratio",
	metrics.AperiodicExponent:     "Spectral slope (aperiodic exponent)",
	metrics.AperiodicOffset:       "Aperiodic offset",
	metrics.AperiodicR2:           "Aperiodic fit R²",
	metrics.RelDelta:              "Relative delta power",
	metrics.RelTheta:              "Relative theta power",
	metrics.RelAlpha:              "Relative alpha power",
	metrics.RelBeta:               "Relative beta power",
	metrics.SlowingRatio:          "Slowing ratio (δ+θ)/(α+β)",
	metrics.FrontalPosteriorAlpha: "Frontal / posterior alpha",
	metrics.DrowsinessIndex:       "Drowsiness index",
}

func markerTitle(name string) string {
	if t, ok := markerTitles[name]; ok {
		return t
	}
	return keyWords(name)
}

var regionNames = map[string]string{
	metrics.RegionPosterior:      "posterior",
	metrics.RegionGlobal:         "global",
	metrics.RegionLeftOccipital:  "left occipital",
	metrics.RegionRightOccipital: "right occipital",
	metrics.RegionFrontal:        "frontal",
}

func regionName(r string) string {
	if n, ok := regionNames[r]; ok {
		return n
	}
	return keyWords(r)
}

func stateName(s ingest.EyeState) string {
	switch s {
	case ingest.EyesClosed:
		return "eyes closed"
	case ingest.EyesOpen:
		return "eyes open"
	case ingest.EyesUnknown:
		return "eye state unknown"
	case "":
		return ""
	default:
		return keyWords(string(s))
	}
}

func flagView(f metrics.Flag) web.FlagView {
	sev := "caution"
	if f.Severity == metrics.NotComparable {
		sev = "not comparable"
	}
	return web.FlagView{Severity: sev, SeverityKey: string(f.Severity), Reason: peopleText(f.Reason), Source: f.Source, Markers: markersText(f.Markers)}
}

func flagViews(fs []metrics.Flag) []web.FlagView {
	fs = groupIntervalFlags(fs)
	out := make([]web.FlagView, 0, len(fs))
	for _, f := range fs {
		out = append(out, flagView(f))
	}
	return out
}

func frequencyText(f ingest.Frequency) string {
	if !f.Known {
		return "not stated"
	}
	if f.Hz == 0 {
		return "none (DC)"
	}
	return decimals(f.Hz, 2) + " Hz"
}

// conditionPairs lists a visit's recording conditions and quality for
// people.
func conditionPairs(c ingest.Conditions, q metrics.Quality, short bool) []web.Pair {
	ps := []web.Pair{
		{Label: "Sampling rate", Value: decimals(c.SampleRate, 2) + " Hz"},
		{Label: "Resolution", Value: sig(c.UVPerStep) + " µV/step (" + strconv.Itoa(c.Bits) + " bit)"},
		{Label: "Hardware high-pass", Value: frequencyText(c.Filters.HighPass)},
		{Label: "Hardware low-pass", Value: frequencyText(c.Filters.LowPass)},
		{Label: "Line frequency", Value: lineText(c, q)},
		{Label: "Channels of the 19", Value: strconv.Itoa(len(c.ChannelsFound)) + " found" + missingText(c.ChannelsMissing)},
		{Label: "Clean eyes closed", Value: decimals(q.CleanSeconds[ingest.EyesClosed], 0) + " s"},
		{Label: "Clean eyes open", Value: decimals(q.CleanSeconds[ingest.EyesOpen], 0) + " s"},
		{Label: "Eye states from", Value: periodSourceText(c.PeriodSource)},
	}
	if short {
		return ps
	}
	drowsy := "not known"
	if q.DrowsinessKnown {
		drowsy = decimals(100*q.Drowsiness, 0) + " %"
	}
	bad := "none"
	if len(q.BadChannels) > 0 {
		bad = strings.Join(q.BadChannels, " ")
	}
	ps = append(ps,
		web.Pair{Label: "Format", Value: string(c.Format)},
		web.Pair{Label: "Hardware notch", Value: frequencyText(c.Filters.Notch)},
		web.Pair{Label: "Declared filters", Value: orNone(c.Filters.Text)},
		web.Pair{Label: "Reference", Value: orNone(c.Reference)},
		web.Pair{Label: "Duration", Value: decimals(c.Duration, 1) + " s"},
		web.Pair{Label: "Rejected epochs", Value: decimals(100*q.RejectedShare, 1) + " %"},
		web.Pair{Label: "Drowsiness index", Value: drowsy},
		web.Pair{Label: "Bad channels", Value: bad},
		web.Pair{Label: "Start time of day", Value: orNone(c.StartTimeOfDay)},
		web.Pair{Label: "Equipment", Value: orNone(c.Equipment)},
	)
	for _, ca := range c.Cautions {
		ps = append(ps, web.Pair{Label: "Decoder note", Value: peopleText(ca.Text)})
	}
	return ps
}

func lineText(c ingest.Conditions, q metrics.Quality) string {
	switch {
	case q.LineFrequency > 0:
		return decimals(q.LineFrequency, 0) + " Hz (from " + q.LineFrequencySource + ")"
	case c.LineFrequency > 0:
		return decimals(c.LineFrequency, 0) + " Hz"
	default:
		return "not known"
	}
}

func missingText(missing []string) string {
	if len(missing) == 0 {
		return ""
	}
	return "; missing " + strings.Join(missing, " ")
}

func periodSourceText(p ingest.PeriodSource) string {
	switch p {
	case ingest.FromAnnotations:
		return "annotations"
	case ingest.FromEvents:
		return "events file"
	case ingest.FromRuns:
		return "separate runs"
	case ingest.FromUser:
		return "declared at upload"
	case ingest.FromNothing:
		return "nothing (unknown)"
	default:
		return keyWords(string(p))
	}
}

func orNone(s string) string {
	if s == "" {
		return "not stated"
	}
	return s
}

func sexText(s string) string {
	switch s {
	case "F":
		return "female"
	case "M":
		return "male"
	case "O":
		return "other"
	default:
		return "not given"
	}
}
