package server

import (
	"bytes"
	"mime/multipart"
	"net/http"
	"net/url"
	"regexp"
	"strings"
	"testing"
)

// publicRoutes are the only routes an anonymous visitor may reach: the
// sign-in form and its post, and the static assets. Any other route the
// router holds must refuse an anonymous request.
var publicRoutes = map[string]bool{
	"GET /signin":                            true,
	"POST /signin":                           true,
	"GET /static/{hash:[0-9a-f]+}/{name:.+}": true,
}

var pathVarRE = regexp.MustCompile(`\{([a-z]+)(:[^}]*)?\}`)

// examplePath fills a route's path template with values that match it.
func examplePath(tpl string) string {
	return pathVarRE.ReplaceAllStringFunc(tpl, func(m string) string {
		switch pathVarRE.FindStringSubmatch(m)[1] {
		case "id":
			return "1"
		case "code":
			return "LW-0101"
		case "hash":
			return "0123456789abcdef"
		default:
			return "x"
		}
	})
}

// TestEveryRouteNeedsSignIn walks the router's own route table
// (mux.Router.Walk), so that a route added later cannot slip by: every
// route but sign-in and static assets refuses an anonymous request, pages
// with a redirect to the sign-in form and the API with 401 and a JSON error.
func TestEveryRouteNeedsSignIn(t *testing.T) {
	e := newEnv(t, "", Config{})
	routes, err := e.srv.walkRoutes()
	if err != nil {
		t.Fatal(err)
	}
	if len(routes) < 15 {
		t.Fatalf("walked %d routes, expected the whole table", len(routes))
	}
	anon := e.client()
	for _, rt := range routes {
		if len(rt.Methods) == 0 {
			t.Errorf("route %s %s admits every method", rt.Name, rt.Path)
		}
		for _, m := range rt.Methods {
			key := m + " " + rt.Path
			if publicRoutes[key] {
				continue
			}
			path := examplePath(rt.Path)
			req, _ := http.NewRequest(m, anon.base+path, strings.NewReader(""))
			status, body, res := anon.do(req)
			switch {
			case strings.HasPrefix(rt.Path, "/api/"):
				if status != http.StatusUnauthorized || !strings.Contains(body, `"error"`) {
					t.Errorf("anonymous %s: status %d body %q, want 401 with a JSON error", key, status, body)
				}
			case m == http.MethodGet:
				loc := res.Header.Get("Location")
				if status != http.StatusSeeOther || !strings.HasPrefix(loc, "/signin?next=") {
					t.Errorf("anonymous %s: status %d Location %q, want 303 to /signin", key, status, loc)
				}
			default:
				if status != http.StatusUnauthorized {
					t.Errorf("anonymous %s: status %d, want 401", key, status)
				}
			}
		}
	}
	// The public ones do answer anonymously.
	if status, _, _ := anon.get("/signin"); status != http.StatusOK {
		t.Errorf("anonymous GET /signin: %d", status)
	}
}

// TestPostWithoutCSRFRefused: every state-changing route refuses a signed-in
// POST without the token (form field or header), with a wrong token, and a
// multipart upload whose first part is not the token.
func TestPostWithoutCSRFRefused(t *testing.T) {
	e := newEnv(t, "", Config{})
	c := e.signedIn(adminName)
	routes, err := e.srv.walkRoutes()
	if err != nil {
		t.Fatal(err)
	}
	posts := 0
	for _, rt := range routes {
		for _, m := range rt.Methods {
			if m == http.MethodGet || publicRoutes[m+" "+rt.Path] {
				continue
			}
			posts++
			path := examplePath(rt.Path)
			for _, tc := range []struct {
				name string
				form url.Values
				hdr  string
			}{
				{"no token", url.Values{"name": {"x"}}, ""},
				{"wrong field", url.Values{"csrf": {"not-the-token-but-long-enough-to-look-real"}}, ""},
				{"wrong header", nil, "not-the-token-but-long-enough-to-look-real"},
			} {
				req, _ := http.NewRequest(m, c.base+path, strings.NewReader(tc.form.Encode()))
				req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
				if tc.hdr != "" {
					req.Header.Set(csrfHeader, tc.hdr)
				}
				if status, _, _ := c.do(req); status != http.StatusForbidden {
					t.Errorf("%s %s with %s: status %d, want 403", m, path, tc.name, status)
				}
			}
		}
	}
	if posts < 3 {
		t.Fatalf("found %d state-changing routes, want sign-out, add, users", posts)
	}
	// A multipart upload without the header: the first part must be the token.
	var body bytes.Buffer
	mw := multipart.NewWriter(&body)
	mw.WriteField("patient", "LW-9")
	mw.WriteField("date", "2025-01-01")
	fw, _ := mw.CreateFormFile("file", "a.edf")
	fw.Write([]byte("0       "))
	mw.Close()
	req, _ := http.NewRequest(http.MethodPost, c.base+"/add", &body)
	req.Header.Set("Content-Type", mw.FormDataContentType())
	if status, _, _ := c.do(req); status != http.StatusForbidden {
		t.Errorf("multipart upload without token: status %d, want 403", status)
	}
	// With the right token the same sign-out works.
	if status, _, _ := c.postForm("/signout", url.Values{"csrf": {c.csrf}}); status != http.StatusSeeOther {
		t.Errorf("sign-out with token: status %d, want 303", status)
	}
	// A sign-in post without the pre-session token is refused too.
	anon := e.client()
	if status, _, _ := anon.postForm("/signin", url.Values{"name": {adminName}, "password": {testPassword}}); status != http.StatusForbidden {
		t.Errorf("sign-in without form token: status %d, want 403", status)
	}
}

// TestRoleMatrix checks each role against the routes of each permission:
// a clinician cannot reach admin, cohort or export routes; a coordinator
// cannot add recordings or manage users.
func TestRoleMatrix(t *testing.T) {
	e := fixtureEnv(t)
	cases := []struct {
		user, method, path string
		want               int
	}{
		{clinicianName, "GET", "/users", http.StatusForbidden},
		{clinicianName, "POST", "/users", http.StatusForbidden},
		{clinicianName, "GET", "/cohort", http.StatusForbidden},
		{clinicianName, "GET", "/cohort.csv", http.StatusForbidden},
		{clinicianName, "GET", "/api/v1/cohort", http.StatusForbidden},
		{clinicianName, "GET", "/api/v1/export.csv", http.StatusForbidden},
		{clinicianName, "GET", "/patients", http.StatusOK},
		{clinicianName, "GET", "/patients/LW-0101", http.StatusOK},
		{clinicianName, "GET", "/add", http.StatusOK},
		{clinicianName, "GET", "/api/v1/patients", http.StatusOK},
		{coordinatorName, "GET", "/users", http.StatusForbidden},
		{coordinatorName, "GET", "/add", http.StatusForbidden},
		{coordinatorName, "POST", "/add", http.StatusForbidden},
		{coordinatorName, "GET", "/cohort", http.StatusOK},
		{coordinatorName, "GET", "/cohort.csv", http.StatusOK},
		{coordinatorName, "GET", "/patients/LW-0101", http.StatusOK},
		{adminName, "GET", "/users", http.StatusOK},
		{adminName, "GET", "/cohort", http.StatusOK},
		{adminName, "GET", "/add", http.StatusOK},
	}
	clients := map[string]*client{}
	for _, tc := range cases {
		c := clients[tc.user]
		if c == nil {
			c = e.signedIn(tc.user)
			clients[tc.user] = c
		}
		form := url.Values{"csrf": {c.csrf}, "name": {"newcomer"}, "role": {"clinician"}, "password": {testPassword}}
		req, _ := http.NewRequest(tc.method, c.base+tc.path, strings.NewReader(form.Encode()))
		req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
		status, body, _ := c.do(req)
		if status != tc.want {
			t.Errorf("%s %s %s: status %d, want %d", tc.user, tc.method, tc.path, status, tc.want)
		}
		if tc.want == http.StatusForbidden && strings.HasPrefix(tc.path, "/api/") && !strings.Contains(body, `"error"`) {
			t.Errorf("%s %s: 403 without JSON error: %q", tc.user, tc.path, body)
		}
	}
}

// TestSecurityHeaders checks the headers on every kind of response: a page,
// an API answer, an asset, a redirect, an error.
func TestSecurityHeaders(t *testing.T) {
	e := fixtureEnv(t)
	c := e.signedIn(adminName)
	_, body, _ := c.get("/patients")
	asset := assetRE.FindStringSubmatch(body)
	if asset == nil {
		t.Fatal("no asset on /patients")
	}
	anon := e.client()
	for _, tc := range []struct {
		c    *client
		path string
	}{
		{c, "/patients"}, {c, "/api/v1/patients"}, {c, asset[1]}, {anon, "/cohort"}, {c, "/nowhere"},
		{anon, "/api/v1/patients"}, {anon, "/signin"}, {c, "/api/v1/visits/999999"},
	} {
		_, _, res := tc.c.get(tc.path)
		h := res.Header
		csp := h.Get("Content-Security-Policy")
		for _, want := range []string{"script-src 'self'", "frame-ancestors 'none'", "default-src 'none'", "style-src 'self'"} {
			if !strings.Contains(csp, want) {
				t.Errorf("GET %s: CSP %q lacks %q", tc.path, csp, want)
			}
		}
		if strings.Contains(csp, "unsafe-inline") || strings.Contains(csp, "unsafe-eval") {
			t.Errorf("GET %s: CSP allows unsafe sources: %q", tc.path, csp)
		}
		if h.Get("X-Content-Type-Options") != "nosniff" {
			t.Errorf("GET %s: X-Content-Type-Options %q", tc.path, h.Get("X-Content-Type-Options"))
		}
		if h.Get("Referrer-Policy") == "" {
			t.Errorf("GET %s: no Referrer-Policy", tc.path)
		}
	}
}
