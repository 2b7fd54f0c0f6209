package server

import (
	"encoding/json"
	"net/http"
	"strings"
	"testing"

	"longwave/metrics"
	"longwave/trends"
)

// TestAPIAnswers checks each endpoint's answer and the JSON errors with
// their status codes.
func TestAPIAnswers(t *testing.T) {
	e := fixtureEnv(t)
	c := e.signedIn(coordinatorName)
	clin := e.signedIn(clinicianName)
	anon := e.client()

	status, body, res := c.get("/api/v1/patients")
	if status != http.StatusOK || !strings.HasPrefix(res.Header.Get("Content-Type"), "application/json") {
		t.Fatalf("patients: %d %q", status, res.Header.Get("Content-Type"))
	}
	var pl struct {
		Patients []apiPatient `json:"patients"`
	}
	if err := json.Unmarshal([]byte(body), &pl); err != nil || len(pl.Patients) != 2 {
		t.Fatalf("patients: %v, %d patients, want 2", err, len(pl.Patients))
	}

	status, body, _ = c.get("/api/v1/patients/LW-0101/course")
	var course trends.Course
	if status != http.StatusOK || json.Unmarshal([]byte(body), &course) != nil || len(course.Visits) != 4 {
		t.Fatalf("course: %d, %d visits, want 4", status, len(course.Visits))
	}
	// Set apart by a rule on the recording: the 15 Hz low-pass visit alone.
	// (Under settings with intervals, markers of these short synthetic
	// visits may also be set apart by their own intervals: not counted.)
	apart := 0
	for _, v := range course.Visits {
		for _, f := range v.Flags {
			if f.Severity == metrics.NotComparable && f.Rule != trends.RuleIntervalWide {
				apart++
				break
			}
		}
	}
	if apart != 1 {
		t.Errorf("course: %d visits not comparable, want 1 (the 15 Hz low-pass one)", apart)
	}

	status, body, _ = c.get(visitURLAPI(course.Visits[0].VisitID))
	var v apiVisitBody
	if status != http.StatusOK || json.Unmarshal([]byte(body), &v) != nil || v.Patient != "LW-0101" || v.Display == nil || len(v.Markers) == 0 {
		t.Fatalf("visit: %d %+v", status, v.Patient)
	}

	status, body, _ = c.get("/api/v1/cohort?overdue=1&sort=code")
	var ch apiCohortBody
	if status != http.StatusOK || json.Unmarshal([]byte(body), &ch) != nil || ch.Sort != "code" || !ch.Filter.Overdue {
		t.Fatalf("cohort: %d %s", status, body[:min(200, len(body))])
	}
	for _, r := range ch.Rows {
		if !r.Overdue {
			t.Errorf("cohort?overdue=1 row %s not overdue", r.Code)
		}
	}

	status, body, res = c.get("/api/v1/export.csv")
	if status != http.StatusOK || !strings.HasPrefix(res.Header.Get("Content-Type"), "text/csv") || !strings.Contains(res.Header.Get("Content-Disposition"), "attachment") {
		t.Errorf("export: %d %q %q", status, res.Header.Get("Content-Type"), res.Header.Get("Content-Disposition"))
	}
	if lines := strings.Count(body, "\n"); lines != 3 {
		t.Errorf("export: %d lines, want header + 2 patients", lines)
	}

	for _, tc := range []struct {
		c      *client
		method string
		path   string
		want   int
	}{
		{c, "GET", "/api/v1/cohort?sort=height", http.StatusBadRequest},
		{c, "GET", "/api/v1/cohort?page=-2", http.StatusBadRequest},
		{anon, "GET", "/api/v1/patients", http.StatusUnauthorized},
		{clin, "GET", "/api/v1/cohort", http.StatusForbidden},
		{c, "GET", "/api/v1/patients/NOBODY/course", http.StatusNotFound},
		{c, "GET", "/api/v1/visits/987654", http.StatusNotFound},
		{c, "GET", "/api/v1/nothing", http.StatusNotFound},
		{c, "DELETE", "/api/v1/patients", http.StatusMethodNotAllowed},
		{c, "POST", "/api/v1/cohort", http.StatusMethodNotAllowed},
	} {
		req, _ := http.NewRequest(tc.method, tc.c.base+tc.path, nil)
		req.Header.Set(csrfHeader, tc.c.csrf)
		status, body, res := tc.c.do(req)
		if status != tc.want {
			t.Errorf("%s %s: status %d, want %d", tc.method, tc.path, status, tc.want)
		}
		var je jsonError
		if err := json.Unmarshal([]byte(body), &je); err != nil || je.Error == "" || !strings.HasPrefix(res.Header.Get("Content-Type"), "application/json") {
			t.Errorf("%s %s: body %q is not a JSON error", tc.method, tc.path, body)
		}
	}
}

func visitURLAPI(id int64) string { return "/api/v1" + visitURL(id) }

// TestInternalErrorHidden: an unexpected failure (the store closed under
// the service) answers 500 with the fixed text; the cause stays in the log.
func TestInternalErrorHidden(t *testing.T) {
	e := newEnv(t, "", Config{})
	c := e.signedIn(adminName)
	e.st.Close()
	for _, path := range []string{"/api/v1/patients", "/patients"} {
		status, body, _ := c.get(path)
		if status != http.StatusInternalServerError {
			t.Errorf("GET %s with a closed store: status %d", path, status)
		}
		if !strings.Contains(body, "internal error") || strings.Contains(body, "sql") {
			t.Errorf("GET %s: 500 body %q", path, body[:min(300, len(body))])
		}
	}
}
