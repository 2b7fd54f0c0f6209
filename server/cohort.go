package server

import (
	"html/template"
	"net/http"
	"net/url"
	"strconv"
	"sync"
	"time"

	"longwave/trends"
	"longwave/web"
)

// cohortTTL is how long a built cohort is reused. Building it reads every
// visit of every patient (5,000 patients: a few hundred ms), and 50 people
// opening the page at once must not each pay that. The server's own uploads
// drop the cache at once; an ingest from the command line shows within
// cohortTTL.
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

// cohort returns the cohort of every patient, built at most cohortTTL ago.
// Concurrent callers wait for one build.
func (s *Server) buildCohort(r *http.Request) (*trends.Cohort, error) {
	cc := &s.cohort
	cc.mu.Lock()
	defer cc.mu.Unlock()
	now := s.now()
	if cc.c != nil && now.Sub(cc.built) < cohortTTL && now.Sub(cc.built) >= 0 {
		return cc.c, nil
	}
	refs := trends.DefaultMainMarkers()
	names := make([]string, 0, len(refs))
	for _, ref := range refs {
		names = append(names, ref.Marker)
	}
	all, err := s.st.AllVisitRecords(r.Context(), names...)
	if err != nil {
		return nil, err
	}
	norms, err := s.controlNorms(r)
	if err != nil {
		return nil, err
	}
	c := trends.BuildCohort(all, trends.CohortOptions{Today: now, SettingsVersion: s.settingsVersion, SettingsHash: s.settingsHash,
		Markers: refs, Norms: norms})
	cc.c, cc.built = &c, now
	return cc.c, nil
}

// cohortQuery is the parsed filter, sort and page of a cohort request.
type cohortQuery struct {
	filter trends.RowFilter
	sort   string
	desc   bool
	page   int
}

var cohortSorts = []web.Pair{
	{Label: "most overdue first", Value: "-overdue"},
	{Label: "code", Value: "code"},
	{Label: "next due", Value: "next_due"},
	{Label: "last visit, latest first", Value: "-last_visit"},
	{Label: "most visits first", Value: "-visits"},
	{Label: "fewest comparable visits first", Value: "comparable_visits"},
}

func parseCohortQuery(q url.Values) (cohortQuery, error) {
	cq := cohortQuery{page: 1, sort: "overdue", desc: true}
	cq.filter.Overdue = q.Get("overdue") == "1" || q.Get("overdue") == "true"
	cq.filter.Flagged = q.Get("flagged") == "1" || q.Get("flagged") == "true"
	cq.filter.ReliableChange = q.Get("reliable") == "1" || q.Get("reliable") == "true"
	if s := q.Get("sort"); s != "" {
		cq.desc = s[0] == '-'
		if cq.desc {
			s = s[1:]
		}
		cq.sort = s
	}
	if err := trends.SortRows(nil, cq.sort, cq.desc); err != nil {
		return cq, problem(http.StatusBadRequest, "unknown sort order "+strconv.Quote(q.Get("sort"))+": want code, overdue, last_visit, next_due, visits or comparable_visits, with - for descending")
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
	for _, ref := range c.Markers {
		page.Markers = append(page.Markers, markerTitle(ref.Marker))
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
