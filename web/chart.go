package web

// Chart options are built as Go values and marshalled with encoding/json,
// field names as ECharts 5.4.3 spells them (echarts.apache.org option
// reference, version 5). Nothing in them is a function: the tooltip text of
// a point travels as data (Point.Tip, lines of plain text) and our static
// script escapes it when it builds the tooltip. The charting script reads
// no option that could load a remote resource (no image symbols, no
// background images).

// Palette of longwave's charts: quiet blues and greys of our own, with a
// muted plum for visits that cannot be compared (no red/amber/green).
const (
	ColourLine       = "#2f5873" // comparable visits, spectra
	ColourApart      = "#7b4f6e" // visits that cannot be compared
	ColourBand       = "rgba(111, 145, 168, 0.18)"
	ColourBandEdge   = "rgba(111, 145, 168, 0.55)"
	ColourFit        = "#8c8577" // aperiodic fit
	ColourPeak       = "#1d3a4d"
	ColourTraceOpen  = "#4f6d5f"
	ColourScale      = "#222b30"
	ColourAxis       = "#5d6b73"
	ColourGridLine   = "#e2e0da"
	ColourTraceClose = "#2f5873"
)

// Option is the root of an ECharts option.
type Option struct {
	Animation bool     `json:"animation"`
	UseUTC    bool     `json:"useUTC"`
	Color     []string `json:"color,omitempty"`
	Grid      Grid     `json:"grid"`
	Tooltip   Tooltip  `json:"tooltip"`
	Legend    *Legend  `json:"legend,omitempty"`
	XAxis     Axis     `json:"xAxis"`
	YAxis     Axis     `json:"yAxis"`
	Series    []Series `json:"series"`
}

// Grid places the plot inside the chart box, in pixels.
type Grid struct {
	Left         int  `json:"left"`
	Right        int  `json:"right"`
	Top          int  `json:"top"`
	Bottom       int  `json:"bottom"`
	ContainLabel bool `json:"containLabel"`
}

// Tooltip settings; the formatter is added by our static script.
type Tooltip struct {
	Trigger string `json:"trigger"`
	Confine bool   `json:"confine"`
}

// Legend of the series names.
type Legend struct {
	Show bool   `json:"show"`
	Top  int    `json:"top"`
	Left string `json:"left,omitempty"`
}

// Axis is an x or y axis. Min and Max are numbers, ISO dates or nil.
type Axis struct {
	Type         string     `json:"type"` // "time", "value", "log"
	Name         string     `json:"name,omitempty"`
	NameLocation string     `json:"nameLocation,omitempty"`
	NameGap      int        `json:"nameGap,omitempty"`
	Min          any        `json:"min,omitempty"`
	Max          any        `json:"max,omitempty"`
	Scale        bool       `json:"scale,omitempty"`
	LogBase      float64    `json:"logBase,omitempty"`
	AxisLabel    *AxisLabel `json:"axisLabel,omitempty"`
	SplitLine    *SplitLine `json:"splitLine,omitempty"`
	AxisLine     *AxisLine  `json:"axisLine,omitempty"`
}

// AxisLabel settings.
type AxisLabel struct {
	Show  bool   `json:"show"`
	Color string `json:"color,omitempty"`
}

// SplitLine settings.
type SplitLine struct {
	Show      bool       `json:"show"`
	LineStyle *LineStyle `json:"lineStyle,omitempty"`
}

// AxisLine settings. OnZero false keeps an x axis at the bottom of the plot
// when the y range holds 0 (ECharts draws it through y = 0 by default).
type AxisLine struct {
	Show      bool       `json:"show"`
	OnZero    *bool      `json:"onZero,omitempty"`
	LineStyle *LineStyle `json:"lineStyle,omitempty"`
}

// Series is one line or scatter series.
type Series struct {
	Type       string     `json:"type"` // "line" or "scatter"
	Name       string     `json:"name"`
	Data       any        `json:"data"` // []Point or [][2]float64
	ShowSymbol *bool      `json:"showSymbol,omitempty"`
	Symbol     string     `json:"symbol,omitempty"`
	SymbolSize float64    `json:"symbolSize,omitempty"`
	ItemStyle  *ItemStyle `json:"itemStyle,omitempty"`
	LineStyle  *LineStyle `json:"lineStyle,omitempty"`
	MarkArea   *MarkArea  `json:"markArea,omitempty"`
	MarkPoint  *MarkPoint `json:"markPoint,omitempty"`
	EndLabel   *Label     `json:"endLabel,omitempty"`
	Label      *Label     `json:"label,omitempty"`
	Silent     bool       `json:"silent,omitempty"`
	Z          int        `json:"z,omitempty"`
	Sampling   string     `json:"sampling,omitempty"`
}

// Point is a data item: [x, y] with the tooltip lines of the point.
type Point struct {
	Value [2]any   `json:"value"`
	Tip   []string `json:"tip,omitempty"`
}

// ItemStyle of points or areas.
type ItemStyle struct {
	Color       string  `json:"color,omitempty"`
	BorderColor string  `json:"borderColor,omitempty"`
	BorderWidth float64 `json:"borderWidth,omitempty"`
	Opacity     float64 `json:"opacity,omitempty"`
}

// LineStyle of lines.
type LineStyle struct {
	Color   string  `json:"color,omitempty"`
	Width   float64 `json:"width,omitempty"`
	Type    string  `json:"type,omitempty"` // "solid", "dashed", "dotted"
	Opacity float64 `json:"opacity,omitempty"`
}

// Label of a series end, a point or a mark.
type Label struct {
	Show      bool   `json:"show"`
	Formatter string `json:"formatter,omitempty"` // template text such as "{a}", never a function
	Position  string `json:"position,omitempty"`
	Color     string `json:"color,omitempty"`
	FontSize  int    `json:"fontSize,omitempty"`
}

// MarkArea shades rectangles, each given by two corners.
type MarkArea struct {
	Silent    bool                `json:"silent"`
	ItemStyle *ItemStyle          `json:"itemStyle,omitempty"`
	Label     *Label              `json:"label,omitempty"`
	Data      [][2]MarkAreaCorner `json:"data"`
}

// MarkAreaCorner is a corner of a shaded rectangle: [x, y], where a nil x
// means the edge of the axis (ECharts draws a missing coordinate at the
// axis extent).
type MarkAreaCorner struct {
	Name  string `json:"name,omitempty"`
	Coord [2]any `json:"coord"`
}

// MarkPoint marks points of a series, such as a spectral peak.
type MarkPoint struct {
	Symbol     string           `json:"symbol,omitempty"`
	SymbolSize float64          `json:"symbolSize,omitempty"`
	ItemStyle  *ItemStyle       `json:"itemStyle,omitempty"`
	Label      *Label           `json:"label,omitempty"`
	Data       []MarkPointDatum `json:"data"`
}

// MarkPointDatum is one marked point with its label text.
type MarkPointDatum struct {
	Name  string `json:"name"`
	Coord [2]any `json:"coord"`
	Value string `json:"value"`
}

// Bool returns a pointer to b for optional fields.
func Bool(b bool) *bool { return &b }
