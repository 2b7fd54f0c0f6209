package server

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/trends"
	"longwave/web"

	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// The course screen opens with an overview a neurologist reads in a
// minute (issue 11, point 1): the four headline markers as small charts,
// each with its change in words and figures; a strip of the visits; the
// next due date; and every visit's posterior eyes-closed spectrum in one
// picture (point 2). Every other marker follows in closed groups.

// headlineMarkers are the overview's markers, in order.
var headlineMarkers = []string{metrics.PDRFrequency, metrics.AlphaReactivity, metrics.ThetaAlphaRatio, metrics.AperiodicExponent}

// markerGroup is one closed group of the course's other markers.
type markerGroup struct {
	title, intro string
	markers      []string
}

// courseGroups lists the groups below the overview. Band powers are drawn
// one chart per region with the four bands together (bandCharts); the
// other groups hold one chart per marker series.
var courseGroups = []markerGroup{
	{"Left and right", "The peak frequency of each occipital side and their difference.",
		[]string{metrics.PDRLeft, metrics.PDRRight, metrics.PDRAsymmetry}},
	{"Drowsiness", "How much of the eyes-closed alpha dropped out, a sign of drowsiness during the recording.",
		[]string{metrics.DrowsinessIndex}},
	{"More views of the alpha rhythm and the background", "Centre of gravity of the alpha band, the eyes-open to eyes-closed ratio, the slowing ratio and frontal against posterior alpha.",
		[]string{metrics.PDRCentroid, metrics.AlphaRatio, metrics.SlowingRatio, metrics.FrontalPosteriorAlpha}},
	{"Fit of the aperiodic line", "How the aperiodic (1/f) line was fitted to each spectrum: its offset and how well it fits.",
		[]string{metrics.AperiodicOffset, metrics.AperiodicR2}},
}

// relativeBands are the band powers drawn together per region, with the
// colour of each (our own quiet set: warm for slow bands, cool for fast).
var relativeBands = []struct {
	marker, name, colour string
}{
	{metrics.RelDelta, "delta", "#8c6d5a"},
	{metrics.RelTheta, "theta", "#b08d4f"},
	{metrics.RelAlpha, "alpha", web.ColourLine},
	{metrics.RelBeta, "beta", "#7d9aa6"},
}

// courseBody lays out a course: the overview, the spectra of every visit,
// the groups of other markers, the visits table and the notes that would
// otherwise repeat under several charts.
func courseBody(c trends.Course, spectra map[int64][]metrics.Spectrum, canAdd bool) *web.CourseBody {
	code := c.Patient.Code
	page := &web.CourseBody{
		Code:       code,
		Advisory:   c.Advisory,
		SummaryURL: summaryURL(code),
		ChartData:  map[string]web.Option{},
	}
	page.Facts = coursefacts(c)
	if canAdd {
		page.AddURL = addURL(code)
	}
	page.NextDue, page.Overdue = nextDueText(c)
	picked := chartSeries(c.Series)
	key := 0
	nextKey := func() string {
		k := "m" + strconv.Itoa(key)
		key++
		return k
	}
	for _, name := range headlineMarkers {
		card := web.HeadlineCard{Title: markerTitle(name)}
		sr, ok := findSeries(picked, name)
		if !ok {
			card.Missing = "Not measured at any visit."
			page.Headline = append(page.Headline, card)
			continue
		}
		opt, chart := courseChart(sr, true)
		chart.Key = nextKey()
		chart.Norm = normView(sr)
		page.ChartData[chart.Key] = opt
		card.Chart = chart
		card.Where = seriesWhere(sr)
		card.Verdict, card.Known, card.Concern, card.Lines = headlineWords(sr)
		page.Headline = append(page.Headline, card)
	}
	page.NoVerdict = sharedNoVerdict(page.Headline)
	for _, v := range c.Visits {
		page.Strip = append(page.Strip, visitChip(v))
		page.Visits = append(page.Visits, web.VisitRow{
			Date: v.Date, Age: verdictAge(v), URL: visitURL(v.VisitID), Comparable: v.Comparable,
			Verdict: verdictWords(v.Verdict), Flags: flagViews(v.Flags),
			Conditions: courseConditions(v),
		})
	}
	if opt, box, ok := spectraOverlay(c, spectra, false); ok {
		box.Key = "spectra"
		page.ChartData[box.Key] = opt
		page.Overlay = box
	}
	// Band powers: one chart per region, the four bands together.
	bands := web.ChartGroup{Title: "Band powers by region",
		Intro: "The share of each band in the power from 1 to 30 Hz, eyes closed, one chart per region, with the latest share and its slope in percentage points a year (pp/y). Hollow grey points: visits that cannot be compared for that value."}
	for _, region := range []string{metrics.RegionPosterior, metrics.RegionGlobal, metrics.RegionFrontal, metrics.RegionLeftOccipital, metrics.RegionRightOccipital} {
		if opt, chart, ok := bandChart(c.Series, region); ok {
			chart.Key = nextKey()
			page.ChartData[chart.Key] = opt
			bands.Charts = append(bands.Charts, chart)
		}
	}
	if len(bands.Charts) > 0 {
		page.Groups = append(page.Groups, bands)
	}
	for _, g := range courseGroups {
		group := web.ChartGroup{Title: g.title, Intro: g.intro}
		for _, sr := range c.Series {
			if !contains(g.markers, sr.Marker) {
				continue
			}
			opt, chart := courseChart(sr, false)
			chart.Key = nextKey()
			chart.Norm = normView(sr)
			page.ChartData[chart.Key] = opt
			group.Charts = append(group.Charts, chart)
		}
		if len(group.Charts) > 0 {
			page.Groups = append(page.Groups, group)
		}
	}
	page.Notes = noteRepeats(page)
	return page
}

// noVerdictLead starts a headline line that says why there is no verdict.
const noVerdictLead = "No verdict against the controls: "

// sharedNoVerdict says once, under the overview, why none of the headline
// markers has a verdict when they all lack one for the same reason, and
// takes that line out of each card; "" otherwise.
func sharedNoVerdict(cards []web.HeadlineCard) string {
	why := ""
	for _, c := range cards {
		found := ""
		for _, l := range c.Lines {
			if strings.HasPrefix(l, noVerdictLead) {
				found = strings.TrimPrefix(l, noVerdictLead)
			}
		}
		if found == "" || (why != "" && found != why) {
			return ""
		}
		why = found
	}
	if why == "" || len(cards) < 2 {
		return ""
	}
	for i := range cards {
		var keep []string
		for _, l := range cards[i].Lines {
			if !strings.HasPrefix(l, noVerdictLead) {
				keep = append(keep, l)
			}
		}
		cards[i].Lines = keep
	}
	return "No verdict against the clinic's controls for these markers: " + why + "."
}

// findSeries returns the series of a marker among those picked.
func findSeries(list []trends.Series, marker string) (trends.Series, bool) {
	for _, sr := range list {
		if sr.Marker == marker {
			return sr, true
		}
	}
	return trends.Series{}, false
}

// nextDueText is the next due date in words and whether it has passed.
func nextDueText(c trends.Course) (string, bool) {
	switch {
	case c.NextDue == "":
		return "no visit yet", false
	case c.DaysOverdue > 0:
		return c.NextDue + ", " + strconv.Itoa(c.DaysOverdue) + " days overdue", true
	default:
		return c.NextDue, false
	}
}

// headlineWords is a headline marker's change in words: the verdict
// against the clinic's controls where there is one, with the patient's
// slope and the controls' range; otherwise the direction with the slope
// and its interval, and why there is no verdict.
func headlineWords(sr trends.Series) (string, bool, bool, []string) {
	unit := displayUnit(sr.Unit)
	perYear := perYearUnit(unit)
	ch := sr.Change
	v := ch.Verdict
	var lines []string
	slope := ""
	if ch.Slope.Known {
		slope = sig(ch.Slope.PerYear) + " " + perYear + " (95 % " + sig(ch.Slope.CILow) + " to " + sig(ch.Slope.CIHigh) + ")"
	}
	if v.Known {
		if v.Patient.Known {
			slope = sig(v.Patient.PerYear) + " " + perYear + " (95 % " + sig(v.Patient.CILow) + " to " + sig(v.Patient.CIHigh) + ")"
		}
		lines = append(lines, "Patient: "+slope,
			"Controls: "+sig(ch.Expected.PerYear)+" "+perYear+"; a control's slope lies in "+sig(v.ControlRangeLow)+" to "+sig(v.ControlRangeHigh))
	} else {
		if slope != "" {
			lines = append(lines, "Slope "+slope)
		} else {
			lines = append(lines, "Slope: "+peopleText(ch.Slope.Reason))
		}
		why := v.Reason
		if why == "" {
			why = strings.TrimPrefix(v.Text, "no verdict: ")
		}
		lines = append(lines, noVerdictLead+peopleText(why))
	}
	if ch.Points == 0 && len(sr.Points) > 0 {
		lines = append(lines, "None of the "+strconv.Itoa(len(sr.Points))+" "+plural(len(sr.Points), "visit is", "visits are")+
			" comparable for this marker; each visit's page says why")
	}
	if ch.Points > 0 {
		lines = append(lines, "Latest "+withUnit(sig(ch.LatestValue), unit)+" on "+ch.LatestDate+"; "+
			strconv.Itoa(ch.Points)+" comparable "+plural(ch.Points, "visit", "visits"))
	}
	if v.Known {
		return sentence(v.Text), true, v.Concern, lines
	}
	words := map[trends.Direction]string{
		trends.DirectionUp:     "Higher over the comparable visits",
		trends.DirectionDown:   "Lower over the comparable visits",
		trends.DirectionSteady: "No clear change",
	}[ch.Direction]
	if words == "" {
		words = "Change not known yet"
	}
	return words, false, false, lines
}

func plural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}

// seriesWhere names a series' region and eye state for people
// ("posterior · eyes closed").
func seriesWhere(sr trends.Series) string {
	return strings.TrimPrefix(regionName(sr.Region)+seriesState(sr.State), " · ")
}

// visitChip is one visit of the overview's strip: its date, and whether it
// can be compared, with the first reason in a few words when not.
func visitChip(v trends.VisitVerdict) web.VisitChip {
	chip := web.VisitChip{Date: v.Date, URL: visitURL(v.VisitID), Comparable: v.Comparable}
	var first, caution *metrics.Flag
	for i := range v.Flags {
		f := &v.Flags[i]
		if f.Severity == metrics.NotComparable && first == nil {
			first = f
		}
		if f.Severity == metrics.Caution && caution == nil {
			caution = f
		}
	}
	switch v.Verdict {
	case trends.VerdictComparable:
		chip.Status = "comparable"
	case trends.VerdictCautions:
		chip.Status = "comparable, with caution"
		if caution != nil {
			chip.Why = ruleText(caution.Rule)
		}
	case trends.VerdictPartly:
		chip.Status = "not comparable for some markers"
	default:
		chip.Status = "not comparable"
	}
	if first != nil {
		chip.Why = ruleText(first.Rule)
	}
	return chip
}

// spectrumRamp is the overlay's colour ramp from the first comparable
// visit to the latest: a pale sand through a grey teal to a deep ink blue
// (our own choice, quiet, no traffic-light colours).
var spectrumRamp = [][3]float64{{0xc8, 0xa9, 0x6e}, {0x6f, 0x93, 0x98}, {0x1c, 0x33, 0x4d}}

// rampColour returns the ramp's colour at t in [0, 1], linear between its
// stops in RGB.
func rampColour(t float64) string {
	t = math.Max(0, math.Min(1, t))
	seg := t * float64(len(spectrumRamp)-1)
	i := int(math.Floor(seg))
	if i >= len(spectrumRamp)-1 {
		i = len(spectrumRamp) - 2
	}
	f := seg - float64(i)
	var rgb [3]int
	for k := range rgb {
		rgb[k] = int(math.Round(spectrumRamp[i][k] + f*(spectrumRamp[i+1][k]-spectrumRamp[i][k])))
	}
	return fmt.Sprintf("#%02x%02x%02x", rgb[0], rgb[1], rgb[2])
}

// overlayMaxHz is the top of the overlay's frequency axis: the slow and
// alpha bands, where a slowing rhythm shows.
const overlayMaxHz = 30

// spectraOverlay draws the posterior eyes-closed spectrum of every visit
// in one chart: comparable visits along the colour ramp from the first to
// the latest (the latest drawn on top), each named by its date in the
// legend; visits that cannot be compared dashed and grey, hidden until the
// page's switch shows them (their names go to the page in the option's
// lwApart list, which charts.js reads). spectra are the visits' stored
// spectra by visit ID (those of other states and regions may be left out:
// courseSpectra reads the posterior eyes-closed ones only). ok is false
// when no visit has a stored spectrum.
//
// A compact overlay (the printed summary) has its legend along the top.
func spectraOverlay(c trends.Course, spectra map[int64][]metrics.Spectrum, compact bool) (web.Option, *web.OverlayBox, bool) {
	type drawn struct {
		date   string
		apart  bool
		points [][2]float64
		peak   float64
	}
	var list []drawn
	comparable := 0
	// A visit is drawn with the others when its posterior dominant rhythm
	// (the marker this spectrum shows) can be compared: a flag that sets
	// apart another marker only (an interval too wide for the eyes-open
	// reactivity, say) does not hide its eyes-closed spectrum.
	spectrumComparable := map[int64]bool{}
	for _, sr := range c.Series {
		if sr.Marker == metrics.PDRFrequency && sr.Region == metrics.RegionPosterior && sr.State == string(ingest.EyesClosed) {
			for _, pt := range sr.Points {
				spectrumComparable[pt.VisitID] = pt.Comparable
			}
		}
	}
	for _, v := range c.Visits { // in date order
		all, ok := spectra[v.VisitID]
		if !ok {
			continue
		}
		sp, ok := pickSpectrum(all, ingest.EyesClosed)
		if !ok || sp.Region != metrics.RegionPosterior {
			continue
		}
		ok = v.Comparable
		if pc, known := spectrumComparable[v.VisitID]; known {
			ok = pc
		}
		dr := drawn{date: v.Date, apart: !ok, peak: sp.PeakHz}
		for i, f := range sp.Freqs {
			if f >= 1 && f <= overlayMaxHz && sp.Power[i] > 0 {
				dr.points = append(dr.points, [2]float64{round(f, 3), roundSig(sp.Power[i])})
			}
		}
		if len(dr.points) == 0 {
			continue
		}
		if !dr.apart {
			comparable++
		}
		list = append(list, dr)
	}
	if len(list) == 0 {
		return nil, nil, false
	}
	box := &web.OverlayBox{}
	selected := map[string]bool{}
	var apartNames []string
	c2 := web.NewChart()
	var extras []web.SeriesExtra
	k := 0
	for _, dr := range list {
		name := dr.date
		colour, width, style := "", 1.6, "solid"
		z := 2
		if dr.apart && compact {
			box.Apart++
			continue // the summary leaves them out and says how many
		}
		if dr.apart {
			name += " (not comparable)"
			colour, width, style = web.ColourApartGrey, 1.2, "dashed"
			selected[name] = false
			apartNames = append(apartNames, name)
			z = 1
		} else {
			t := 1.0
			if comparable > 1 {
				t = float64(k) / float64(comparable-1)
			}
			colour = rampColour(t)
			if k == comparable-1 {
				width = 2.4
			}
			z = 3 + k
			k++
			peak := "no distinct peak"
			if dr.peak > 0 {
				peak = decimals(dr.peak, 1) + " Hz"
			}
			box.Peaks = append(box.Peaks, web.Pair{Label: dr.date, Value: peak})
		}
		c2.AddSeries(name, nil, web.WithData(dr.points),
			charts.WithLineChartOpts(opts.LineChart{ShowSymbol: opts.Bool(false)}),
			charts.WithLineStyleOpts(opts.LineStyle{Color: colour, Width: float32(width), Type: style}),
			charts.WithItemStyleOpts(opts.ItemStyle{Color: colour}))
		extras = append(extras, web.SeriesExtra{Z: z})
	}
	grid := opts.Grid{Left: "12", Right: "170", Top: "30", Bottom: "8", ContainLabel: opts.Bool(true)}
	legend := opts.Legend{Show: opts.Bool(true), Type: "scroll", Orient: "vertical", Right: "4", Top: "30", Selected: selected}
	if compact {
		grid = opts.Grid{Left: "8", Right: "36", Top: "28", Bottom: "46", ContainLabel: opts.Bool(true)}
		legend = opts.Legend{Show: opts.Bool(true), Bottom: "0", Left: "center", Selected: selected}
	}
	c2.SetGlobalOptions(
		charts.WithGridOpts(grid),
		charts.WithTooltipOpts(opts.Tooltip{Trigger: "item"}),
		charts.WithLegendOpts(legend),
		charts.WithXAxisOpts(opts.XAxis{Type: "value", Name: "Hz", Min: 1, Max: overlayMaxHz, AxisLine: web.AxisLine(), SplitLine: web.GridLines()}),
		charts.WithYAxisOpts(opts.YAxis{Type: "log", Name: "µV²/Hz", AxisLine: web.AxisLine(), SplitLine: web.GridLines()}),
	)
	box.Apart += len(apartNames)
	box.Comparable = comparable
	sort.Strings(apartNames)
	return web.OptionOf(c2, web.Extras{Confine: true, Series: extras, Toggle: apartNames}), box, true
}

// bandChart draws the four relative band powers of one region over date,
// eyes closed: a line of comparable visits per band and the values that
// cannot be compared as hollow grey points. ok is false when the region
// has none of the bands.
func bandChart(all []trends.Series, region string) (web.Option, web.CourseChart, bool) {
	c := web.NewChart()
	var extras []web.SeriesExtra
	var figures []web.Pair
	var apart []web.Point
	var first, last string
	found := false
	for _, b := range relativeBands {
		var sr *trends.Series
		for i := range all {
			if all[i].Marker == b.marker && all[i].Region == region && all[i].State == "closed" {
				sr = &all[i]
			}
		}
		if sr == nil {
			continue
		}
		found = true
		on := []web.Point{}
		for _, pt := range sr.Points {
			if !pt.Computable {
				continue
			}
			if first == "" || pt.Date < first {
				first = pt.Date
			}
			if pt.Date > last {
				last = pt.Date
			}
			tip := []string{b.name + " · " + pt.Date, "share " + decimals(100*pt.Value, 1) + " %"}
			p := web.Point{Value: [2]any{pt.Date, roundSig(pt.Value)}, Tip: tip}
			if pt.Comparable {
				on = append(on, p)
			} else {
				for _, why := range pt.Reasons {
					p.Tip = append(p.Tip, "not comparable: "+peopleText(why))
				}
				apart = append(apart, p)
			}
		}
		c.AddSeries(b.name, nil, web.WithData(on),
			charts.WithLineChartOpts(opts.LineChart{Symbol: "circle", SymbolSize: 6}),
			charts.WithItemStyleOpts(opts.ItemStyle{Color: b.colour}),
			charts.WithLineStyleOpts(opts.LineStyle{Color: b.colour, Width: 2}))
		extras = append(extras, web.SeriesExtra{Z: 3})
		ch := sr.Change
		value := "–"
		if ch.Points > 0 {
			value = decimals(100*ch.LatestValue, 1) + " % now"
			if ch.Slope.Known {
				value += ", " + signed(100*ch.Slope.PerYear) + " pp/y"
			}
		}
		figures = append(figures, web.Pair{Label: strings.ToUpper(b.name[:1]) + b.name[1:], Value: value})
	}
	if !found {
		return nil, web.CourseChart{}, false
	}
	if apart == nil {
		apart = []web.Point{}
	}
	hollow := charts.NewScatter()
	hollow.AddSeries("not comparable", nil, web.WithData(apart),
		charts.WithScatterChartOpts(opts.ScatterChart{Symbol: "emptyCircle", SymbolSize: 8}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: web.ColourApartGrey, BorderColor: web.ColourApartGrey, BorderWidth: 1.5}))
	c.Overlap(hollow)
	extras = append(extras, web.SeriesExtra{Z: 4})
	xAxis := opts.XAxis{Type: "time", AxisLine: web.AxisLine(), SplitLine: web.GridLines()}
	if x0, x1, ok := padDates(first, last); ok {
		xAxis.Min, xAxis.Max = x0, x1
	}
	c.SetGlobalOptions(
		charts.WithGridOpts(opts.Grid{Left: "12", Right: "24", Top: "34", Bottom: "8", ContainLabel: opts.Bool(true)}),
		charts.WithTooltipOpts(opts.Tooltip{Trigger: "item"}),
		charts.WithLegendOpts(opts.Legend{Show: opts.Bool(true), Top: "2", Left: "center"}),
		charts.WithXAxisOpts(xAxis),
		charts.WithYAxisOpts(opts.YAxis{Type: "value", Name: "share", Min: 0, AxisLine: web.AxisLine(), SplitLine: web.GridLines()}),
	)
	opt := web.OptionOf(c, web.Extras{UseUTC: true, Confine: true, Series: extras})
	chart := web.CourseChart{ChartBox: web.ChartBox{Title: "Band powers · " + regionName(region) + " · eyes closed"}, Figures: figures,
		Reference: "relative band powers have no advisory reference range in longwave's sources"}
	return opt, chart, true
}

// signed formats v with its sign and 2 decimals.
func signed(v float64) string {
	s := decimals(v, 2)
	if v > 0 {
		s = "+" + s
	}
	return s
}

// padDates widens a date range by chartMarginDays on both sides.
func padDates(first, last string) (string, string, bool) {
	if first == "" {
		return "", "", false
	}
	sr := trends.Series{Points: []trends.SeriesPoint{{Date: first, Computable: true}, {Date: last, Computable: true}}}
	x0, x1, _, _, ok := extents(sr, nil)
	return x0, x1, ok
}

// minNoteLength is the shortest explanation that becomes a page note when
// it repeats: shorter texts (a figure, a word) stay where they are.
const minNoteLength = 30

// noteRepeats moves every explanation that would appear under more than
// one chart to the page's notes, numbered in order of first appearance, and
// leaves "see note N" in its places (issue 11: repeated explanations appear
// once per page).
func noteRepeats(page *web.CourseBody) []web.Note {
	var fields []*string
	// Advisories repeat word for word under every norm: said once in the
	// notes, they leave nothing behind under the charts.
	quiet := map[*string]bool{}
	addChart := func(ch *web.CourseChart) {
		for i := range ch.Figures {
			fields = append(fields, &ch.Figures[i].Value)
		}
		fields = append(fields, &ch.Reference, &ch.Caption)
		if n := ch.Norm; n != nil {
			fields = append(fields, &n.Note, &n.Advisory) // the basis stays: a short fact of each norm
			quiet[&n.Advisory] = true
			if !n.Known {
				fields = append(fields, &n.Verdict)
			}
			for i := range n.Figures {
				fields = append(fields, &n.Figures[i].Value)
			}
		}
	}
	// Every chart of the page, the overview's first.
	var all []*web.CourseChart
	for i := range page.Headline {
		h := &page.Headline[i]
		for j := range h.Lines {
			fields = append(fields, &h.Lines[j])
		}
		all = append(all, &h.Chart)
	}
	for i := range page.Groups {
		for j := range page.Groups[i].Charts {
			all = append(all, &page.Groups[i].Charts[j])
		}
	}
	// A published ageing note repeats as a whole (under every alpha
	// marker): text, figure and source go to one note together.
	var lits []*web.LiteratureView
	for _, ch := range all {
		addChart(ch)
		if n := ch.Norm; n != nil {
			for k := range n.Literature {
				lits = append(lits, &n.Literature[k])
			}
		}
	}
	litText := func(l *web.LiteratureView) string {
		t := l.Text
		if l.PerYear != "" {
			t += " (" + l.PerYear + ")"
		}
		return t + ". Source: " + l.Source
	}
	litCount := map[string]int{}
	for _, l := range lits {
		litCount[litText(l)]++
	}
	// A line of the overview such as "No verdict against the controls:
	// <reason>" repeats by its reason: the part after the first ": " is
	// counted and replaced.
	count := map[string]int{}
	for _, f := range fields {
		if t := noteText(*f); len(t) >= minNoteLength {
			count[t]++
		}
	}
	var notes []web.Note
	number := map[string]int{}
	noteFor := func(t string) int {
		n, ok := number[t]
		if !ok {
			n = len(notes) + 1
			number[t] = n
			notes = append(notes, web.Note{N: n, Text: sentence(t)})
		}
		return n
	}
	for _, f := range fields {
		t := noteText(*f)
		if count[t] < 2 {
			continue
		}
		n := noteFor(t)
		if quiet[f] {
			*f = ""
			continue
		}
		*f = strings.TrimSuffix(*f, t) + "see note " + strconv.Itoa(n)
	}
	for _, l := range lits {
		t := litText(l)
		if litCount[t] < 2 {
			continue
		}
		*l = web.LiteratureView{Text: "See note " + strconv.Itoa(noteFor(t))}
	}
	return notes
}

// noteText is the part of a text that may become a note: after the first
// ": " of an overview line ("No verdict against the controls: …"), else
// the whole text.
func noteText(s string) string {
	for _, lead := range []string{noVerdictLead, "No verdict: ", "Slope: "} {
		if strings.HasPrefix(s, lead) {
			return strings.TrimPrefix(s, lead)
		}
	}
	return s
}
