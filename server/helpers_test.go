package server

import (
	"context"
	"io"
	"net/http"
	"net/http/cookiejar"
	"net/http/httptest"
	"net/url"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"testing"
	"time"

	"longwave/ingest"
	"longwave/ingest/synth"
	"longwave/server/intake"
	"longwave/server/store"
)

// Test users, one per role. Passwords are at least store.MinPassword long.
const (
	clinicianName   = "dr-vale"
	coordinatorName = "coord-imre"
	adminName       = "admin-oona"
	testPassword    = "quiet-harbour-42"
)

// fixedNow is the test clock: the demo clinic's "today".
var fixedNow = time.Date(2025, time.June, 2, 9, 30, 0, 0, time.UTC)

// env is a running test service on a real SQLite store in a temp folder.
type env struct {
	t      testing.TB
	st     *store.Store
	pipe   *intake.Pipeline
	srv    *Server
	http   *httptest.Server
	sleeps *sleepLog
}

// sleepLog records the sign-in delays instead of waiting.
type sleepLog struct {
	mu sync.Mutex
	d  []time.Duration
}

func (l *sleepLog) sleep(_ context.Context, d time.Duration) error {
	l.mu.Lock()
	l.d = append(l.d, d)
	l.mu.Unlock()
	return nil
}

func (l *sleepLog) all() []time.Duration {
	l.mu.Lock()
	defer l.mu.Unlock()
	return append([]time.Duration(nil), l.d...)
}

// newEnv opens a store in dir (a fresh temp folder when ""), makes the
// three users and starts the service on a loopback port.
func newEnv(t testing.TB, dir string, cfg Config) *env {
	t.Helper()
	if dir == "" {
		dir = t.TempDir()
	}
	st, err := store.Open(filepath.Join(dir, "longwave.db"), store.WithClock(func() time.Time { return fixedNow }))
	if err != nil {
		t.Fatalf("open store: %v", err)
	}
	t.Cleanup(func() { st.Close() })
	return startEnv(t, st, cfg)
}

func startEnv(t testing.TB, st *store.Store, cfg Config) *env {
	t.Helper()
	ctx := context.Background()
	for _, u := range []struct{ name, role string }{
		{clinicianName, store.RoleClinician}, {coordinatorName, store.RoleCoordinator}, {adminName, store.RoleAdmin},
	} {
		if _, err := st.CreateUser(ctx, u.name, u.role, testPassword); err != nil && err != store.ErrUserExists {
			t.Fatalf("create user %s: %v", u.name, err)
		}
	}
	e := &env{t: t, st: st, pipe: intake.New(st), sleeps: &sleepLog{}}
	srv, err := New(cfg, st, e.pipe, WithClock(func() time.Time { return fixedNow }), WithSleeper(e.sleeps.sleep),
		WithLogger(discardLogger()))
	if err != nil {
		t.Fatalf("server.New: %v", err)
	}
	e.srv = srv
	e.http = httptest.NewServer(srv.Handler())
	t.Cleanup(e.http.Close)
	return e
}

// client is a browser-like HTTP client with a cookie jar that does not
// follow redirects (tests look at them).
type client struct {
	t    testing.TB
	base string
	c    *http.Client
	csrf string
}

func (e *env) client() *client {
	jar, _ := cookiejar.New(nil)
	return &client{t: e.t, base: e.http.URL, c: &http.Client{Jar: jar, Timeout: 60 * time.Second,
		CheckRedirect: func(*http.Request, []*http.Request) error { return http.ErrUseLastResponse }}}
}

var (
	csrfFieldRE = regexp.MustCompile(`name="csrf" value="([^"]+)"`)
)

// do sends a request and returns the status, the body and the response.
func (c *client) do(req *http.Request) (int, string, *http.Response) {
	c.t.Helper()
	res, err := c.c.Do(req)
	if err != nil {
		c.t.Fatalf("%s %s: %v", req.Method, req.URL, err)
	}
	defer res.Body.Close()
	b, err := io.ReadAll(res.Body)
	if err != nil {
		c.t.Fatalf("%s %s: read body: %v", req.Method, req.URL, err)
	}
	return res.StatusCode, string(b), res
}

func (c *client) get(path string) (int, string, *http.Response) {
	c.t.Helper()
	req, err := http.NewRequest(http.MethodGet, c.base+path, nil)
	if err != nil {
		c.t.Fatal(err)
	}
	return c.do(req)
}

func (c *client) postForm(path string, v url.Values) (int, string, *http.Response) {
	c.t.Helper()
	req, err := http.NewRequest(http.MethodPost, c.base+path, strings.NewReader(v.Encode()))
	if err != nil {
		c.t.Fatal(err)
	}
	req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	return c.do(req)
}

// signIn signs in through the form and keeps the session's CSRF token.
func (c *client) signIn(name, password string) int {
	c.t.Helper()
	code, body, _ := c.get("/signin")
	if code != http.StatusOK {
		c.t.Fatalf("GET /signin: status %d", code)
	}
	m := csrfFieldRE.FindStringSubmatch(body)
	if m == nil {
		c.t.Fatalf("GET /signin: no csrf field in form")
	}
	code, _, _ = c.postForm("/signin", url.Values{"csrf": {m[1]}, "name": {name}, "password": {password}})
	if code == http.StatusSeeOther {
		_, body, _ := c.get("/sources")
		if m := csrfFieldRE.FindStringSubmatch(body); m != nil {
			c.csrf = m[1]
		}
	}
	return code
}

func (e *env) signedIn(name string) *client {
	e.t.Helper()
	c := e.client()
	if code := c.signIn(name, testPassword); code != http.StatusSeeOther {
		e.t.Fatalf("sign in as %s: status %d, want 303", name, code)
	}
	return c
}

// visitSpec describes one synthetic visit of the fixture.
type visitSpec struct {
	code, date string
	birthYear  int
	context    string
	spec       func(s *synth.Spec)
}

// ingestVisit writes a synthetic recording to a temp file and runs it
// through the intake pipeline, as the command line does.
func (e *env) ingestVisit(v visitSpec) intake.Outcome {
	e.t.Helper()
	s := synth.Default()
	s.Duration = 150
	s.Periods = []ingest.Period{
		{State: ingest.EyesClosed, Start: 0, End: 60},
		{State: ingest.EyesOpen, Start: 60, End: 90},
		{State: ingest.EyesClosed, Start: 90, End: 140},
		{State: ingest.EyesOpen, Start: 140, End: 150},
	}
	if v.spec != nil {
		v.spec(&s)
	}
	b, err := synth.Bytes(s)
	if err != nil {
		e.t.Fatalf("synth %s %s: %v", v.code, v.date, err)
	}
	path := filepath.Join(e.t.TempDir(), "visit.edf")
	if err := os.WriteFile(path, b, 0o600); err != nil {
		e.t.Fatal(err)
	}
	out, err := e.pipe.IngestVisit(context.Background(), intake.Request{PatientCode: v.code, Date: v.date, BirthYear: v.birthYear,
		Sex: "F", Cohort: "harbour-memory", Context: v.context, Single: &intake.File{Path: path}})
	if err != nil {
		e.t.Fatalf("ingest %s %s: %v", v.code, v.date, err)
	}
	return out
}

// Hostile text for the XSS fixtures: it must stay inert on every screen.
const (
	xssScript = `</script><script>alert(1)</script>`
	xssFunc   = `__f__`
	xssCode   = `<b>LW-77</b>`
)

// fixtureVisits is the demo clinic's fixture: patient LW-0101 with three
// comparable annual visits of a slowly slowing rhythm and one visit whose
// hardware low-pass filter cuts into the analysed band, and the hostile
// patient <b>LW-77</b> whose recording carries script in its equipment
// field, an annotation and a channel label.
func fixtureVisits() []visitSpec {
	return []visitSpec{
		{code: "LW-0101", date: "2021-03-01", birthYear: 1950, spec: func(s *synth.Spec) { s.Seed = 11; s.AlphaHz = 9.8 }},
		{code: "LW-0101", date: "2022-03-07", birthYear: 1950, spec: func(s *synth.Spec) { s.Seed = 12; s.AlphaHz = 9.6 }},
		{code: "LW-0101", date: "2023-03-06", birthYear: 1950, spec: func(s *synth.Spec) { s.Seed = 13; s.AlphaHz = 9.3 }},
		{code: "LW-0101", date: "2023-09-04", birthYear: 1950, spec: func(s *synth.Spec) {
			s.Seed = 14
			s.AlphaHz = 9.2
			s.Prefilter = "HP:0.1Hz LP:15Hz"
		}},
		{code: xssCode, date: "2024-01-15", birthYear: 1948, context: xssScript + xssFunc, spec: func(s *synth.Spec) {
			s.Seed = 21
			s.Equipment = xssScript + xssFunc
			s.Channels = append(s.Channels, "</script><b>x", "__f__")
			s.ExtraAnnotations = []ingest.Annotation{{Onset: 5, Duration: 0, Text: "eyes closed " + xssScript + xssFunc}}
		}},
	}
}

// fixture is built once per test binary and shared read-only by the tests
// that only read (screens, security, browser): ingest costs seconds.
var (
	fixtureOnce sync.Once
	fixtureDir  string
	fixtureErr  string
)

// sharedFixtureDir returns a folder holding longwave.db with the fixture
// visits ingested. Tests copy nothing: they open it read-write through their
// own Store (the fixture is not changed by read-only tests).
func sharedFixtureDir(t testing.TB) string {
	t.Helper()
	fixtureOnce.Do(func() {
		dir, err := os.MkdirTemp("", "longwave-server-fixture-")
		if err != nil {
			fixtureErr = err.Error()
			return
		}
		fixtureDir = dir
		st, err := store.Open(filepath.Join(dir, "longwave.db"), store.WithClock(func() time.Time { return fixedNow }))
		if err != nil {
			fixtureErr = err.Error()
			return
		}
		defer st.Close()
		e := &env{t: t, st: st, pipe: intake.New(st)}
		for _, v := range fixtureVisits() {
			e.ingestVisit(v)
		}
	})
	if fixtureErr != "" {
		t.Fatalf("fixture: %s", fixtureErr)
	}
	return fixtureDir
}

// fixtureEnv starts a service on the shared fixture.
func fixtureEnv(t testing.TB) *env {
	t.Helper()
	return newEnv(t, sharedFixtureDir(t), Config{})
}

func TestMain(m *testing.M) {
	code := m.Run()
	if fixtureDir != "" {
		os.RemoveAll(fixtureDir)
	}
	os.Exit(code)
}
