package server

import (
	"math"
	"strconv"
	"strings"
	"time"

	"longwave/trends"
	"longwave/web"

	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// courseChart draws one marker series over date: comparable visits as
// filled points on a line, the others as hollow points without a line (the
// reason in the tooltip), and the literature reference band of each age
// band shaded across the dates it applies to. It returns the option and the
// chart's box with its change figures and the band's source. A compact
// chart (the overview's small ones) has no legend and a tighter frame.
func courseChart(sr trends.Series, compact bool) (web.Option, web.CourseChart) {
	unit := displayUnit(sr.Unit)
	var on, apart []web.Point
	notComputable := 0
	for _, pt := range sr.Points {
		if !pt.Computable {
			notComputable++
			continue
		}
		tip := []string{pt.Date + agePart(pt), withUnit(sig(pt.Value), unit)}
		if pt.Uncertainty != nil {
			level := decimals(100*pt.Uncertainty.Level, 1) + " %"
			tip = append(tip, level+" interval "+withUnit(sig(pt.Uncertainty.Low)+" to "+sig(pt.Uncertainty.High), unit),
				"interval by "+methodText(pt.Uncertainty))
		}
		if pt.Comparable {
			tip = append(tip, "comparable")
		} else {
			for _, why := range pt.Reasons {
				tip = append(tip, "not comparable: "+peopleText(why))
			}
		}
		for _, c := range pt.Cautions {
			tip = append(tip, "caution: "+peopleText(c))
		}
		for _, m := range pt.Literature.Matches {
			if m.Position != "" {
				tip = append(tip, string(m.Position)+" the advisory reference range ("+shortCitation(m.Range.Citation)+")")
				break
			}
		}
		p := web.Point{Value: [2]any{pt.Date, roundSig(pt.Value)}, Tip: tip}
		if pt.Comparable {
			on = append(on, p)
		} else {
			apart = append(apart, p)
		}
	}
	if on == nil {
		on = []web.Point{}
	}
	if apart == nil {
		apart = []web.Point{}
	}
	band, cites, status := referenceBand(sr)
	x0, x1, y0, y1, ok := extents(sr, band)
	xAxis := opts.XAxis{Type: "time", AxisLine: web.AxisLine(), SplitLine: web.GridLines()}
	yAxis := opts.YAxis{Type: "value", Name: unit, Scale: opts.Bool(true), AxisLine: web.AxisLine(), SplitLine: web.GridLines()}
	if ok {
		xAxis.Min, xAxis.Max = x0, x1
		yAxis.Min, yAxis.Max, yAxis.Scale = y0, y1, nil
	}
	grid := opts.Grid{Left: "12", Right: "24", Top: "34", Bottom: "8", ContainLabel: opts.Bool(true)}
	legend := opts.Legend{Show: opts.Bool(true), Top: "2", Left: "center"}
	if compact {
		grid = opts.Grid{Left: "4", Right: "14", Top: "22", Bottom: "2", ContainLabel: opts.Bool(true)}
		legend = opts.Legend{Show: opts.Bool(false)}
		xAxis.SplitNumber = 3
		yAxis.SplitNumber = 3
		yAxis.Name = "" // the unit is in the card's figures
	}
	c := web.NewChart()
	c.SetGlobalOptions(
		charts.WithGridOpts(grid),
		charts.WithTooltipOpts(opts.Tooltip{Trigger: "item"}),
		charts.WithLegendOpts(legend),
		charts.WithXAxisOpts(xAxis),
		charts.WithYAxisOpts(yAxis),
	)
	lineOpts := []charts.SeriesOpts{web.WithData(on),
		charts.WithLineChartOpts(opts.LineChart{Symbol: "circle", SymbolSize: 8}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: web.ColourLine}),
		charts.WithLineStyleOpts(opts.LineStyle{Color: web.ColourLine, Width: 2})}
	if len(band) > 0 {
		lineOpts = append(lineOpts,
			charts.WithMarkAreaStyleOpts(opts.MarkAreaStyle{
				ItemStyle: &opts.ItemStyle{Color: web.ColourBand, BorderColor: web.ColourBandEdge, BorderWidth: 1},
				Label:     &opts.Label{Show: opts.Bool(true), Position: "insideTopLeft", Color: web.ColourAxis, FontSize: 10}}),
			charts.WithMarkAreaNameCoordItemOpts(band...))
	}
	c.AddSeries("comparable visits", nil, lineOpts...)
	hollow := charts.NewScatter()
	hollow.AddSeries("not comparable", nil, web.WithData(apart),
		charts.WithScatterChartOpts(opts.ScatterChart{Symbol: "emptyCircle", SymbolSize: 10}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: web.ColourApart, BorderColor: web.ColourApart, BorderWidth: 2}))
	c.Overlap(hollow)
	opt := web.OptionOf(c, web.Extras{UseUTC: true, Confine: true, Series: []web.SeriesExtra{{Z: 3}, {Z: 4}}})
	chart := web.CourseChart{
		ChartBox: web.ChartBox{Title: markerTitle(sr.Marker) + " · " + regionName(sr.Region) + seriesState(sr.State)},
		Figures:  changeFigures(sr.Change, unit),
		HasBand:  len(band) > 0,
	}
	if chart.HasBand {
		chart.Reference = strings.Join(cites, "; ")
		chart.Status = status
	} else {
		chart.Reference = peopleText(noBandReason(sr))
	}
	if notComputable > 0 {
		chart.Caption = strconv.Itoa(notComputable) + " visit(s) without a value: see the visit screens for the reason."
	}
	return opt, chart
}

func seriesState(st string) string {
	switch st {
	case "closed":
		return " · eyes closed"
	case "open":
		return " · eyes open"
	case "", "any":
		return ""
	default:
		return " · " + st
	}
}

func agePart(pt trends.SeriesPoint) string {
	if !pt.AgeKnown {
		return " · age not known"
	}
	return " · age " + decimals(pt.AgeYears, 1) + " y"
}

// shortCitation is the citation up to its first period after the authors
// and year, for tooltips; the full text is under the chart.
func shortCitation(c string) string {
	if len(c) <= 60 {
		return c
	}
	cut := c[:60]
	if i := strings.LastIndexByte(cut, ' '); i > 20 {
		cut = cut[:i]
	}
	return cut + " …"
}

// referenceBand returns the shaded rectangles: one per run of consecutive
// points (in date order) whose most age-specific reference range with
// limits is the same, spanning from the run's first date to the next run's first date
// (the first run from the axis start, the last to the axis end). A missing
// lower or upper limit is drawn to the axis edge.
func referenceBand(sr trends.Series) ([]opts.MarkAreaNameCoordItem, []string, string) {
	type run struct {
		from   string
		lo, hi *float64
		cite   string
		status string
		name   string
	}
	var runs []run
	for _, pt := range sr.Points {
		// Of the ranges with limits that apply at the visit's age, the one
		// of the narrowest age band is the most age-specific: it is drawn
		// (ties: the lookup's order, literature first).
		var m *trends.RangeMatch
		for i := range pt.Literature.Matches {
			c := &pt.Literature.Matches[i]
			if c.Range.Lower == nil && c.Range.Upper == nil {
				continue
			}
			if m == nil || c.Range.AgeMax-c.Range.AgeMin < m.Range.AgeMax-m.Range.AgeMin {
				m = c
			}
		}
		if m == nil {
			continue
		}
		rg := m.Range
		name := rg.Set + "|" + rg.Citation + "|" + decimals(rg.AgeMin, 1) + "|" + decimals(rg.AgeMax, 1)
		if len(runs) > 0 && runs[len(runs)-1].name == name {
			continue
		}
		runs = append(runs, run{from: pt.Date, lo: rg.Lower, hi: rg.Upper, cite: rg.Citation, status: rg.Status, name: name})
	}
	var out []opts.MarkAreaNameCoordItem
	var cites []string
	statuses := map[string]bool{}
	for i, rn := range runs {
		var x0, x1 any
		if i > 0 {
			x0 = rn.from
		}
		if i+1 < len(runs) {
			x1 = runs[i+1].from
		}
		var y0, y1 any
		if rn.lo != nil {
			y0 = *rn.lo
		}
		if rn.hi != nil {
			y1 = *rn.hi
		}
		out = append(out, opts.MarkAreaNameCoordItem{Name: "advisory reference " + rangeText(rn.lo, rn.hi),
			Coordinate0: []any{x0, y0}, Coordinate1: []any{x1, y1}})
		if !contains(cites, rn.cite) {
			cites = append(cites, rn.cite)
		}
		statuses[rn.status] = true
	}
	status := ""
	switch {
	case statuses[trends.StatusFromMemory] && statuses[trends.StatusChecked]:
		status = "some values checked in the source, some from memory and awaiting a check"
	case statuses[trends.StatusFromMemory]:
		status = "value from memory, awaiting a check in the source"
	case statuses[trends.StatusChecked]:
		status = "checked in the source"
	}
	return out, cites, status
}

func rangeText(lo, hi *float64) string {
	switch {
	case lo != nil && hi != nil:
		return sig(*lo) + "–" + sig(*hi)
	case lo != nil:
		return "from " + sig(*lo)
	case hi != nil:
		return "up to " + sig(*hi)
	default:
		return ""
	}
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

// noBandReason says why a chart has no band.
func noBandReason(sr trends.Series) string {
	for _, pt := range sr.Points {
		if pt.Literature.NoRange != "" {
			return pt.Literature.NoRange
		}
	}
	for _, pt := range sr.Points {
		for _, m := range pt.Literature.Matches {
			if m.Range.Lower == nil && m.Range.Upper == nil {
				return "the source reports a mean only, no limits to shade (" + m.Range.Citation + ")"
			}
		}
	}
	return trends.NoRangeReason(sr.Marker)
}

// changeFigures are the figures beside a chart: slope with its 95 %
// interval, change from baseline, reliable change, expected change for age
// and direction.
func changeFigures(c trends.Change, unit string) []web.Pair {
	perYear := perYearUnit(unit)
	out := []web.Pair{{Label: "Comparable visits", Value: strconv.Itoa(c.Points)}}
	if c.Slope.Known {
		out = append(out,
			web.Pair{Label: "Slope", Value: sig(c.Slope.PerYear) + " " + perYear},
			web.Pair{Label: "95 % interval", Value: sig(c.Slope.CILow) + " to " + sig(c.Slope.CIHigh) + " " + perYear})
	} else {
		out = append(out, web.Pair{Label: "Slope", Value: peopleText(c.Slope.Reason)})
	}
	if c.HasFromBaseline {
		out = append(out, web.Pair{Label: "Since baseline", Value: withUnit(sig(c.FromBaseline), unit) + " in " + decimals(c.Years, 1) + " y"})
	}
	switch {
	case c.Reliable.Known:
		verdict := "not reliable"
		if c.Reliable.Reliable {
			verdict = "reliable"
		}
		out = append(out, web.Pair{Label: "Reliable change", Value: "RCI " + decimals(c.Reliable.RC, 2) + ", " + verdict})
		out = append(out, web.Pair{Label: "Smallest reliable", Value: withUnit(sig(c.Reliable.Threshold), unit)})
		out = append(out, web.Pair{Label: "Noise from", Value: noiseWords(c.Reliable)})
	case c.Reliable.Reason != "":
		out = append(out, web.Pair{Label: "Reliable change", Value: peopleText(c.Reliable.Reason)})
	}
	if c.Expected.Known && c.Expected.Verdict != "" { // a literature rate; the clinic norm has its own block
		out = append(out, web.Pair{Label: "For age", Value: c.Expected.Verdict})
	}
	out = append(out, web.Pair{Label: "Direction", Value: directionWords(c.Direction)})
	return out
}

// noiseWords names where a reliable change index took its measurement
// noise: the clinic's controls, or the borrowed literature r.
func noiseWords(r trends.ReliableChange) string {
	switch {
	case r.SEBasis == trends.BasisClinic:
		return "the clinic's controls (residual SD)"
	case r.Provisional:
		return "literature r (provisional)"
	default:
		return "literature r"
	}
}

func directionWords(d trends.Direction) string {
	switch d {
	case trends.DirectionUp:
		return "higher"
	case trends.DirectionDown:
		return "lower"
	case trends.DirectionSteady:
		return "no clear change"
	default:
		return "not known"
	}
}

// chartMarginDays pads the time axis on both sides so that the first and
// last points are not drawn on the frame.
const chartMarginDays = 60

// extents returns the axis ranges of a course chart: the dates of its
// points padded by chartMarginDays, and a value range holding every point
// and every finite band limit, padded by 8 % of its span (so that a band's
// edges show even when all points lie inside it).
func extents(sr trends.Series, band []opts.MarkAreaNameCoordItem) (x0, x1 string, y0, y1 float64, ok bool) {
	var first, last time.Time
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, pt := range sr.Points {
		d, err := time.Parse(time.DateOnly, pt.Date)
		if err != nil {
			continue
		}
		if first.IsZero() || d.Before(first) {
			first = d
		}
		if d.After(last) {
			last = d
		}
		if pt.Computable {
			lo, hi = math.Min(lo, pt.Value), math.Max(hi, pt.Value)
		}
	}
	for _, b := range band {
		for _, c := range [][]any{b.Coordinate0, b.Coordinate1} {
			if v, isNum := c[1].(float64); isNum {
				lo, hi = math.Min(lo, v), math.Max(hi, v)
			}
		}
	}
	if first.IsZero() || math.IsInf(lo, 0) {
		return "", "", 0, 0, false
	}
	span := hi - lo
	if span <= 0 {
		span = math.Max(math.Abs(hi)*0.1, 1e-3)
	}
	pad := 0.08 * span
	// Round outwards to a step of a half power of ten of the span, so the
	// axis ends on plain numbers.
	step := math.Pow(10, math.Floor(math.Log10(span+2*pad))) / 2
	y0, y1 = math.Floor((lo-pad)/step)*step, math.Ceil((hi+pad)/step)*step
	return first.AddDate(0, 0, -chartMarginDays).Format(time.DateOnly), last.AddDate(0, 0, chartMarginDays).Format(time.DateOnly),
		roundSig(y0), roundSig(y1), true
}
