package main

import (
	"context"
	"errors"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"longwave/server/store"
)

// shownPassword returns the password a command printed once.
func shownPassword(t *testing.T, out string) string {
	t.Helper()
	const mark = "password (shown once): "
	i := strings.Index(out, mark)
	if i < 0 {
		t.Fatalf("no password shown in %q", out)
	}
	return strings.Fields(out[i+len(mark):])[0]
}

// TestUserLifetime runs "longwave user" through every action on one
// database: list, add, disable, enable, reset; the refusals (last admin,
// common password, missing name); the audit log with its actors.
func TestUserLifetime(t *testing.T) {
	db := filepath.Join(t.TempDir(), "lw.db")
	ctx := context.Background()
	const adminPW, valePW = "tarn-fell-39x", "wren-ochre-1"
	steps := []struct {
		stdin string
		args  []string
		code  int
		out   string // a part of stdout ("" any)
		err   string // a part of stderr ("" any)
	}{
		{"", []string{"list"}, exitDone, "no accounts yet", ""},
		{adminPW + "\n", []string{"add", "--name", "admin-oona", "--role", "admin", "--by", "oona"}, exitDone, "user admin-oona added with role admin", ""},
		{"tarn-fell\n", []string{"add", "--name", "admin-ilse", "--role", "admin", "--by", "oona"}, exitFailed, "", "at least 12 characters"},
		{valePW + "\n", []string{"add", "--name", "dr-vale", "--by", "oona"}, exitDone, "added with role clinician", ""},
		{"", []string{"disable", "--name", "admin-oona", "--by", "oona"}, exitFailed, "", "last enabled admin"},
		{"", []string{"disable", "--name", "dr-vale", "--by", "oona"}, exitDone, "dr-vale disabled; their sessions have ended", ""},
		{"", []string{"disable", "--name", "dr-vale", "--by", "oona"}, exitDone, "already disabled", ""},
		{"", []string{"list"}, exitDone, "dr-vale     clinician  disabled", ""},
		{"", []string{"enable", "--name", "dr-vale", "--by", "oona"}, exitDone, "user dr-vale enabled", ""},
		{"password1\n", []string{"reset", "--name", "dr-vale", "--by", "oona"}, exitFailed, "", "commonly used"},
		{"", []string{"disable", "--name", "nobody", "--by", "oona"}, exitFailed, "", "no such user"},
		{"", []string{"disable", "--by", "oona"}, exitUsage, "", "--name is required"},
		{"", []string{"remove", "--name", "dr-vale"}, exitUsage, "", "list, add, disable, enable, reset"},
	}
	for i, s := range steps {
		args := append([]string{"user", "--db", db}, s.args...)
		code, out, stderr := run(t, s.stdin, args...)
		if code != s.code || !strings.Contains(out, s.out) || !strings.Contains(stderr, s.err) {
			t.Errorf("step %d %q: exit %d, stdout %q, stderr %q; want exit %d, stdout with %q, stderr with %q",
				i+1, s.args, code, out, stderr, s.code, s.out, s.err)
		}
	}

	// A session opened before the reset ends with it; the generated
	// password works and the old one does not.
	st, err := store.Open(db)
	if err != nil {
		t.Fatal(err)
	}
	u, err := st.CheckPassword(ctx, "dr-vale", valePW)
	if err != nil {
		t.Fatalf("dr-vale after enable: %v", err)
	}
	tok, _, err := st.CreateSession(ctx, u, time.Hour)
	if err != nil {
		t.Fatal(err)
	}
	st.Close()
	code, out, stderr := run(t, "", "user", "reset", "--db", db, "--name", "dr-vale") // no --by: the OS user
	if code != exitDone || !strings.Contains(out, "password of dr-vale reset") {
		t.Fatalf("reset: exit %d %q %q", code, out, stderr)
	}
	newPW := shownPassword(t, out)
	st, err = store.Open(db)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	if _, err := st.CheckPassword(ctx, "dr-vale", newPW); err != nil {
		t.Errorf("the reset password does not sign in: %v", err)
	}
	if _, err := st.CheckPassword(ctx, "dr-vale", valePW); !errors.Is(err, store.ErrBadCredentials) {
		t.Errorf("the old password still signs in: %v", err)
	}
	if _, err := st.SessionByToken(ctx, tok); !errors.Is(err, store.ErrNoSession) {
		t.Errorf("a session from before the reset: %v, want ErrNoSession", err)
	}

	// The audit log: every change, oldest first, with who made it.
	log, err := st.AuditLog(ctx, 100)
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for i := len(log) - 1; i >= 0; i-- {
		e := log[i]
		for _, pw := range []string{adminPW, valePW, newPW, "password1", "tarn-fell"} {
			if strings.Contains(e.User+e.Subject+e.Client, pw) {
				t.Errorf("audit entry %+v holds a password", e)
			}
		}
		who := e.User
		if i == 0 {
			if !strings.HasPrefix(who, "cli:") || len(who) == len("cli:") {
				t.Errorf("reset without --by audited as %q, want cli:<os user>", who)
			}
			who = "cli:<os user>"
		}
		got = append(got, who+" "+e.Action+" "+e.Subject)
	}
	want := []string{
		"cli:oona user_created admin-oona (admin)",
		"cli:oona user_created dr-vale (clinician)",
		"cli:oona user_disabled dr-vale",
		"cli:oona user_enabled dr-vale",
		"cli:<os user> password_reset dr-vale",
	}
	if strings.Join(got, "\n") != strings.Join(want, "\n") {
		t.Errorf("audit log:\n%s\nwant:\n%s", strings.Join(got, "\n"), strings.Join(want, "\n"))
	}
}

func TestCLIActor(t *testing.T) {
	t.Setenv("SUDO_USER", "oona")
	for _, tc := range []struct {
		by, want string
		ok       bool
	}{
		{"ilse", "cli:ilse", true},
		{"  ilse ", "cli:ilse", true},
		{"", "cli:oona", true}, // the person behind sudo
		{strings.Repeat("x", store.MaxUserName+1), "", false},
		{"bell\a", "", false},
	} {
		a, err := cliActor(tc.by)
		if (err == nil) != tc.ok || a.Name != tc.want {
			t.Errorf("cliActor(%q) = %q, %v; want %q, ok %v", tc.by, a.Name, err, tc.want, tc.ok)
		}
	}
}
