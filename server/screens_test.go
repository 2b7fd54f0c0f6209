package server

import (
	"encoding/json"
	"html"
	"net/http"
	"net/url"
	"regexp"
	"strings"
	"testing"

	"longwave/trends"
	"longwave/web"
)

// screenPaths lists every screen of the fixture: each page the top bar
// reaches, the course of each patient, each visit, and an error page.
func screenPaths(t *testing.T, c *client) []string {
	t.Helper()
	paths := []string{"/patients", "/cohort", "/cohort?overdue=1&sort=-overdue", "/add", "/add?patient=LW-0101",
		"/sources", "/users", "/password", "/no-such-page"}
	for _, code := range []string{"LW-0101", xssCode} {
		paths = append(paths, courseURL(code), summaryURL(code))
		status, body, _ := c.get("/api/v1" + courseURL(code) + "/course")
		if status != http.StatusOK {
			t.Fatalf("course API of %q: status %d: %s", code, status, body)
		}
		var course trends.Course
		if err := json.Unmarshal([]byte(body), &course); err != nil {
			t.Fatalf("course API of %q: %v", code, err)
		}
		for _, v := range course.Visits {
			paths = append(paths, visitURL(v.VisitID))
		}
	}
	return paths
}

// externalURL finds absolute or protocol-relative URLs (another host) in
// HTML, CSS or JS text: http://, https://, and "//host" in an attribute,
// a CSS url() or a JS string.
var externalURL = regexp.MustCompile(`(?i)(https?:)?//[a-z0-9][a-z0-9.-]*|url\(\s*['"]?//`)

func externalURLs(text string) []string {
	var out []string
	for _, loc := range externalURL.FindAllStringIndex(text, -1) {
		m := text[loc[0]:loc[1]]
		if !strings.HasPrefix(strings.ToLower(m), "http") && !strings.HasPrefix(m, "url(") {
			// "//x" counts only where a URL can start: after a quote, '(' or '='.
			if loc[0] == 0 || !strings.ContainsRune(`"'(=`, rune(text[loc[0]-1])) {
				continue
			}
		}
		out = append(out, m)
	}
	return out
}

var (
	scriptTagRE = regexp.MustCompile(`(?is)<script\b([^>]*)>(.*?)</script>`)
	assetRE     = regexp.MustCompile(`(?:src|href)="(/static/[^"]+)"`)
	chartDataRE = regexp.MustCompile(`(?s)<script type="application/json" id="lw-chart-data">(.*?)</script>`)
)

var tagRE = regexp.MustCompile(`<[^>]*>`)

// htmlText is the text of a page as people read it: the words between the
// tags, without scripts and their data.
func htmlText(body string) string {
	return html.UnescapeString(tagRE.ReplaceAllString(scriptTagRE.ReplaceAllString(body, " "), " "))
}

// checkInert asserts that a page holds none of the hostile text in a form a
// browser would run or render as markup, no inline script or style, and
// that its chart data is valid JSON.
func checkInert(t *testing.T, path, body string) {
	t.Helper()
	for _, bad := range []string{"<script>alert", "</script><script>", "<b>LW-77", "<b>x", "alert(1)</script>"} {
		if strings.Contains(body, bad) {
			t.Errorf("%s: page holds unescaped %q", path, bad)
		}
	}
	for _, m := range scriptTagRE.FindAllStringSubmatch(body, -1) {
		attrs, inner := m[1], m[2]
		switch {
		case strings.Contains(attrs, `type="application/json"`):
			var v any
			if err := json.Unmarshal([]byte(inner), &v); err != nil {
				t.Errorf("%s: chart data is not JSON: %v", path, err)
			}
		case strings.Contains(attrs, `src="/static/`) && strings.TrimSpace(inner) == "":
		default:
			t.Errorf("%s: inline or foreign script element <script%s>", path, attrs)
		}
	}
	if n := strings.Count(strings.ToLower(body), "<script"); n != len(scriptTagRE.FindAllString(body, -1)) {
		t.Errorf("%s: %d <script openings but %d closed elements", path, n, len(scriptTagRE.FindAllString(body, -1)))
	}
	for _, bad := range []string{" style=", "<style", " onclick=", " onerror=", " onload=", "javascript:"} {
		if strings.Contains(strings.ToLower(body), bad) {
			t.Errorf("%s: inline style or handler %q", path, bad)
		}
	}
}

// TestScreensRender renders every screen on a real store with ingested
// synthetic recordings (two of them hostile): each answers, names no other
// host, stays inert, and each asset it names is served from the binary.
func TestScreensRender(t *testing.T) {
	e := fixtureEnv(t)
	c := e.signedIn(adminName)
	assets := map[string]bool{}
	for _, path := range screenPaths(t, c) {
		status, body, res := c.get(path)
		want := http.StatusOK
		if path == "/no-such-page" {
			want = http.StatusNotFound
		}
		if status != want {
			t.Errorf("GET %s: status %d, want %d", path, status, want)
			continue
		}
		if ct := res.Header.Get("Content-Type"); !strings.HasPrefix(ct, "text/html") {
			t.Errorf("GET %s: content type %q", path, ct)
		}
		if got := externalURLs(body); len(got) > 0 {
			t.Errorf("GET %s: addresses of other hosts: %q", path, got)
		}
		checkInert(t, path, body)
		if bad := keysIn(htmlText(body)); len(bad) > 0 {
			t.Errorf("GET %s shows keys to people: %q", path, bad)
		}
		for _, m := range assetRE.FindAllStringSubmatch(body, -1) {
			assets[m[1]] = true
		}
	}
	anon := e.client()
	status, body, _ := anon.get("/signin")
	if status != http.StatusOK || len(externalURLs(body)) > 0 {
		t.Errorf("GET /signin: status %d, external %q", status, externalURLs(body))
	}
	checkInert(t, "/signin", body)
	for _, m := range assetRE.FindAllStringSubmatch(body, -1) {
		assets[m[1]] = true
	}
	if len(assets) < 4 {
		t.Fatalf("pages name %d assets, want the CSS, charts.js, upload.js and echarts", len(assets))
	}
	for a := range assets {
		status, body, res := anon.get(a)
		if status != http.StatusOK {
			t.Errorf("GET %s: status %d", a, status)
			continue
		}
		if !strings.Contains(res.Header.Get("Cache-Control"), "immutable") {
			t.Errorf("GET %s: Cache-Control %q, want immutable", a, res.Header.Get("Cache-Control"))
		}
		if strings.HasSuffix(a, "/echarts/echarts.min.js") {
			// echarts.min.js is excluded from the address scan: its strings
			// hold the SVG/XLink namespace URIs (www.w3.org, identifiers, not
			// fetched), the Apache licence URL and the zrender licence URL in
			// comments. What matters is that it cannot fetch at run time:
			// it holds no XMLHttpRequest, fetch(), sendBeacon, importScripts or
			// WebSocket (checked on echarts 5.4.3's dist/echarts.min.js).
			for _, api := range []string{"XMLHttpRequest", "fetch(", "sendBeacon", "importScripts", "WebSocket", "EventSource"} {
				if strings.Contains(body, api) {
					t.Errorf("echarts.min.js mentions %s", api)
				}
			}
			continue
		}
		if got := externalURLs(body); len(got) > 0 {
			t.Errorf("GET %s: addresses of other hosts: %q", a, got)
		}
	}
}

// TestXSSFixtureReachesPages makes sure the hostile text really is on the
// screens (escaped), so that TestScreensRender's inertness check is not
// vacuous.
func TestXSSFixtureReachesPages(t *testing.T) {
	e := fixtureEnv(t)
	c := e.signedIn(adminName)
	status, body, _ := c.get("/patients")
	if status != http.StatusOK || !strings.Contains(body, html.EscapeString(xssCode)) {
		t.Fatalf("patients page: status %d, escaped code %q present: %v", status, html.EscapeString(xssCode), strings.Contains(body, html.EscapeString(xssCode)))
	}
	status, body, _ = c.get("/api/v1" + courseURL(xssCode) + "/course")
	if status != http.StatusOK {
		t.Fatalf("course API: %d %s", status, body)
	}
	var course trends.Course
	if err := json.Unmarshal([]byte(body), &course); err != nil || len(course.Visits) == 0 {
		t.Fatalf("course API: %v, %d visits", err, len(course.Visits))
	}
	path := visitURL(course.Visits[0].VisitID)
	status, body, _ = c.get(path)
	if status != http.StatusOK {
		t.Fatalf("GET %s: %d", path, status)
	}
	// html/template writes < as &lt; in text and attributes.
	if !strings.Contains(body, "&lt;/script&gt;&lt;script&gt;alert(1)&lt;/script&gt;__f__") {
		t.Errorf("GET %s: the hostile equipment/context text is not shown escaped", path)
	}
	status, body, _ = c.get(courseURL(xssCode))
	if status != http.StatusOK {
		t.Fatalf("course page: %d", status)
	}
	m := chartDataRE.FindStringSubmatch(body)
	if m == nil {
		t.Fatalf("course page of %q has no chart data", xssCode)
	}
	if strings.Contains(m[1], "<") {
		t.Errorf("chart data holds a raw '<'")
	}
	var charts map[string]web.Option
	if err := json.Unmarshal([]byte(m[1]), &charts); err != nil || len(charts) == 0 {
		t.Fatalf("chart data: %v (%d charts)", err, len(charts))
	}
}

// TestCohortQueryParse checks the parsing of the cohort's filters, sort
// and page.
func TestCohortQueryParse(t *testing.T) {
	for _, tc := range []struct {
		query   string
		wantErr bool
		sort    string
		page    int
	}{
		{"", false, "-overdue", 1},
		{"sort=code&page=3", false, "code", 3},
		{"sort=-last_visit&overdue=1", false, "-last_visit", 1},
		{"sort=shoe", true, "", 0},
		{"page=0", true, "", 0},
		{"page=x", true, "", 0},
	} {
		q, _ := url.ParseQuery(tc.query)
		got, err := parseCohortQuery(q)
		if (err != nil) != tc.wantErr {
			t.Errorf("parseCohortQuery(%q): error %v, want error %v", tc.query, err, tc.wantErr)
			continue
		}
		if err == nil && (got.sortValue() != tc.sort || got.page != tc.page) {
			t.Errorf("parseCohortQuery(%q) = sort %q page %d, want %q %d", tc.query, got.sortValue(), got.page, tc.sort, tc.page)
		}
	}
}
