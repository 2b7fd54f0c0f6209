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

	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
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
			return "Not comparable: " + peopleText(f.Reason)
		}
		if some == "" {
			some = peopleText(f.Reason)
		}
	}
	if some != "" {
		return "Not comparable for some markers: " + some
	}
	for _, f := range flags {
		if f.Severity == metrics.Caution {
			return "Comparable, with caution: " + peopleText(f.Reason)
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
	if len(v.Recordings) > 0 {
		page.Traces = traceViewer(v, s.visitSettings(v))
	}
	if d == nil {
		page.NoDisplay = "No spectra or traces are stored for this visit."
	} else {
		addVisitCharts(page, *d)
	}
	s.render(w, r, http.StatusOK, page)
}

// addVisitCharts adds the spectrum chart of each state (the traces are the
// viewer's, see traces.go).
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
	}
	if len(page.Spectra) == 0 {
		page.NoDisplay = "No spectra are stored for this visit."
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
	c := web.NewChart()
	c.SetGlobalOptions(
		charts.WithGridOpts(opts.Grid{Left: "12", Right: "16", Top: "34", Bottom: "10", ContainLabel: opts.Bool(true)}),
		charts.WithTooltipOpts(opts.Tooltip{Trigger: "item"}),
		charts.WithLegendOpts(opts.Legend{Show: opts.Bool(true), Top: "4", Left: "center"}),
		charts.WithXAxisOpts(opts.XAxis{Type: "value", Name: "Hz", Min: 1, Max: 45, AxisLine: web.AxisLine(), SplitLine: web.GridLines()}),
		charts.WithYAxisOpts(opts.YAxis{Type: "log", Name: "µV²/Hz", AxisLine: web.AxisLine(), SplitLine: web.GridLines()}),
	)
	powerOpts := []charts.SeriesOpts{web.WithData(power),
		charts.WithLineChartOpts(opts.LineChart{ShowSymbol: opts.Bool(false)}),
		charts.WithLineStyleOpts(opts.LineStyle{Color: web.ColourLine, Width: 1.6}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: web.ColourLine})}
	if sp.PeakHz > 0 && sp.PeakPower > 0 {
		powerOpts = append(powerOpts,
			charts.WithMarkPointStyleOpts(opts.MarkPointStyle{Label: &opts.Label{Show: opts.Bool(true), Color: "#fff", FontSize: 10}}),
			charts.WithMarkPointNameCoordItemOpts(opts.MarkPointNameCoordItem{Name: "peak", Symbol: "pin", SymbolSize: 38,
				Coordinate: []any{round(sp.PeakHz, 3), roundSig(sp.PeakPower)}, Value: decimals(sp.PeakHz, 1),
				ItemStyle: &opts.ItemStyle{Color: web.ColourPeak}}))
	}
	c.AddSeries("power", nil, powerOpts...)
	if len(fit) > 0 {
		c.AddSeries("aperiodic fit", nil, web.WithData(fit),
			charts.WithLineChartOpts(opts.LineChart{ShowSymbol: opts.Bool(false)}),
			charts.WithLineStyleOpts(opts.LineStyle{Color: web.ColourFit, Width: 1.4, Type: "dashed"}),
			charts.WithItemStyleOpts(opts.ItemStyle{Color: web.ColourFit}))
	}
	return web.OptionOf(c, web.Extras{Confine: true})
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
