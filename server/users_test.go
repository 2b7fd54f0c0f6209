package server

import (
	"context"
	"html"
	"net/http"
	"net/url"
	"regexp"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"longwave/server/store"
)

// auditLines returns the audit log, oldest first, as "user action subject
// client" lines, and fails the test when an entry holds one of secrets.
func auditLines(t *testing.T, e *env, secrets ...string) []string {
	t.Helper()
	log, err := e.st.AuditLog(context.Background(), 1000)
	if err != nil {
		t.Fatal(err)
	}
	var out []string
	for i := len(log) - 1; i >= 0; i-- {
		a := log[i]
		for _, s := range secrets {
			if strings.Contains(a.User+a.Subject+a.Client, s) {
				t.Errorf("audit entry %+v holds a password", a)
			}
		}
		if a.Action == store.AuditSignIn || a.Action == store.AuditSignOut {
			continue
		}
		out = append(out, a.User+" "+a.Action+" "+a.Subject+" "+a.Client)
	}
	return out
}

// apiGet asks the API as the client does, with the session cookie.
func (c *client) apiGet(path string) int {
	c.t.Helper()
	req, _ := http.NewRequest(http.MethodGet, c.base+path, nil)
	req.Header.Set("Accept", "application/json")
	status, _, _ := c.do(req)
	return status
}

// TestDisableEndsSessionsAtOnce: an admin disables a clinician on the users
// screen; the clinician's open sessions, a page one and an API one, both
// already remembered by the session memo, are refused on their very next
// request (303 to sign-in, 401). The test clock stands still, so a memo
// left in place would never expire: only forgetting it passes.
func TestDisableEndsSessionsAtOnce(t *testing.T) {
	e := newEnv(t, "", Config{})
	page, api := e.signedIn(clinicianName), e.signedIn(clinicianName)
	if status, _, _ := page.get("/patients"); status != http.StatusOK {
		t.Fatalf("page before disable: %d", status)
	}
	if status := api.apiGet("/api/v1/patients"); status != http.StatusOK {
		t.Fatalf("API before disable: %d", status)
	}
	admin := e.signedIn(adminName)
	status, body, _ := admin.postForm("/users/"+clinicianName+"/disable", url.Values{"csrf": {admin.csrf}})
	if status != http.StatusOK || !strings.Contains(body, "open sessions have ended") {
		t.Fatalf("disable: status %d, body without the notice", status)
	}
	status, _, res := page.get("/patients")
	if loc := res.Header.Get("Location"); status != http.StatusSeeOther || !strings.HasPrefix(loc, "/signin") {
		t.Errorf("page after disable: %d to %q, want 303 to /signin", status, loc)
	}
	if status := api.apiGet("/api/v1/patients"); status != http.StatusUnauthorized {
		t.Errorf("API after disable: %d, want 401", status)
	}
	if status := e.client().signIn(clinicianName, testPassword); status != http.StatusUnauthorized {
		t.Errorf("sign-in of a disabled user: %d, want 401", status)
	}
	// The row now offers "Enable"; enabling lets the user back in.
	if !strings.Contains(body, `action="/users/`+clinicianName+`/enable"`) {
		t.Error("the disabled user's row has no enable form")
	}
	if status, body, _ := admin.postForm("/users/"+clinicianName+"/enable", url.Values{"csrf": {admin.csrf}}); status != http.StatusOK || !strings.Contains(body, "can sign in again") {
		t.Errorf("enable: %d", status)
	}
	if status := e.client().signIn(clinicianName, testPassword); status != http.StatusSeeOther {
		t.Errorf("sign-in after enable: %d, want 303", status)
	}
	got := strings.Join(auditLines(t, e, testPassword), "\n")
	want := "admin-oona user_disabled dr-vale 127.0.0.1\ndr-vale sign_in_failed  127.0.0.1\nadmin-oona user_enabled dr-vale 127.0.0.1"
	if got != want {
		t.Errorf("audit log:\n%s\nwant:\n%s", got, want)
	}
}

var shownPasswordRE = regexp.MustCompile(`<code class="secret">([^<]+)</code>`)

// TestResetOnUsersScreen: a reset shows a new password once; it signs in,
// the old one does not, and the user's open session has ended.
func TestResetOnUsersScreen(t *testing.T) {
	e := newEnv(t, "", Config{})
	vale := e.signedIn(clinicianName)
	vale.get("/patients") // remembered by the memo
	admin := e.signedIn(adminName)
	status, body, res := admin.postForm("/users/"+clinicianName+"/reset", url.Values{"csrf": {admin.csrf}})
	m := shownPasswordRE.FindStringSubmatch(body)
	if status != http.StatusOK || m == nil {
		t.Fatalf("reset: status %d, no password shown", status)
	}
	if cc := res.Header.Get("Cache-Control"); !strings.Contains(cc, "no-store") {
		t.Errorf("the page showing a password is cacheable: Cache-Control %q", cc)
	}
	newPW := html.UnescapeString(m[1])
	if err := store.CheckNewPassword(clinicianName, store.RoleClinician, newPW); err != nil || len(newPW) != store.GeneratedPasswordLength {
		t.Errorf("generated password %q: %v", newPW, err)
	}
	if status, _, _ := vale.get("/patients"); status != http.StatusSeeOther {
		t.Errorf("the user's session after a reset: %d, want 303", status)
	}
	if status := e.client().signIn(clinicianName, testPassword); status != http.StatusUnauthorized {
		t.Errorf("old password after reset: %d, want 401", status)
	}
	if status := e.client().signIn(clinicianName, newPW); status != http.StatusSeeOther {
		t.Errorf("new password after reset: %d, want 303", status)
	}
	// Shown once: the users screen itself does not show it again.
	if _, again, _ := admin.get("/users"); strings.Contains(again, newPW) {
		t.Error("the users screen shows the reset password again")
	}
	got := strings.Join(auditLines(t, e, testPassword, newPW), "\n")
	if want := "admin-oona password_reset dr-vale 127.0.0.1\ndr-vale sign_in_failed  127.0.0.1"; got != want {
		t.Errorf("audit log:\n%s\nwant:\n%s", got, want)
	}
}

// TestUsersScreenRefusals: an admin's own row cannot be disabled or reset
// here, an unknown user is a 404, a weak new user's password is refused
// with a sentence for people, and an admin needs 12 characters.
func TestUsersScreenRefusals(t *testing.T) {
	e := newEnv(t, "", Config{})
	admin := e.signedIn(adminName)
	for _, tc := range []struct {
		path   string
		form   url.Values
		status int
		says   string
	}{
		{"/users/" + adminName + "/disable", nil, http.StatusConflict, "cannot disable your own account"},
		{"/users/" + adminName + "/reset", nil, http.StatusConflict, "password screen"},
		{"/users/nobody/disable", nil, http.StatusNotFound, "no user named nobody"},
		{"/users/nobody/reset", nil, http.StatusNotFound, "no user named nobody"},
		{"/users", url.Values{"name": {"dr-ash"}, "role": {"clinician"}, "password": {"password1"}}, http.StatusBadRequest, "commonly used passwords"},
		{"/users", url.Values{"name": {"dr-ash"}, "role": {"admin"}, "password": {"tarn-fell-3"}}, http.StatusBadRequest, "of an admin must have at least 12 characters (this one has 11)"},
		{"/users", url.Values{"name": {"dr-ash"}, "role": {"admin"}, "password": {"tarn-fell-39"}}, http.StatusOK, "User dr-ash added as admin."},
	} {
		form := url.Values{"csrf": {admin.csrf}}
		for k, v := range tc.form {
			form[k] = v
		}
		status, body, _ := admin.postForm(tc.path, form)
		if status != tc.status || !strings.Contains(html.UnescapeString(body), tc.says) {
			t.Errorf("POST %s %v: status %d, want %d saying %q", tc.path, tc.form, status, tc.status, tc.says)
		}
	}
	if status, _, _ := admin.get("/users"); status != http.StatusOK {
		t.Errorf("the admin's own session after the refusals: %d", status)
	}
	_, body, _ := admin.get("/users")
	if strings.Contains(body, `action="/users/`+adminName+`/`) {
		t.Error("the admin's own row has a disable or reset form")
	}
	got := strings.Join(auditLines(t, e, "password1", "tarn-fell"), "\n")
	if want := "admin-oona user_created dr-ash (admin) 127.0.0.1"; got != want {
		t.Errorf("audit log:\n%s\nwant:\n%s", got, want)
	}
}

// TestOwnPasswordChange: the password screen needs the current password,
// refuses weak or mistyped new ones, and on success ends the user's other
// sessions while this one goes on.
func TestOwnPasswordChange(t *testing.T) {
	e := newEnv(t, "", Config{})
	here, other := e.signedIn(clinicianName), e.signedIn(clinicianName)
	other.get("/patients") // remembered by the memo
	status, body, _ := here.get("/password")
	if status != http.StatusOK || !strings.Contains(body, `name="current"`) || !strings.Contains(body, `minlength="8"`) {
		t.Fatalf("GET /password: %d", status)
	}
	const next = "slate-quay-77"
	for _, tc := range []struct {
		current, password, again string
		status                   int
		says                     string
	}{
		{"not-my-password", next, next, http.StatusUnauthorized, "current password is wrong"},
		{testPassword, next, next + "x", http.StatusBadRequest, "two new passwords differ"},
		{testPassword, "password1", "password1", http.StatusBadRequest, "commonly used passwords"},
		{testPassword, "short", "short", http.StatusBadRequest, "at least 8 characters"},
		{testPassword, testPassword, testPassword, http.StatusBadRequest, "same as the current one"},
	} {
		status, body, _ := here.postForm("/password", url.Values{"csrf": {here.csrf}, "current": {tc.current}, "password": {tc.password}, "again": {tc.again}})
		if status != tc.status || !strings.Contains(html.UnescapeString(body), tc.says) {
			t.Errorf("change with current %q new %q: status %d, want %d saying %q", tc.current, tc.password, status, tc.status, tc.says)
		}
		if s, _, _ := other.get("/patients"); s != http.StatusOK {
			t.Fatalf("a refused change ended the other session: %d", s)
		}
	}
	// The wrong current password counted as a failed sign-in: the next
	// attempt waited the growing delay.
	if d := e.sleeps.all(); len(d) < 2 || d[len(d)-1] != delayBase {
		t.Errorf("sign-in delays %v, want the last %v after one wrong current password", d, delayBase)
	}
	status, body, _ = here.postForm("/password", url.Values{"csrf": {here.csrf}, "current": {testPassword}, "password": {next}, "again": {next}})
	if status != http.StatusOK || !strings.Contains(body, "Your password is changed") {
		t.Fatalf("change: status %d", status)
	}
	if s, _, _ := here.get("/patients"); s != http.StatusOK {
		t.Errorf("the session that changed the password: %d, want 200", s)
	}
	if s, _, res := other.get("/patients"); s != http.StatusSeeOther || !strings.HasPrefix(res.Header.Get("Location"), "/signin") {
		t.Errorf("the other session after the change: %d, want 303 to sign-in", s)
	}
	if s := e.client().signIn(clinicianName, testPassword); s != http.StatusUnauthorized {
		t.Errorf("old password: %d, want 401", s)
	}
	if s := e.client().signIn(clinicianName, next); s != http.StatusSeeOther {
		t.Errorf("new password: %d, want 303", s)
	}
	got := strings.Join(auditLines(t, e, testPassword, next, "not-my-password", "password1"), "\n")
	want := "dr-vale password_change_refused current password wrong 127.0.0.1\n" +
		"dr-vale password_changed dr-vale 127.0.0.1\n" +
		"dr-vale sign_in_failed  127.0.0.1"
	if got != want {
		t.Errorf("audit log:\n%s\nwant:\n%s", got, want)
	}
}

// TestPasswordLinkOnEveryScreen: each role's screens link to the password
// screen from the top bar, and it opens for each role.
func TestPasswordLinkOnEveryScreen(t *testing.T) {
	e := newEnv(t, "", Config{})
	for _, tc := range []struct {
		user  string
		paths []string
	}{
		{clinicianName, []string{"/patients", "/add", "/sources", "/password"}},
		{coordinatorName, []string{"/cohort", "/patients", "/sources", "/password"}},
		{adminName, []string{"/users", "/patients", "/cohort", "/add", "/sources", "/password"}},
	} {
		c := e.signedIn(tc.user)
		for _, p := range tc.paths {
			_, body, _ := c.get(p)
			if !strings.Contains(body, `<a class="own" href="/password">`) {
				t.Errorf("%s %s: no link to the password screen in the top bar", tc.user, p)
			}
		}
	}
	// Signed out, the password screen sends to the sign-in form.
	if status, _, res := e.client().get("/password"); status != http.StatusSeeOther || !strings.HasPrefix(res.Header.Get("Location"), "/signin") {
		t.Errorf("anonymous GET /password: %d", status)
	}
}

// TestForgetUser: the memo forgets every session of one user and keeps
// the others'; a session read from the store before a forget is not put
// back after it.
func TestForgetUser(t *testing.T) {
	var c sessionCache
	now := fixedNow
	exp := now.Add(time.Hour)
	c.put("a1", store.Session{User: store.User{ID: 1}, Expires: exp}, now, c.begin())
	c.put("a2", store.Session{User: store.User{ID: 1}, Expires: exp}, now, c.begin())
	c.put("b1", store.Session{User: store.User{ID: 2}, Expires: exp}, now, c.begin())
	c.forgetUser(1)
	for tok, want := range map[string]bool{"a1": false, "a2": false, "b1": true} {
		if _, ok := c.get(tok, now); ok != want {
			t.Errorf("session %s remembered %v, want %v", tok, ok, want)
		}
	}
	// A request asked the store (epoch seen), then the user was disabled,
	// then the request goes to put what it read: it must not stick.
	seen := c.begin()
	c.forgetUser(1)
	c.put("a3", store.Session{User: store.User{ID: 1}, Expires: exp}, now, seen)
	if _, ok := c.get("a3", now); ok {
		t.Error("a session read before the forget was remembered after it")
	}
	c.put("a4", store.Session{User: store.User{ID: 1}, Expires: exp}, now, c.begin())
	if _, ok := c.get("a4", now); !ok {
		t.Error("a session read after the forget was not remembered")
	}
}

// TestDisableUnderLoad: while a user's session asks the API from several
// goroutines, an admin disables the user; every request sent after the
// disable answered is refused (run it with -race).
func TestDisableUnderLoad(t *testing.T) {
	e := newEnv(t, "", Config{})
	vale := e.signedIn(clinicianName)
	admin := e.signedIn(adminName)
	var (
		disabled atomic.Bool
		after    atomic.Int64
		wg       sync.WaitGroup
		stale    atomic.Int64
	)
	for range 4 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for after.Load() < 200 {
				was := disabled.Load()
				req, _ := http.NewRequest(http.MethodGet, vale.base+"/api/v1/patients", nil)
				res, err := vale.c.Do(req)
				if err != nil {
					t.Error(err)
					return
				}
				res.Body.Close()
				if was {
					after.Add(1)
					if res.StatusCode != http.StatusUnauthorized {
						stale.Add(1)
					}
				}
			}
		}()
	}
	time.Sleep(50 * time.Millisecond)
	if status, _, _ := admin.postForm("/users/"+clinicianName+"/disable", url.Values{"csrf": {admin.csrf}}); status != http.StatusOK {
		t.Fatalf("disable: %d", status)
	}
	disabled.Store(true)
	wg.Wait()
	if n := stale.Load(); n > 0 {
		t.Errorf("%d of %d requests sent after the disable were answered", n, after.Load())
	}
}

// TestAuditWords: every audit action has words for the users screen.
func TestAuditWords(t *testing.T) {
	for _, a := range []string{store.AuditSignIn, store.AuditSignInFailed, store.AuditSignOut, store.AuditPatientView,
		store.AuditVisitView, store.AuditIngest, store.AuditIngestFailed, store.AuditExport, store.AuditUserCreated,
		store.AuditUserChanged, store.AuditUserDisabled, store.AuditUserEnabled, store.AuditPasswordReset,
		store.AuditPasswordChanged, store.AuditPasswordChangeRefused} {
		w, ok := auditWords[a]
		if !ok || strings.Contains(w, "_") || w == "" {
			t.Errorf("audit action %q reads %q", a, auditText(a))
		}
	}
	if got := auditText("some_later_action"); got != "some later action" {
		t.Errorf("an action without words reads %q", got)
	}
}
