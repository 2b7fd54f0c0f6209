package server

import (
	"errors"
	"math"
	"net/http"
	"strconv"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/server/store"
	"longwave/web"
)

// visitID parses the {id} path variable (the route admits digits only).
func visitID(r *http.Request) (int64, error) {
	id, err := strconv.ParseInt(pathVar(r, "id"), 10, 64)
	if err != nil || id <= 0 {
		return 0, problem(http.StatusNotFound, "no such visit")
	}
	return id, nil
}

// loadVisit returns a visit with its patient and display products (a
// missing display is not an error: the page says so).
func (s *Server) loadVisit(r *http.Request) (store.VisitRecord, store.Patient, *metrics.Display, error) {
	id, err := visitID(r)
	if err != nil {
		return store.VisitRecord{}, store.Patient{}, nil, err
	}
	ctx := r.Context()
	v, err := s.st.Visit(ctx, id)
	if errors.Is(err, store.ErrNotFound) {
		return v, store.Patient{}, nil, problem(http.StatusNotFound, "no such visit")
	}
	if err != nil {
		return v, store.Patient{}, nil, err
	}
	p, err := s.st.PatientByID(ctx, v.Visit.PatientID)
	if err != nil {
		return v, p, nil, err
	}
	d, err := s.st.VisitDisplay(ctx, id)
	switch {
	case errors.Is(err, store.ErrNotFound):
		return v, p, nil, nil
	case err != nil:
		return v, p, nil, err
	}
	return v, p, &d, nil
}

// comparable reports whether none of a visit's flags makes it not comparable.
func comparable(flags []metrics.Flag) bool {
	for _, f := range flags {
		if f.Severity == metrics.NotComparable {
			return false
		}
	}
	return true
}

// verdictText says in words whether a visit can be compared: not at all
// (a not-comparable flag on every marker), for some markers only (flags
// naming their markers, such as an interval too wide for one marker), or
// with cautions. The first such reason follows; the flags list has all.
func verdictText(flags []metrics.Flag) string {
	some := ""
	for _, f := range flags {
		if f.Severity != metrics.NotComparable {
			continue
		}
		if len(f.Markers) == 0 {
			return "Not comparable: " + f.Reason
		}
		if some == "" {
			some = f.Reason
		}
	}
	if some != "" {
		return "Not comparable for some markers: " + some
	}
	for _, f := range flags {
		if f.Severity == metrics.Caution {
			return "Comparable, with caution: " + f.Reason
		}
	}
	return "Comparable"
}

func ageText(v store.Visit) string {
	if !v.AgeKnown {
		return "age not known"
	}
	return decimals(v.AgeYears, 1) + " y"
}

// visitPage shows one visit.
func (s *Server) visitPage(w http.ResponseWriter, r *http.Request) {
	v, p, d, err := s.loadVisit(r)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	flags, err := s.visitFlags(r, p, v)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	if err := s.audit(r, store.AuditVisitView, p.Code+" "+v.Visit.Date); err != nil {
		s.fail(w, r, err)
		return
	}
	page := &web.VisitPage{
		Frame:      s.frame(r, "Visit "+p.Code+" "+v.Visit.Date, ""),
		Code:       p.Code,
		CourseURL:  courseURL(p.Code),
		Date:       v.Visit.Date,
		Age:        ageText(v.Visit),
		Verdict:    verdictText(flags),
		Comparable: comparable(flags),
		Flags:      flagViews(flags),
		Conditions: conditionPairs(v.Conditions, v.Quality, false),
		Settings: []web.Pair{
			{Label: "Settings version", Value: v.SettingsVersion},
			{Label: "Settings hash", Value: v.SettingsHash},
			{Label: "Age at visit", Value: ageText(v.Visit)},
			{Label: "Visit notes", Value: orNone(v.Visit.Context)},
		},
		ChartData: map[string]web.Option{},
	}
	for _, m := range v.Markers {
		page.Markers = append(page.Markers, web.MarkerRow{Name: markerTitle(m.Name), Region: regionName(m.Region), State: stateName(m.State), Value: markerCell(m),
			Interval: intervalText(m), Method: methodText(m.Uncertainty)})
		page.HasIntervals = page.HasIntervals || m.Uncertainty != nil
	}
	if !page.HasIntervals && len(v.Markers) > 0 {
		page.NoIntervals = "These markers carry no interval of their own: they were made by settings version " +
			v.SettingsVersion + ", which makes none."
	}
	if d == nil {
		page.NoDisplay = "No spectra or traces are stored for this visit."
	} else {
		addVisitCharts(page, *d)
	}
	s.render(w, r, http.StatusOK, page)
}

// addVisitCharts adds the spectrum and trace charts of each state.
func addVisitCharts(page *web.VisitPage, d metrics.Display) {
	for _, st := range []ingest.EyeState{ingest.EyesClosed, ingest.EyesOpen, ingest.EyesUnknown} {
		sp, ok := pickSpectrum(d.Spectra, st)
		if ok {
			key := "spectrum-" + string(st)
			page.ChartData[key] = spectrumOption(sp)
			caption := "Welch spectrum of the " + regionName(sp.Region) + " region, with the fitted aperiodic line (dashed)."
			if sp.PeakHz > 0 {
				caption += " Peak at " + decimals(sp.PeakHz, 2) + " Hz."
			} else {
				caption += " No distinct peak."
			}
			page.Spectra = append(page.Spectra, web.ChartBox{Key: key, Title: "Spectrum, " + stateName(st), Caption: caption})
		}
		var traces []metrics.Trace
		for _, t := range d.Traces {
			if t.State == st && len(t.Samples) > 0 && t.Rate > 0 {
				traces = append(traces, t)
			}
		}
		if len(traces) > 0 {
			key := "traces-" + string(st)
			opt, bar := traceOption(traces)
			page.ChartData[key] = opt
			page.Traces = append(page.Traces, web.ChartBox{Key: key, Title: "Traces, " + stateName(st), Tall: true,
				Caption: "Common-average reference, filtered as analysed; vertical bar " + decimals(bar, 0) + " µV; time in seconds of recording."})
		}
	}
	if len(page.Spectra) == 0 && len(page.Traces) == 0 {
		page.NoDisplay = "No spectra or traces are stored for this visit."
	}
}

// pickSpectrum prefers the posterior region's spectrum of a state.
func pickSpectrum(all []metrics.Spectrum, st ingest.EyeState) (metrics.Spectrum, bool) {
	var found *metrics.Spectrum
	for i := range all {
		sp := &all[i]
		if sp.State != st || len(sp.Freqs) == 0 || len(sp.Freqs) != len(sp.Power) {
			continue
		}
		if sp.Region == metrics.RegionPosterior {
			return *sp, true
		}
		if found == nil {
			found = sp
		}
	}
	if found == nil {
		return metrics.Spectrum{}, false
	}
	return *found, true
}

func axisStyle() *web.AxisLine {
	return &web.AxisLine{Show: true, LineStyle: &web.LineStyle{Color: web.ColourAxis}}
}

func gridLines() *web.SplitLine {
	return &web.SplitLine{Show: true, LineStyle: &web.LineStyle{Color: web.ColourGridLine}}
}

// spectrumOption draws power and aperiodic fit over frequency on a log
// power axis, with the peak marked.
func spectrumOption(sp metrics.Spectrum) web.Option {
	power := make([][2]float64, 0, len(sp.Freqs))
	fit := make([][2]float64, 0, len(sp.Freqs))
	for i, f := range sp.Freqs {
		if sp.Power[i] > 0 {
			power = append(power, [2]float64{round(f, 3), roundSig(sp.Power[i])})
		}
		if i < len(sp.Aperiodic) && sp.Aperiodic[i] > 0 {
			fit = append(fit, [2]float64{round(f, 3), roundSig(sp.Aperiodic[i])})
		}
	}
	ps := web.Series{Type: "line", Name: "power", Data: power, ShowSymbol: web.Bool(false),
		LineStyle: &web.LineStyle{Color: web.ColourLine, Width: 1.6}, ItemStyle: &web.ItemStyle{Color: web.ColourLine}}
	if sp.PeakHz > 0 && sp.PeakPower > 0 {
		ps.MarkPoint = &web.MarkPoint{Symbol: "pin", SymbolSize: 38,
			ItemStyle: &web.ItemStyle{Color: web.ColourPeak},
			Label:     &web.Label{Show: true, Color: "#fff", FontSize: 10},
			Data: []web.MarkPointDatum{{Name: "peak", Coord: [2]any{round(sp.PeakHz, 3), roundSig(sp.PeakPower)},
				Value: decimals(sp.PeakHz, 1)}}}
	}
	series := []web.Series{ps}
	if len(fit) > 0 {
		series = append(series, web.Series{Type: "line", Name: "aperiodic fit", Data: fit, ShowSymbol: web.Bool(false),
			LineStyle: &web.LineStyle{Color: web.ColourFit, Width: 1.4, Type: "dashed"}, ItemStyle: &web.ItemStyle{Color: web.ColourFit}})
	}
	return web.Option{
		UseUTC:  true,
		Grid:    web.Grid{Left: 12, Right: 16, Top: 34, Bottom: 10, ContainLabel: true},
		Tooltip: web.Tooltip{Trigger: "item", Confine: true},
		Legend:  &web.Legend{Show: true, Top: 4, Left: "center"},
		XAxis:   web.Axis{Type: "value", Name: "Hz", Min: 1, Max: 45, AxisLine: axisStyle(), SplitLine: gridLines()},
		YAxis:   web.Axis{Type: "log", Name: "µV²/Hz", LogBase: 10, AxisLine: axisStyle(), SplitLine: gridLines()},
		Series:  series,
	}
}

// traceScales are the bar heights offered, in µV: the one nearest a third of
// the spacing between channels is drawn.
var traceScales = []float64{10, 20, 50, 100, 200, 500, 1000}

// traceOption stacks the channels of one state with a µV scale bar at the
// end and a time axis in seconds of recording. It returns the bar height.
func traceOption(traces []metrics.Trace) (web.Option, float64) {
	// Spacing: twice the largest 98th-percentile-like amplitude is robust
	// enough for display: use the largest absolute sample after dropping
	// the top 1 % of each channel.
	amp := 0.0
	for _, t := range traces {
		amp = math.Max(amp, robustPeak(t.Samples))
	}
	spacing := math.Max(2*amp, 20)
	bar := traceScales[0]
	for _, b := range traceScales {
		if b <= spacing*0.6 {
			bar = b
		}
	}
	start := traces[0].Start
	var series []web.Series
	for i, t := range traces {
		off := float64(len(traces)-1-i) * spacing
		pts := make([][2]float64, len(t.Samples))
		for j, v := range t.Samples {
			pts[j] = [2]float64{round(t.Start+float64(j)/t.Rate, 4), round(float64(v)+off, 2)}
		}
		colour := web.ColourTraceClose
		if t.State == ingest.EyesOpen {
			colour = web.ColourTraceOpen
		}
		series = append(series, web.Series{Type: "line", Name: t.Channel, Data: pts, ShowSymbol: web.Bool(false),
			LineStyle: &web.LineStyle{Color: colour, Width: 0.9}, ItemStyle: &web.ItemStyle{Color: colour},
			EndLabel: &web.Label{Show: true, Formatter: "{a}", Color: web.ColourAxis}, Silent: true, Sampling: "lttb"})
	}
	end := start
	for _, t := range traces {
		end = math.Max(end, t.Start+float64(len(t.Samples))/t.Rate)
	}
	x := round(end+0.25, 3)
	series = append(series, web.Series{Type: "line", Name: decimals(bar, 0) + " µV", ShowSymbol: web.Bool(false),
		Data:      [][2]float64{{x, -1.4 * spacing}, {x, -1.4*spacing + bar}},
		LineStyle: &web.LineStyle{Color: web.ColourScale, Width: 3}, ItemStyle: &web.ItemStyle{Color: web.ColourScale},
		EndLabel: &web.Label{Show: true, Formatter: "{a}", Color: web.ColourScale}, Silent: true})
	return web.Option{
		Grid:    web.Grid{Left: 10, Right: 70, Top: 12, Bottom: 10, ContainLabel: true},
		Tooltip: web.Tooltip{Trigger: "none"},
		XAxis: web.Axis{Type: "value", Name: "s", Min: round(start, 3), SplitLine: gridLines(),
			AxisLine: &web.AxisLine{Show: true, OnZero: web.Bool(false), LineStyle: &web.LineStyle{Color: web.ColourAxis}}},
		YAxis: web.Axis{Type: "value", Min: round(-1.5*spacing, 2), Max: round(float64(len(traces))*spacing-spacing/2, 2),
			AxisLabel: &web.AxisLabel{Show: false}, SplitLine: &web.SplitLine{Show: false}},
		Series: series,
	}, bar
}

// robustPeak is the absolute amplitude exceeded by 1 % of the samples.
func robustPeak(x []float32) float64 {
	if len(x) == 0 {
		return 0
	}
	// A 64-bin histogram of |x| up to the maximum keeps this O(n).
	maxAbs := 0.0
	for _, v := range x {
		maxAbs = math.Max(maxAbs, math.Abs(float64(v)))
	}
	if maxAbs == 0 {
		return 0
	}
	const bins = 64
	var h [bins + 1]int
	for _, v := range x {
		h[int(math.Abs(float64(v))/maxAbs*bins)]++
	}
	keep := len(x) - len(x)/100
	n := 0
	for i := 0; i <= bins; i++ {
		n += h[i]
		if n >= keep {
			return float64(i+1) / bins * maxAbs
		}
	}
	return maxAbs
}

func round(v float64, d int) float64 {
	p := math.Pow(10, float64(d))
	return math.Round(v*p) / p
}

// roundSig keeps 4 significant digits (for JSON size; the page shows 3).
func roundSig(v float64) float64 {
	if v == 0 || math.IsNaN(v) || math.IsInf(v, 0) {
		return v
	}
	e := math.Floor(math.Log10(math.Abs(v)))
	p := math.Pow(10, 3-e)
	return math.Round(v*p) / p
}
