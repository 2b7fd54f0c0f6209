package web

import (
	"bytes"
	"encoding/json"
	"net/http"
	"net/http/httptest"
	"regexp"
	"strings"
	"testing"
)

const hostile = `</script><script>alert(1)</script>__f__<b>`

func mustTemplates(t *testing.T) (*Templates, *Assets) {
	t.Helper()
	a, err := LoadAssets()
	if err != nil {
		t.Fatal(err)
	}
	tpl, err := Parse(a)
	if err != nil {
		t.Fatal(err)
	}
	return tpl, a
}

// samplePages returns one value of every page type, filled with hostile
// text wherever text from a recording or a user can go.
func samplePages(t *testing.T, tpl *Templates) map[string]Page {
	t.Helper()
	f := Frame{Title: hostile, User: hostile, Role: "admin", CSRF: "tok" + hostile,
		Nav: []NavLink{{Label: "Patients", URL: "/patients", Current: true}}}
	flags := []FlagView{{Severity: "not comparable", SeverityKey: "not_comparable", Reason: hostile, Source: hostile, Markers: hostile}}
	c := NewChart()
	c.AddSeries(hostile, nil, WithData([]Point{{Value: [2]any{"2024-01-01", 9.5}, Tip: []string{hostile}}}))
	chart := map[string]Option{"m0": OptionOf(c, Extras{UseUTC: true})}
	courseBody, err := tpl.RenderCourseBody(&CourseBody{Code: hostile, Facts: []Pair{{hostile, hostile}}, AddURL: "/add?patient=x",
		SummaryURL: "/patients/x/summary",
		Headline: []HeadlineCard{{Title: hostile, Where: hostile, Verdict: hostile, Lines: []string{hostile},
			Chart: CourseChart{ChartBox: ChartBox{Key: "m0", Title: hostile, Caption: hostile}, Figures: []Pair{{hostile, hostile}}, Reference: hostile, HasBand: true, Status: hostile}}},
		Strip:   []VisitChip{{Date: hostile, URL: "/visits/1", Status: hostile, Why: hostile}},
		NextDue: hostile,
		Overlay: &OverlayBox{Key: "m0", Apart: 1, Peaks: []Pair{{hostile, hostile}}},
		Groups: []ChartGroup{{Title: hostile, Intro: hostile,
			Charts: []CourseChart{{ChartBox: ChartBox{Key: "m0", Title: hostile, Caption: hostile}, Figures: []Pair{{hostile, hostile}}, Reference: hostile}}}},
		Notes:     []Note{{N: 1, Text: hostile}},
		Visits:    []VisitRow{{Date: "2024-01-01", Age: "70 y", URL: "/visits/1", Verdict: hostile, Conditions: []Pair{{hostile, hostile}}, Flags: flags}},
		ChartData: chart, Advisory: hostile})
	if err != nil {
		t.Fatal(err)
	}
	cohortBody, err := tpl.RenderCohortBody(&CohortBody{Sort: "code", SortOptions: []Pair{{"code", "code"}}, Markers: []string{hostile},
		Verdicts: []Pair{{hostile, hostile}}, VerdictOf: hostile,
		Rows: []CohortRow{{Code: hostile, URL: "/patients/x", Flags: []string{hostile}, Directions: []Direction{{Marker: hostile, Text: hostile, Key: "down"}},
			Spark: &Spark{Points: "1,2 3,4", LastX: "3", LastY: "4", Label: hostile, Width: "96", Height: "22"}, Verdict: hostile, VerdictKey: "none", VerdictWhy: hostile}},
		CSVURL: "/cohort.csv?sort=code"})
	if err != nil {
		t.Fatal(err)
	}
	return map[string]Page{
		"signin":   &SignInPage{Frame: Frame{Title: "Sign in"}, Name: hostile, Next: hostile, Error: hostile, FormToken: "t"},
		"patients": &PatientsPage{Frame: f, Rows: []PatientRow{{Code: hostile, URL: "/patients/x", Cohort: hostile}}, AddURL: "/add"},
		"cohort":   &CohortPage{Frame: f, Body: cohortBody},
		"course":   &CoursePage{Frame: f, Body: courseBody},
		"visit": &VisitPage{Frame: f, Code: hostile, CourseURL: "/patients/x", Date: "2024-01-01", Verdict: hostile, Settings: []Pair{{hostile, hostile}},
			Conditions: []Pair{{hostile, hostile}}, Flags: flags, Markers: []MarkerRow{{Name: hostile, Value: Cell{Text: "1", Note: hostile}}},
			Spectra: []ChartBox{{Key: "m0", Title: hostile}}, ChartData: chart,
			Traces: &TraceViewer{Source: "/api/v1/visits/1/traces", Duration: hostile, Frame: chart["m0"], Heights: []float64{50},
				Montages: []TraceChoice{{Value: "average", Label: hostile}}, Signals: []TraceChoice{{Value: "1", Label: hostile}}}},
		"upload":  &UploadPage{Frame: f, Code: hostile, Date: "2024-01-01", Patients: []string{hostile}, States: []Pair{{hostile, hostile}}, Error: hostile, Result: &UploadResult{Message: hostile, VisitURL: "/visits/1", CourseURL: "/patients/x", Flags: flags}},
		"sources": &SourcesPage{Frame: f, Advisory: hostile, Rows: []SourceRow{{Set: hostile, Citation: hostile, Note: hostile, Status: "checked"}}},
		"users": &UsersPage{Frame: f, Users: []UserRow{{Name: hostile, Role: "admin", ToggleURL: "/users/x/disable", ToggleLabel: hostile, ResetURL: "/users/x/reset"}, {Name: hostile, Self: true}},
			Roles: []string{"admin"}, Error: hostile, Notice: hostile, Reset: &ShownPassword{User: hostile, Password: hostile},
			MinPassword: 8, MinAdminPassword: 12, MaxPassword: 256, PasswordURL: "/password", Audit: []AuditRow{{User: hostile, Subject: hostile}}},
		"password": &PasswordPage{Frame: f, Error: hostile, Notice: hostile, MinLength: 12, MaxLength: 256, Admin: true},
		"error":    &ErrorPage{Frame: f, Status: 404, Message: hostile},
		"summary": &SummaryPage{Frame: f, Code: hostile, CourseURL: "/patients/x", Printed: "2026-12-03", Facts: []Pair{{hostile, hostile}},
			Rows:     []SummaryRow{{Marker: hostile, Where: hostile, Values: hostile, Dates: hostile, Slope: hostile, Interval: hostile, Verdict: hostile, Basis: hostile}},
			Overlay:  &OverlayBox{Key: "m0", Apart: 2, Peaks: []Pair{{hostile, hostile}}},
			Flags:    []SummaryFlag{{Date: hostile, Severity: hostile, SeverityKey: "caution", Text: hostile, Markers: hostile}},
			Settings: hostile, Basis: hostile, Advisory: hostile, Verdicts: hostile, ChartData: chart},
	}
}

var chartDataRE = regexp.MustCompile(`(?s)<script type="application/json" id="lw-chart-data">(.*?)</script>`)

// TestRenderEveryPage renders every template with hostile sample data:
// nothing of it stays unescaped, and the chart data is JSON that decodes
// back to the hostile text.
func TestRenderEveryPage(t *testing.T) {
	tpl, _ := mustTemplates(t)
	for name, p := range samplePages(t, tpl) {
		var buf bytes.Buffer
		if err := tpl.Render(&buf, p); err != nil {
			t.Errorf("%s: %v", name, err)
			continue
		}
		out := buf.String()
		for _, bad := range []string{"<script>alert", "</script><script>", "<b>"} {
			if strings.Contains(out, bad) {
				t.Errorf("%s: rendered page holds %q", name, bad)
			}
		}
		if !strings.Contains(out, "</html>") {
			t.Errorf("%s: page not complete", name)
		}
		if m := chartDataRE.FindStringSubmatch(out); m != nil {
			if strings.ContainsAny(m[1], "<>") {
				t.Errorf("%s: chart data holds < or >", name)
			}
			var opts map[string]struct {
				Series []struct {
					Name string `json:"name"`
					Data []Point
				} `json:"series"`
			}
			if err := json.Unmarshal([]byte(m[1]), &opts); err != nil {
				t.Errorf("%s: chart data: %v", name, err)
			} else if s := opts["m0"].Series; len(s) != 1 || s[0].Name != hostile || s[0].Data[0].Tip[0] != hostile {
				t.Errorf("%s: chart series came back as %+v", name, s)
			}
		} else if name == "course" || name == "visit" {
			t.Errorf("%s: no chart data element", name)
		}
	}
}

// TestAssets checks hashed URLs and their serving.
func TestAssets(t *testing.T) {
	_, a := mustTemplates(t)
	for _, name := range []string{"longwave.css", "charts.js", "upload.js", "echarts/echarts.min.js", "echarts/LICENSE", "echarts/NOTICE"} {
		u := a.URL(name)
		if !regexp.MustCompile(`^/static/[0-9a-f]{16}/` + regexp.QuoteMeta(name) + `$`).MatchString(u) {
			t.Errorf("URL(%q) = %q", name, u)
			continue
		}
		hash := strings.Split(u, "/")[2]
		w := httptest.NewRecorder()
		a.ServeAsset(w, httptest.NewRequest(http.MethodGet, u, nil), hash, name)
		body, _ := a.Body(name)
		if w.Code != http.StatusOK || !bytes.Equal(w.Body.Bytes(), body) || !strings.Contains(w.Header().Get("Cache-Control"), "immutable") {
			t.Errorf("serve %s: status %d, %d bytes", name, w.Code, w.Body.Len())
		}
		w = httptest.NewRecorder()
		a.ServeAsset(w, httptest.NewRequest(http.MethodGet, u, nil), "0000000000000000", name)
		if w.Code != http.StatusNotFound {
			t.Errorf("stale hash of %s: status %d, want 404", name, w.Code)
		}
	}
	if a.URL("nothing.js") != "" {
		t.Error("URL of an unknown asset is not empty")
	}
	// echarts 5.4.3 is the version go-echarts v2.6.x targets.
	b, _ := a.Body("echarts/echarts.min.js")
	if len(b) != 1024740 {
		t.Errorf("echarts.min.js is %d bytes; the npm echarts@5.4.3 dist file is 1,024,740", len(b))
	}
}
