package server

import (
	"context"
	"net/http"
	"net/url"
	"strings"
	"testing"
	"time"

	"longwave/server/store"
)

func TestSignInDelay(t *testing.T) {
	// 2^(n−1)·250 ms, capped at 8 s (the design of auth.go).
	for _, tc := range []struct {
		n    int
		want time.Duration
	}{
		{0, 0}, {1, 250 * time.Millisecond}, {2, 500 * time.Millisecond}, {3, time.Second},
		{5, 4 * time.Second}, {6, 8 * time.Second}, {7, 8 * time.Second}, {40, 8 * time.Second}, {-1, 0},
	} {
		if got := signInDelay(tc.n); got != tc.want {
			t.Errorf("signInDelay(%d) = %v, want %v", tc.n, got, tc.want)
		}
	}
}

// TestGrowingDelayAndAudit signs in wrongly several times: each attempt
// waits longer (per name and per client address), a success clears the
// name's count, and every attempt is in the audit log.
func TestGrowingDelayAndAudit(t *testing.T) {
	e := newEnv(t, "", Config{})
	c := e.client()
	for i := 0; i < 4; i++ {
		if got := c.signIn(clinicianName, "wrong-password-"+string(rune('a'+i))); got != http.StatusUnauthorized {
			t.Fatalf("wrong password attempt %d: status %d, want 401", i+1, got)
		}
	}
	// The client address counter also slows another name from the same host.
	if got := c.signIn("nobody-here", "wrong-password-x"); got != http.StatusUnauthorized {
		t.Fatalf("unknown user: status %d", got)
	}
	if got := c.signIn(clinicianName, testPassword); got != http.StatusSeeOther {
		t.Fatalf("right password: status %d, want 303", got)
	}
	got := e.sleeps.all()
	want := []time.Duration{0, 250 * time.Millisecond, 500 * time.Millisecond, time.Second, 2 * time.Second, 4 * time.Second}
	if len(got) != len(want) {
		t.Fatalf("delays %v, want %v", got, want)
	}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("attempt %d waited %v, want %v (all: %v)", i+1, got[i], want[i], got)
		}
	}
	n, err := e.st.SignInFailures(context.Background(), clinicianName, "203.0.113.9", delayWindow)
	if err != nil || n != 0 {
		t.Errorf("failures of %s after success: %d, %v; want 0", clinicianName, n, err)
	}
	log, err := e.st.AuditLog(context.Background(), 50)
	if err != nil {
		t.Fatal(err)
	}
	counts := map[string]int{}
	for _, a := range log {
		counts[a.Action]++
		if a.Client == "" {
			t.Errorf("audit entry %+v has no client address", a)
		}
	}
	if counts[store.AuditSignInFailed] != 5 || counts[store.AuditSignIn] != 1 {
		t.Errorf("audit counts %v, want 5 failed sign-ins and 1 sign-in", counts)
	}
}

// TestSessionCookie checks the cookie's attributes, that sign-out ends the
// session, and that an expired session is refused.
func TestSessionCookie(t *testing.T) {
	e := newEnv(t, "", Config{SessionTTL: time.Hour})
	c := e.client()
	_, body, _ := c.get("/signin")
	token := csrfFieldRE.FindStringSubmatch(body)[1]
	_, _, res := c.postForm("/signin", url.Values{"csrf": {token}, "name": {adminName}, "password": {testPassword}, "next": {"/sources"}})
	if loc := res.Header.Get("Location"); loc != "/sources" {
		t.Errorf("redirect after sign-in to %q, want /sources", loc)
	}
	var sess *http.Cookie
	for _, ck := range res.Cookies() {
		if ck.Name == sessionCookie {
			sess = ck
		}
	}
	if sess == nil {
		t.Fatal("no session cookie")
	}
	if !sess.HttpOnly || sess.SameSite != http.SameSiteStrictMode || sess.Path != "/" {
		t.Errorf("session cookie %+v: want HttpOnly, SameSite=Strict, Path=/", sess)
	}
	if sess.MaxAge != 3600 {
		t.Errorf("session cookie Max-Age %d, want 3600 (the TTL on the service's clock)", sess.MaxAge)
	}
	if sess.Secure {
		t.Errorf("session cookie Secure over plain HTTP; it is set only under TLS")
	}
	// An open redirect is refused.
	if got := safeNext("//elsewhere.example/x"); got != "" {
		t.Errorf("safeNext kept %q", got)
	}
	got, err := e.st.SessionByToken(context.Background(), sess.Value)
	if err != nil || got.User.Name != adminName {
		t.Fatalf("session lookup: %+v, %v", got, err)
	}
	if !got.Expires.Equal(fixedNow.Add(time.Hour)) {
		t.Errorf("session expires %v, want %v", got.Expires, fixedNow.Add(time.Hour))
	}
	_, body, _ = c.get("/sources")
	csrf := csrfFieldRE.FindStringSubmatch(body)[1]
	if status, _, _ := c.postForm("/signout", url.Values{"csrf": {csrf}}); status != http.StatusSeeOther {
		t.Fatalf("sign-out: %d", status)
	}
	if status, _, _ := c.get("/sources"); status != http.StatusSeeOther {
		t.Errorf("after sign-out GET /sources: %d, want 303 to sign-in", status)
	}
	if _, err := e.st.SessionByToken(context.Background(), sess.Value); err != store.ErrNoSession {
		t.Errorf("session after sign-out: %v, want ErrNoSession", err)
	}
}

// TestExpiredSession: a session past its expiry is refused by the store.
func TestExpiredSession(t *testing.T) {
	dir := t.TempDir()
	now := fixedNow
	st, err := store.Open(dir+"/x.db", store.WithClock(func() time.Time { return now }))
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	ctx := context.Background()
	u, err := st.CreateUser(ctx, "short-lived", store.RoleClinician, testPassword)
	if err != nil {
		t.Fatal(err)
	}
	token, _, err := st.CreateSession(ctx, u, time.Minute)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := st.SessionByToken(ctx, token); err != nil {
		t.Fatalf("fresh session: %v", err)
	}
	now = now.Add(2 * time.Minute)
	if _, err := st.SessionByToken(ctx, token); err != store.ErrNoSession {
		t.Errorf("expired session: %v, want ErrNoSession", err)
	}
	if _, err := st.CheckPassword(ctx, "short-lived", "wrong-password-1"); err != store.ErrBadCredentials {
		t.Errorf("wrong password: %v", err)
	}
	if _, err := st.SetDisabled(ctx, store.Actor{Name: "cli:test"}, "short-lived", true); err != nil {
		t.Fatal(err)
	}
	if _, err := st.CheckPassword(ctx, "short-lived", testPassword); err != store.ErrBadCredentials {
		t.Errorf("disabled user signed in: %v", err)
	}
}

// TestAuditOfViewsAndExport: a patient view and an export are audited.
func TestAuditOfViewsAndExport(t *testing.T) {
	e := fixtureEnv(t)
	c := e.signedIn(coordinatorName)
	if status, _, _ := c.get("/patients/LW-0101"); status != http.StatusOK {
		t.Fatalf("course: %d", status)
	}
	status, body, res := c.get("/cohort.csv?overdue=1")
	if status != http.StatusOK || !strings.HasPrefix(res.Header.Get("Content-Type"), "text/csv") {
		t.Fatalf("csv: %d %q", status, res.Header.Get("Content-Type"))
	}
	if !strings.HasPrefix(body, "code,") || !strings.Contains(body, "LW-0101") {
		t.Errorf("csv body starts %q", body[:min(len(body), 80)])
	}
	log, err := e.st.AuditLog(context.Background(), 20)
	if err != nil {
		t.Fatal(err)
	}
	seen := map[string]string{}
	for _, a := range log {
		if _, dup := seen[a.Action]; a.User == coordinatorName && !dup {
			seen[a.Action] = a.Subject // the newest entry of each action
		}
	}
	if seen[store.AuditPatientView] != "LW-0101" {
		t.Errorf("patient view audit: %q (all %v)", seen[store.AuditPatientView], seen)
	}
	if !strings.Contains(seen[store.AuditExport], "cohort csv") {
		t.Errorf("export audit: %q", seen[store.AuditExport])
	}
}
