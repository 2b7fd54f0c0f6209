package web

import (
	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// Charts are built with go-echarts (github.com/go-echarts/go-echarts/v2,
// v2.6.7, which targets echarts 5.4.3): charts.NewLine, its typed global
// options and series options, and BaseConfiguration.JSON for the option
// object. Nothing of go-echarts' rendering is used: its HTML and inline
// script would break the page's CSP. The option object reaches the page as
// JSON data, which html/template writes through encoding/json (so <, > and &
// are escaped), and no FuncStr is ever set, so go-echarts' "__f__" function
// markers never come into play.
//
// go-echarts 2.6.7 lacks a few option fields the screens need; they are
// added here, in one place, through go-echarts' own extension point (a
// charts.ConfigurationVisitor, which may rewrite the option object before it
// is handed out):
//
//   - the root option useUTC (dates on a time axis are civil dates, drawn the
//     same in every time zone);
//   - tooltip.confine (the tooltip stays inside the chart box);
//   - per-series endLabel, silent, sampling and z (SingleSeries has none);
//   - the names of the series a switch on the page shows and hides
//     (lwApart, read by charts.js; not an echarts field);
//   - data items with our tooltip lines (Point: go-echarts' LineData has no
//     room for them; SingleSeries.Data is untyped, so WithData sets them).
//
// OptionOf also leaves out the empty title and toolbox objects go-echarts
// always writes.

// Option is one chart's echarts option object, as go-echarts builds it
// with our additions.
type Option map[string]any

// Chart is a go-echarts chart (*charts.Line and the other chart types).
type Chart interface {
	JSON() map[string]interface{}
	Accept(visitor charts.ConfigurationVisitor)
}

// Extras are the option fields go-echarts 2.6.7 has no typed form for.
type Extras struct {
	UseUTC  bool
	Confine bool
	// Series holds the additions of each series, by series index (missing
	// entries add nothing).
	Series []SeriesExtra
	// Toggle names the series a switch on the page shows and hides
	// (charts.js reads them from the option's lwApart list, not an echarts
	// field, and removes it before echarts sees the option).
	Toggle []string
}

// SeriesExtra are a series' fields that charts.SingleSeries lacks.
type SeriesExtra struct {
	EndLabel *opts.Label `json:"endLabel,omitempty"`
	Silent   bool        `json:"silent,omitempty"`
	Sampling string      `json:"sampling,omitempty"` // "lttb", "minmax", …
	Z        int         `json:"z,omitempty"`
}

// Point is a data item [x, y] with the tooltip lines of the point (plain
// text; charts.js escapes them).
type Point struct {
	Value [2]any   `json:"value"`
	Tip   []string `json:"tip,omitempty"`
}

// WithData sets a series' data to values go-echarts has no data type for
// ([]Point, or [][2]float64 pairs for a value x axis).
func WithData(data any) charts.SeriesOpts {
	return func(s *charts.SingleSeries) { s.Data = data }
}

// OptionOf returns c's option object with the additions of x.
func OptionOf(c Chart, x Extras) Option {
	c.Accept(extrasVisitor{x: x})
	return Option(c.JSON())
}

// extrasVisitor adds Extras to the option object go-echarts builds.
type extrasVisitor struct {
	charts.BaseConfigurationVisitor
	x Extras
}

type seriesWithExtras struct {
	charts.SingleSeries
	SeriesExtra
}

type tooltipWithConfine struct {
	opts.Tooltip
	Confine bool `json:"confine,omitempty"`
}

func (v extrasVisitor) VisitSeriesOpt(series charts.MultiSeries) interface{} {
	out := make([]seriesWithExtras, len(series))
	for i, s := range series {
		out[i].SingleSeries = s
		if i < len(v.x.Series) {
			out[i].SeriesExtra = v.x.Series[i]
		}
	}
	return out
}

func (v extrasVisitor) VisitTooltipOpt(t opts.Tooltip) interface{} {
	return tooltipWithConfine{Tooltip: t, Confine: v.x.Confine}
}

func (v extrasVisitor) Visit(option map[string]interface{}) {
	delete(option, "title")
	delete(option, "toolbox")
	if v.x.UseUTC {
		option["useUTC"] = true
	}
	if len(v.x.Toggle) > 0 {
		option["lwApart"] = v.x.Toggle
	}
}

// NewChart returns a go-echarts line chart with the settings every
// longwave chart shares: no animation, our palette, no legend unless asked.
func NewChart() *charts.Line {
	c := charts.NewLine()
	c.SetGlobalOptions(
		charts.WithAnimation(false),
		charts.WithColorsOpts(opts.Colors{ColourLine, ColourFit, ColourApart, ColourTraceOpen}),
		charts.WithLegendOpts(opts.Legend{Show: opts.Bool(false)}),
	)
	return c
}

// AxisLine is the axis line of our charts; onZero false keeps an x axis at
// the bottom when the y range holds 0.
func AxisLine() *opts.AxisLine {
	return &opts.AxisLine{Show: opts.Bool(true), OnZero: opts.Bool(false), LineStyle: &opts.LineStyle{Color: ColourAxis}}
}

// GridLines are the faint lines across the plot at the ticks.
func GridLines() *opts.SplitLine {
	return &opts.SplitLine{Show: opts.Bool(true), LineStyle: &opts.LineStyle{Color: ColourGridLine}}
}
