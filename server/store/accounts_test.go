package store

import (
	"context"
	"errors"
	"path/filepath"
	"strings"
	"testing"
	"time"
	"unicode/utf8"
)

func openAccounts(t *testing.T) *Store {
	t.Helper()
	now := time.Date(2025, 6, 2, 9, 30, 0, 0, time.UTC)
	st, err := Open(filepath.Join(t.TempDir(), "a.db"), WithClock(func() time.Time { return now }))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	return st
}

func TestAccountValidation(t *testing.T) {
	st := openAccounts(t)
	ctx := context.Background()
	for _, tc := range []struct {
		name, role, pw string
		want           error
	}{
		{"dr-vale", RoleClinician, "long-enough-pw", nil},
		{"dr-vale", RoleAdmin, "long-enough-pw", ErrUserExists},
		{"", RoleClinician, "long-enough-pw", ErrBadAccount},
		{"two words", RoleClinician, "long-enough-pw", ErrBadAccount},
		{strings.Repeat("x", MaxUserName+1), RoleClinician, "long-enough-pw", ErrBadAccount},
		{"nurse", "nurse", "long-enough-pw", ErrBadAccount},
		{"short-pw", RoleClinician, "short", ErrBadAccount},
		{"long-pw", RoleClinician, strings.Repeat("p", MaxPassword+1), ErrBadAccount},
	} {
		_, err := st.CreateUser(ctx, tc.name, tc.role, tc.pw)
		if !errors.Is(err, tc.want) && !(tc.want == nil && err == nil) {
			t.Errorf("CreateUser(%q, %q, %d-byte password) = %v, want %v", tc.name, tc.role, len(tc.pw), err, tc.want)
		}
	}
	u, err := st.CheckPassword(ctx, "dr-vale", "long-enough-pw")
	if err != nil || u.Role != RoleClinician {
		t.Fatalf("CheckPassword: %+v, %v", u, err)
	}
	for _, pw := range []string{"", "long-enough-pX", strings.Repeat("p", 200)} {
		if _, err := st.CheckPassword(ctx, "dr-vale", pw); !errors.Is(err, ErrBadCredentials) {
			t.Errorf("CheckPassword(wrong %q…) = %v", pw[:min(len(pw), 5)], err)
		}
	}
	if _, err := st.CheckPassword(ctx, "nobody", "long-enough-pw"); !errors.Is(err, ErrBadCredentials) {
		t.Errorf("unknown user: %v", err)
	}
	// A role change ends the user's sessions.
	tok, _, err := st.CreateSession(ctx, u, time.Hour)
	if err != nil {
		t.Fatal(err)
	}
	if err := st.SetRole(ctx, cliActor, "dr-vale", RoleCoordinator); err != nil {
		t.Fatal(err)
	}
	if _, err := st.SessionByToken(ctx, tok); !errors.Is(err, ErrNoSession) {
		t.Errorf("session after role change: %v, want ErrNoSession", err)
	}
	if err := st.SetRole(ctx, cliActor, "nobody", RoleAdmin); !errors.Is(err, ErrNoUser) {
		t.Errorf("SetRole of unknown user: %v", err)
	}
}

func TestAuditAndFailures(t *testing.T) {
	st := openAccounts(t)
	ctx := context.Background()
	long := strings.Repeat("é", 400) // 800 bytes: cut on a rune boundary
	if err := st.AuditBatch(ctx, []AuditEntry{
		{User: "a", Action: AuditPatientView, Subject: "LW-1", Client: "127.0.0.1"},
		{User: "b", Action: AuditExport, Subject: long},
	}); err != nil {
		t.Fatal(err)
	}
	if err := st.Audit(ctx, "c", "not_an_action", "", ""); err == nil {
		t.Error("an unknown audit action was accepted")
	}
	log, err := st.AuditLog(ctx, 10)
	if err != nil || len(log) != 2 {
		t.Fatalf("audit log: %d entries, %v", len(log), err)
	}
	if got := log[0].Subject; len(got) > 500 || !utf8.ValidString(got) {
		t.Errorf("long subject kept as %d bytes, valid UTF-8 %v", len(got), utf8.ValidString(got))
	}
	for i := 0; i < 3; i++ {
		if err := st.RecordSignInFailure(ctx, "dr-vale", "10.0.0.7", 15*time.Minute); err != nil {
			t.Fatal(err)
		}
	}
	if n, err := st.SignInFailures(ctx, "someone-else", "10.0.0.7", 15*time.Minute); err != nil || n != 3 {
		t.Errorf("failures by address: %d, %v; want 3", n, err)
	}
	if err := st.ClearSignInFailures(ctx, "dr-vale", "10.0.0.7"); err != nil {
		t.Fatal(err)
	}
	if n, _ := st.SignInFailures(ctx, "dr-vale", "10.0.0.7", 15*time.Minute); n != 0 {
		t.Errorf("failures after clear: %d", n)
	}
}
