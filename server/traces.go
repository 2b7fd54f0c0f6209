package server

import (
	"context"
	"errors"
	"io/fs"
	"math"
	"net/http"
	"net/url"
	"strconv"
	"sync"

	"longwave/metrics"
	"longwave/server/store"
	"longwave/web"

	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// The whole recording, page by page: GET /api/v1/visits/{id}/traces
// (README.md, "JSON API"). The stored recording is decoded and analysed on
// the first request of a visit (metrics.NewTraceSource, the analysis the
// markers came from) and kept in a bounded cache; every page after that is
// cut from memory.

// Limits of a traces request.
const (
	// traceSecondsDefault is one page: 10 s, the page of routine EEG
	// reading (common practice).
	traceSecondsDefault = 10
	// traceSecondsMax bounds one answer's time span.
	traceSecondsMax = 60
	// tracePointsPerRow is the most points one row carries: a page of
	// 1,400 px draws no more, and the answer stays small.
	tracePointsPerRow = 2000
	// tracePointsPerAnswer bounds the points of all rows together, so that
	// an answer stays under 2 MB whatever the channel count (a sample is at
	// most 9 bytes of JSON: "-12345.6,").
	tracePointsPerAnswer = 200_000
	// traceCacheBytes bounds the samples the cache holds: a 30-minute,
	// 21-channel, 500 Hz visit takes 95 MB (recorded and analysed), so four
	// such visits fit.
	traceCacheBytes = 400 << 20
)

// traceHeights are the row heights offered, in µV between neighbouring
// rows' baselines (the viewer picks the first that holds the page).
var traceHeights = []float64{20, 50, 100, 200, 500, 1000}

// traceViewer is the visit page's viewer: its source, and a chart frame
// built with go-echarts (grid, a seconds axis, a hidden µV axis) to which
// static/traces.js adds each page's rows, windows and eye states.
func traceViewer(v store.VisitRecord, set metrics.Settings) *web.TraceViewer {
	c := web.NewChart()
	c.SetGlobalOptions(
		charts.WithGridOpts(opts.Grid{Left: "58", Right: "64", Top: "22", Bottom: "30"}),
		charts.WithTooltipOpts(opts.Tooltip{Show: opts.Bool(false)}),
		charts.WithXAxisOpts(opts.XAxis{Type: "value", Name: "s", NameGap: 8, SplitNumber: 10, AxisLine: web.AxisLine(),
			SplitLine: web.GridLines(), AxisLabel: &opts.AxisLabel{Color: web.ColourAxis}}),
		charts.WithYAxisOpts(opts.YAxis{Type: "value", AxisLine: &opts.AxisLine{Show: opts.Bool(false)},
			SplitLine: &opts.SplitLine{Show: opts.Bool(false)}, AxisLabel: &opts.AxisLabel{Color: web.ColourAxis, FontSize: 11}}),
	)
	return &web.TraceViewer{
		Source:   "/api/v1/visits/" + itoa(v.Visit.ID) + "/traces",
		Duration: decimals(v.Conditions.Duration, 0) + " s",
		Seconds:  v.Conditions.Duration,
		Unshaded: "the first " + decimals(set.PeriodSkipSeconds, 1) + " s after each change of eye state, and the last seconds of a period too short for another " +
			decimals(set.EpochSeconds, 1) + " s window",
		Frame: web.OptionOf(c, web.Extras{}),
		Colours: web.TraceColours{Trace: web.ColourTraceClose, Bad: web.ColourBadTrace, Kept: web.ColourKept, Rejected: web.ColourRejected, Edge: web.ColourWindowEdge,
			Closed: web.ColourStateClose, Open: web.ColourStateOpen, Scale: web.ColourScale, Axis: web.ColourAxis},
		Heights: traceHeights,
		Montages: []web.TraceChoice{{Value: metrics.MontageAverage, Label: "common average"},
			{Value: metrics.MontageBipolar, Label: "longitudinal bipolar"}},
		Signals: []web.TraceChoice{{Value: "1", Label: "as analysed (filtered)"}, {Value: "0", Label: "as recorded"}},
	}
}

// traceQuery is a parsed traces request.
type traceQuery struct {
	from, seconds float64
	montage       string
	filtered      bool
}

func parseTraceQuery(q url.Values) (traceQuery, error) {
	tq := traceQuery{seconds: traceSecondsDefault, montage: metrics.MontageAverage, filtered: true}
	num := func(name string, dst *float64) error {
		v := q.Get(name)
		if v == "" {
			return nil
		}
		f, err := strconv.ParseFloat(v, 64)
		if err != nil || math.IsNaN(f) || math.IsInf(f, 0) {
			return problem(http.StatusBadRequest, name+" must be a number of seconds, not "+strconv.Quote(v))
		}
		*dst = f
		return nil
	}
	if err := num("from", &tq.from); err != nil {
		return tq, err
	}
	if tq.from < 0 {
		return tq, problem(http.StatusBadRequest, "from must be 0 or more seconds")
	}
	if err := num("seconds", &tq.seconds); err != nil {
		return tq, err
	}
	if tq.seconds < 1 || tq.seconds > traceSecondsMax {
		return tq, problem(http.StatusBadRequest, "seconds must be from 1 to "+strconv.Itoa(traceSecondsMax))
	}
	switch m := q.Get("montage"); m {
	case "", metrics.MontageAverage:
	case metrics.MontageBipolar:
		tq.montage = m
	default:
		return tq, problem(http.StatusBadRequest, "montage must be average or bipolar, not "+strconv.Quote(m))
	}
	switch f := q.Get("filtered"); f {
	case "", "1":
	case "0":
		tq.filtered = false
	default:
		return tq, problem(http.StatusBadRequest, "filtered must be 1 (as analysed) or 0 (as recorded), not "+strconv.Quote(f))
	}
	return tq, nil
}

// apiTraces is the answer of GET /api/v1/visits/{id}/traces. Keys stay
// keys (reason, state); reason_text and state_text are the same in words.
type apiTraces struct {
	From       float64       `json:"from"`
	Seconds    float64       `json:"seconds"`
	SampleRate float64       `json:"sample_rate"`
	Montage    string        `json:"montage"`
	Filtered   bool          `json:"filtered"`
	Duration   float64       `json:"duration"`
	Channels   []apiTraceRow `json:"channels"`
	Windows    []apiWindow   `json:"windows"`
	States     []apiState    `json:"states"`
}

type apiTraceRow struct {
	Label   string      `json:"label"`
	Bad     bool        `json:"bad"`
	Samples jsonSamples `json:"samples"`
}

type apiWindow struct {
	Start      float64 `json:"start"`
	End        float64 `json:"end"`
	Kept       bool    `json:"kept"`
	Reason     string  `json:"reason"`
	ReasonText string  `json:"reason_text,omitempty"`
	State      string  `json:"state"`
	Region     string  `json:"region,omitempty"`
	RegionText string  `json:"region_text,omitempty"`
}

type apiState struct {
	Start     float64 `json:"start"`
	End       float64 `json:"end"`
	State     string  `json:"state"`
	StateText string  `json:"state_text"`
}

// jsonSamples writes µV to 0.1 µV (below what a page can draw), and null
// where the recording has no data.
type jsonSamples []float32

func (x jsonSamples) MarshalJSON() ([]byte, error) {
	b := make([]byte, 0, 7*len(x)+2)
	b = append(b, '[')
	for i, v := range x {
		if i > 0 {
			b = append(b, ',')
		}
		if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
			b = append(b, "null"...)
			continue
		}
		b = strconv.AppendFloat(b, math.Round(float64(v)*10)/10, 'f', -1, 64)
	}
	return append(b, ']'), nil
}

func (s *Server) apiVisitTraces(w http.ResponseWriter, r *http.Request) {
	tq, err := parseTraceQuery(r.URL.Query())
	if err != nil {
		s.fail(w, r, err)
		return
	}
	id, err := visitID(r)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	ctx := r.Context()
	v, err := s.st.Visit(ctx, id)
	if errors.Is(err, store.ErrNotFound) {
		s.fail(w, r, problem(http.StatusNotFound, "no such visit"))
		return
	}
	if err != nil {
		s.fail(w, r, err)
		return
	}
	p, err := s.st.PatientByID(ctx, v.Visit.PatientID)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	src, err := s.traces.get(ctx, v, s.traceBuilder(v))
	if errors.Is(err, fs.ErrNotExist) {
		s.fail(w, r, &appError{status: http.StatusNotFound, msg: "the recording file of this visit is not in the data folder", cause: err})
		return
	}
	if err != nil {
		s.fail(w, r, err)
		return
	}
	if tq.from >= src.Duration {
		s.fail(w, r, problem(http.StatusBadRequest, "from is past the end of the recording ("+decimals(src.Duration, 1)+" s)"))
		return
	}
	rows := max(len(src.Labels()), len(metrics.BipolarPairs))
	page, err := src.Page(tq.from, tq.seconds, tq.montage, tq.filtered, min(tracePointsPerRow, tracePointsPerAnswer/rows))
	if err != nil {
		s.fail(w, r, problem(http.StatusBadRequest, "cannot cut this page from the recording"))
		return
	}
	if err := s.audit(r, store.AuditVisitView, p.Code+" "+v.Visit.Date+" (traces)"); err != nil {
		s.fail(w, r, err)
		return
	}
	out := apiTraces{From: page.From, Seconds: page.Seconds, SampleRate: page.Rate, Montage: page.Montage,
		Filtered: page.Filtered, Duration: src.Duration, Channels: make([]apiTraceRow, 0, len(page.Channels)),
		Windows: []apiWindow{}, States: []apiState{}}
	for _, ch := range page.Channels {
		out.Channels = append(out.Channels, apiTraceRow{Label: ch.Label, Bad: ch.Bad, Samples: ch.Samples})
	}
	end := tq.from + tq.seconds
	windows := v.Quality.Windows
	if len(windows) == 0 {
		windows = src.Windows // analysed before windows were stored
	}
	for _, wd := range windows {
		if wd.End <= tq.from || wd.Start >= end {
			continue
		}
		aw := apiWindow{Start: wd.Start, End: wd.End, Kept: wd.Kept, Reason: wd.Reason, State: string(wd.State), Region: wd.Region}
		if wd.Reason != "" {
			aw.ReasonText = ruleText(wd.Reason)
		}
		if wd.Region != "" {
			aw.RegionText = regionName(wd.Region)
		}
		out.Windows = append(out.Windows, aw)
	}
	for _, st := range src.Periods {
		if st.End <= tq.from || st.Start >= end {
			continue
		}
		out.States = append(out.States, apiState{Start: st.Start, End: st.End, State: string(st.State), StateText: stateName(st.State)})
	}
	writeJSON(w, http.StatusOK, out)
}

// traceBuilder decodes a visit's stored recording again and analyses it
// with the settings its markers were made with (the pipeline's when that
// version is unknown here).
func (s *Server) traceBuilder(v store.VisitRecord) func(ctx context.Context) (*metrics.TraceSource, error) {
	return func(ctx context.Context) (*metrics.TraceSource, error) {
		set := s.visitSettings(v)
		rec, err := s.pipe.DecodeStored(ctx, v.Visit.ID)
		if err != nil {
			return nil, err
		}
		return metrics.NewTraceSource(rec, set)
	}
}

// visitSettings are the processing settings a visit's markers were made
// with (the pipeline's when that version is unknown here).
func (s *Server) visitSettings(v store.VisitRecord) metrics.Settings {
	set, ok := metrics.ByVersion(v.SettingsVersion)
	if !ok || set.Hash() != v.SettingsHash {
		set = s.pipe.Settings
	}
	return set
}

// traceCache keeps the trace sources of the visits paged most recently,
// up to traceCacheBytes of samples. One build runs at a time (a build takes
// a core for about a second per 30 minutes of recording); requests for a
// visit being built wait for that build.
type traceCache struct {
	mu      sync.Mutex
	entries map[string]*traceEntry
	tick    uint64
	limit   int64 // traceCacheBytes unless a test sets it
	build   sync.Mutex
}

type traceEntry struct {
	ready chan struct{}
	src   *metrics.TraceSource
	err   error
	used  uint64
	bytes int64
}

// traceKey is the visit and the analysis it shows: a reprocessed visit is
// a new key.
func traceKey(v store.VisitRecord) string { return itoa(v.Visit.ID) + "|" + v.SettingsHash }

func (c *traceCache) get(ctx context.Context, v store.VisitRecord, build func(context.Context) (*metrics.TraceSource, error)) (*metrics.TraceSource, error) {
	key := traceKey(v)
	c.mu.Lock()
	if c.entries == nil {
		c.entries = map[string]*traceEntry{}
	}
	c.tick++
	if e, ok := c.entries[key]; ok {
		e.used = c.tick
		c.mu.Unlock()
		select {
		case <-e.ready:
			return e.src, e.err
		case <-ctx.Done():
			return nil, ctx.Err()
		}
	}
	e := &traceEntry{ready: make(chan struct{}), used: c.tick}
	c.entries[key] = e
	c.mu.Unlock()

	c.build.Lock()
	src, err := build(context.WithoutCancel(ctx))
	c.build.Unlock()

	c.mu.Lock()
	e.src, e.err = src, err
	if e.err != nil {
		delete(c.entries, key) // the next request tries again
	} else {
		e.bytes = e.src.Bytes()
		c.evict(key)
	}
	c.mu.Unlock()
	close(e.ready)
	return e.src, e.err
}

// evict drops the least recently used ready sources until the cache holds
// no more than its limit; keep is never dropped. Called with mu held.
func (c *traceCache) evict(keep string) {
	limit := c.limit
	if limit == 0 {
		limit = traceCacheBytes
	}
	for {
		var total int64
		oldest, oldestUse := "", uint64(math.MaxUint64)
		for k, e := range c.entries {
			total += e.bytes
			if k != keep && e.src != nil && e.used < oldestUse {
				oldest, oldestUse = k, e.used
			}
		}
		if total <= limit || oldest == "" {
			return
		}
		delete(c.entries, oldest)
	}
}

// len reports the number of visits cached, for tests.
func (c *traceCache) len() int {
	c.mu.Lock()
	defer c.mu.Unlock()
	return len(c.entries)
}
