package server

import (
	"html/template"
	"math"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"sync"
	"time"

	"longwave/metrics"
	"longwave/trends"
	"longwave/web"
)

// cohortTTL is how long a built cohort is reused. The store keeps each
// patient's cohort entry (store.CohortEntries: one query, no visit read),
// and a build judges every entry against the control norms: about 100 ms
// for 5,000 patients, which 50 people opening the page at once must not each
// pay. The server's own uploads drop the cache at once; an ingest from the
// command line shows within cohortTTL.
const cohortTTL = 15 * time.Second

// cohortPageRows is the number of rows a cohort page shows; filters and
// sorting run over all rows on the server before the page is cut.
const cohortPageRows = 200

// cohortCache holds the last built cohort.
type cohortCache struct {
	mu    sync.Mutex
	built time.Time
	c     *trends.Cohort
}

func (cc *cohortCache) drop() {
	cc.mu.Lock()
	cc.c = nil
	cc.mu.Unlock()
}

// buildCohort returns the cohort of every patient, built at most cohortTTL
// ago: the store's kept entries (made for this server's settings, see New)
// judged against the control norms as they are now. Concurrent callers wait
// for one build.
func (s *Server) buildCohort(r *http.Request) (*trends.Cohort, error) {
	cc := &s.cohort
	cc.mu.Lock()
	defer cc.mu.Unlock()
	now := s.now()
	if cc.c != nil && now.Sub(cc.built) < cohortTTL && now.Sub(cc.built) >= 0 {
		return cc.c, nil
	}
	entries, err := s.st.CohortEntries(r.Context())
	if err != nil {
		return nil, err
	}
	norms, err := s.controlNorms(r)
	if err != nil {
		return nil, err
	}
	c, err := trends.CohortFromEntries(entries, trends.CohortOptions{Today: now, SettingsVersion: s.settingsVersion,
		SettingsHash: s.settingsHash, Markers: trends.DefaultMainMarkers(), Norms: norms})
	if err != nil {
		return nil, err
	}
	cc.c, cc.built = &c, now
	return cc.c, nil
}

// cohortQuery is the parsed filter, sort and page of a cohort request.
type cohortQuery struct {
	filter trends.RowFilter
	// verdict is the verdict filter's query value ("" for all).
	verdict string
	sort    string
	desc    bool
	page    int
}

var cohortSorts = []web.Pair{
	{Label: "most overdue first", Value: "-overdue"},
	{Label: "code", Value: "code"},
	{Label: "next due", Value: "next_due"},
	{Label: "last visit, latest first", Value: "-last_visit"},
	{Label: "most visits first", Value: "-visits"},
	{Label: "fewest comparable visits first", Value: "comparable_visits"},
	{Label: "verdict, declines faster than controls first", Value: "verdict"},
}

// cohortVerdicts are the choices of the verdict filter: the query value,
// the words shown, and the direction of trends.RowFilter.Verdict.
var cohortVerdicts = []struct {
	value, label string
	dir          trends.Direction
}{
	{"declines", "declines faster than controls", trends.DirectionDown},
	{"within", "within the controls' range", trends.DirectionSteady},
	{"rises", "rises faster than controls", trends.DirectionUp},
	{"none", "no verdict", trends.DirectionUnknown},
}

func parseCohortQuery(q url.Values) (cohortQuery, error) {
	cq := cohortQuery{page: 1, sort: "overdue", desc: true}
	cq.filter.Overdue = q.Get("overdue") == "1" || q.Get("overdue") == "true"
	cq.filter.Flagged = q.Get("flagged") == "1" || q.Get("flagged") == "true"
	cq.filter.ReliableChange = q.Get("reliable") == "1" || q.Get("reliable") == "true"
	if v := q.Get("verdict"); v != "" {
		for _, c := range cohortVerdicts {
			if c.value == v {
				cq.verdict, cq.filter.Verdict = v, c.dir
			}
		}
		if cq.verdict == "" {
			return cq, problem(http.StatusBadRequest, "unknown verdict "+strconv.Quote(v)+": want declines, within, rises or none")
		}
	}
	if s := q.Get("sort"); s != "" {
		cq.desc = s[0] == '-'
		if cq.desc {
			s = s[1:]
		}
		cq.sort = s
	}
	if err := trends.SortRows(nil, cq.sort, cq.desc); err != nil {
		return cq, problem(http.StatusBadRequest, "unknown sort order "+strconv.Quote(q.Get("sort"))+": want code, overdue, last_visit, next_due, visits, comparable_visits or verdict, with - for descending")
	}
	if p := q.Get("page"); p != "" {
		n, err := strconv.Atoi(p)
		if err != nil || n < 1 || n > 1_000_000 {
			return cq, problem(http.StatusBadRequest, "page must be a whole number from 1")
		}
		cq.page = n
	}
	return cq, nil
}

func (cq cohortQuery) sortValue() string {
	if cq.desc {
		return "-" + cq.sort
	}
	return cq.sort
}

// values renders the query back (page 0: none).
func (cq cohortQuery) values(page int) url.Values {
	v := url.Values{}
	if cq.filter.Overdue {
		v.Set("overdue", "1")
	}
	if cq.filter.Flagged {
		v.Set("flagged", "1")
	}
	if cq.filter.ReliableChange {
		v.Set("reliable", "1")
	}
	if cq.verdict != "" {
		v.Set("verdict", cq.verdict)
	}
	v.Set("sort", cq.sortValue())
	if page > 1 {
		v.Set("page", strconv.Itoa(page))
	}
	return v
}

// cohortRows filters and sorts a copy of the cohort's rows.
// queriedCohort builds the cohort and the rows the request's filters and
// sort select (every row, no paging): the JSON API and the CSV export.
func (s *Server) queriedCohort(r *http.Request) (*trends.Cohort, cohortQuery, []trends.CohortRow, error) {
	cq, err := parseCohortQuery(r.URL.Query())
	if err != nil {
		return nil, cq, nil, err
	}
	c, err := s.buildCohort(r)
	if err != nil {
		return nil, cq, nil, err
	}
	rows, err := cohortRows(c, cq)
	return c, cq, rows, err
}

func cohortRows(c *trends.Cohort, cq cohortQuery) ([]trends.CohortRow, error) {
	rows := trends.FilterRows(c.Rows, cq.filter)
	if err := trends.SortRows(rows, cq.sort, cq.desc); err != nil {
		return nil, problem(http.StatusBadRequest, "unknown sort order")
	}
	return rows, nil
}

// cohortPage shows the follow-up table, 200 rows a page.
func (s *Server) cohortPage(w http.ResponseWriter, r *http.Request) {
	cq, err := parseCohortQuery(r.URL.Query())
	if err != nil {
		s.fail(w, r, err)
		return
	}
	key := "cohort|" + cq.values(cq.page).Encode()
	body, err := s.cachedBody(key, func() (template.HTML, error) {
		c, err := s.buildCohort(r)
		if err != nil {
			return "", err
		}
		rows, err := cohortRows(c, cq)
		if err != nil {
			return "", err
		}
		return s.tpl.RenderCohortBody(cohortBody(c, cq, rows))
	})
	if err != nil {
		s.fail(w, r, err)
		return
	}
	s.render(w, r, http.StatusOK, &web.CohortPage{Frame: s.frame(r, "Cohort", "/cohort"), Body: body})
}

// cohortBody lays out one page of filtered, sorted rows.
func cohortBody(c *trends.Cohort, cq cohortQuery, rows []trends.CohortRow) *web.CohortBody {
	pages := max(1, (len(rows)+cohortPageRows-1)/cohortPageRows)
	if cq.page > pages {
		cq.page = pages
	}
	lo := (cq.page - 1) * cohortPageRows
	hi := min(len(rows), lo+cohortPageRows)
	page := &web.CohortBody{
		Overdue:     cq.filter.Overdue,
		Flagged:     cq.filter.Flagged,
		Reliable:    cq.filter.ReliableChange,
		Sort:        cq.sortValue(),
		SortOptions: cohortSorts,
		Verdict:     cq.verdict,
		Verdicts:    []web.Pair{{Label: "any verdict", Value: ""}},
		Total:       len(rows),
		CSVURL:      "/cohort.csv?" + cq.values(0).Encode(),
	}
	if pages > 1 {
		page.PageText = "Rows " + strconv.Itoa(lo+1) + " to " + strconv.Itoa(hi) + " (page " + strconv.Itoa(cq.page) + " of " + strconv.Itoa(pages) + ")."
	}
	if cq.page > 1 {
		page.PrevURL = "/cohort?" + cq.values(cq.page-1).Encode()
	}
	if cq.page < pages {
		page.NextURL = "/cohort?" + cq.values(cq.page+1).Encode()
	}
	for _, v := range cohortVerdicts {
		page.Verdicts = append(page.Verdicts, web.Pair{Label: v.label, Value: v.value})
	}
	for _, ref := range c.Markers {
		page.Markers = append(page.Markers, shortTitle(ref.Marker))
	}
	if len(c.Markers) > 0 {
		t := markerTitle(c.Markers[0].Marker)
		page.VerdictOf = strings.ToLower(t[:1]) + t[1:]
		page.VerdictShort = shortTitle(c.Markers[0].Marker)
	}
	page.Rows = make([]web.CohortRow, 0, hi-lo)
	for _, row := range rows[lo:hi] {
		page.Rows = append(page.Rows, cohortRowView(row))
	}
	return page
}

func cohortRowView(row trends.CohortRow) web.CohortRow {
	v := web.CohortRow{
		Code: row.Code, URL: courseURL(row.Code),
		Visits:     web.Cell{Text: strconv.Itoa(row.Visits)},
		Comparable: web.Cell{Text: strconv.Itoa(row.ComparableVisits)},
		LastVisit:  orDash(row.LastVisit), NextDue: orDash(row.NextDue),
		Overdue: row.Overdue,
	}
	if row.Overdue {
		v.OverdueDays = web.Cell{Text: strconv.Itoa(row.DaysOverdue), Unit: "days"}
	} else {
		v.OverdueDays = web.Cell{Text: "–"}
	}
	for _, f := range row.LatestFlags {
		label := ruleText(f.Rule)
		if !contains(v.Flags, label) {
			v.Flags = append(v.Flags, label)
		}
	}
	if len(row.Markers) > 0 {
		m := row.Markers[0]
		v.Spark = sparkLine(m.Values, markerTitle(m.Marker))
		vd := m.Verdict
		switch {
		case !vd.Known:
			v.Verdict, v.VerdictKey, v.VerdictWhy = "no verdict", "none", sentence(peopleText(vd.Reason))
		case vd.Direction == trends.DirectionDown:
			v.Verdict, v.VerdictKey = "declines faster than controls", "down"
		case vd.Direction == trends.DirectionUp:
			v.Verdict, v.VerdictKey = "rises faster than controls", "up"
		default:
			v.Verdict, v.VerdictKey = "within the controls' range", "steady"
		}
		v.Concern = vd.Concern
	}
	for _, m := range row.Markers {
		d := web.Direction{Marker: markerTitle(m.Marker), Text: directionWords(m.Direction), Reliable: m.ReliableChange}
		switch m.Direction {
		case trends.DirectionUp:
			d.Key = "up"
		case trends.DirectionDown:
			d.Key = "down"
		case trends.DirectionSteady:
			d.Key = "steady"
		default:
			d.Key, d.Text = "none", "–"
		}
		v.Directions = append(v.Directions, d)
	}
	return v
}

func orDash(s string) string {
	if s == "" {
		return "–"
	}
	return s
}

// Size of a cohort row's small line (SVG user units = CSS pixels).
const sparkWidth, sparkHeight, sparkPad = 96.0, 22.0, 2.5

// sparkLine draws a marker's comparable values as a small line for the
// cohort table: x by date, y scaled from the lowest to the highest value
// (a flat line mid-height when they are equal), the latest value marked
// with a dot. nil without values; one value is a dot only.
func sparkLine(values []trends.ChangePoint, marker string) *web.Spark {
	var days []float64
	var ys []float64
	var first time.Time
	for _, v := range values {
		d, err := time.Parse(time.DateOnly, v.Date)
		if err != nil {
			continue
		}
		if first.IsZero() {
			first = d
		}
		days = append(days, d.Sub(first).Hours()/24)
		ys = append(ys, v.Value)
	}
	if len(ys) == 0 {
		return nil
	}
	lo, hi := ys[0], ys[0]
	for _, y := range ys {
		lo, hi = math.Min(lo, y), math.Max(hi, y)
	}
	span := days[len(days)-1]
	var pts []string
	var x, y float64
	for i := range ys {
		x = sparkWidth / 2
		if span > 0 {
			x = sparkPad + (sparkWidth-2*sparkPad)*days[i]/span
		}
		y = sparkHeight / 2
		if hi > lo {
			y = sparkPad + (sparkHeight-2*sparkPad)*(hi-ys[i])/(hi-lo)
		}
		pts = append(pts, decimalsDot(x)+","+decimalsDot(y))
	}
	label := marker + ": " + strconv.Itoa(len(ys)) + " comparable " + map[bool]string{true: "visit", false: "visits"}[len(ys) == 1] +
		", from " + sig(ys[0]) + " to " + sig(ys[len(ys)-1])
	return &web.Spark{Points: strings.Join(pts, " "), LastX: decimalsDot(x), LastY: decimalsDot(y), Label: label,
		Width: decimalsDot(sparkWidth), Height: decimalsDot(sparkHeight)}
}

// decimalsDot formats an SVG coordinate (one decimal, ASCII minus).
func decimalsDot(v float64) string { return strconv.FormatFloat(v, 'f', 1, 64) }

// shortTitles are the headline markers' names for narrow column heads
// (PDR is the trade's own abbreviation).
var shortTitles = map[string]string{
	metrics.PDRFrequency:      "PDR",
	metrics.AlphaReactivity:   "Alpha reactivity",
	metrics.ThetaAlphaRatio:   "Theta / alpha",
	metrics.AperiodicExponent: "Aperiodic exponent",
}

func shortTitle(marker string) string {
	if t, ok := shortTitles[marker]; ok {
		return t
	}
	return markerTitle(marker)
}
