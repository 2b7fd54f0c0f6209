package store

import (
	"context"
	"errors"
	"path/filepath"
	"strings"
	"testing"
	"time"
	"unicode"
	"unicode/utf8"

	"longwave/migrations"
)

// cliActor is the command line as the audit log names it in these tests.
var cliActor = Actor{Name: "cli:tester"}

// TestPasswordRules: the NIST SP 800-63B rules of CheckNewPassword, each
// with a password that breaks it and one that does not.
func TestPasswordRules(t *testing.T) {
	for _, tc := range []struct {
		name, role, pw string
		refuse         string // a word of the reason, "" for accepted
	}{
		{"dr-vale", RoleClinician, "password1", "commonly used"},
		{"dr-vale", RoleClinician, "PASSWORD1", "commonly used"},     // case ignored
		{"dr-vale", RoleClinician, "Sunshine2024!", "commonly used"}, // stem "sunshine"
		{"dr-vale", RoleClinician, "p@ssw0rd99", "commonly used"},    // swaps undone
		{"dr-vale", RoleClinician, "m0nkey!!", "commonly used"},
		{"dr-vale", RoleClinician, "qwertyuiop", "commonly used"},
		{"dr-vale", RoleClinician, "iloveyou", "commonly used"},
		{"dr-vale", RoleClinician, "Clinic2025", "commonly used"}, // a word of the trade
		{"dr-vale", RoleClinician, "short7!", "at least 8 characters (this one has 7)"},
		{"dr-vale", RoleClinician, "ééééééé", "at least 8"}, // 14 bytes, 7 characters
		{"dr-vale", RoleClinician, "wren-ochre", ""},        // 10 characters
		{"dr-vale", RoleClinician, "élan-ñu-ø", ""},         // 9 characters, not ASCII
		{"dr-vale", RoleCoordinator, "tarn-fell", ""},
		{"admin-oona", RoleAdmin, "tarn-fell-3", "of an admin must have at least 12 characters (this one has 11)"},
		{"admin-oona", RoleAdmin, "tarn-fell-39", ""},
		{"dr-vale", RoleClinician, strings.Repeat("kestrel moor ", 19) + "fen", ""}, // 250 characters
		{"dr-vale", RoleClinician, strings.Repeat("kestrel moor ", 20), "at most 256"},
		{"dr-vale", RoleClinician, "tab\there-x", "control characters"},
		{"dr-vale", RoleClinician, "zzzzzzzzzz", "repeats"},
		{"dr-vale", RoleClinician, "xyzxyzxyzx", "repeats"},
		{"dr-vale", RoleClinician, "bcdefghij", "consecutive"},
		{"dr-vale", RoleClinician, "98765432", "consecutive"},
		{"dr-vale", RoleClinician, "Dr-Vale-of-fen", "user name"},
		{"amy", RoleClinician, "amy-of-the-fen", "user name"},
		{"amy", RoleClinician, "fen-2024-AMY", "user name"},
		{"amy", RoleClinician, "dreamy-lagoon", ""}, // a short name inside a word
		{"annika", RoleClinician, "xannikax-fen", "user name"},
		{"dr-vale", RoleClinician, "my-longwave-key", "name of this service"},
		{"dr-vale", RoleClinician, "correct horse battery", ""},
	} {
		err := CheckNewPassword(tc.name, tc.role, tc.pw)
		if tc.refuse == "" {
			if err != nil {
				t.Errorf("CheckNewPassword(%q, %s, %q) = %v, want accepted", tc.name, tc.role, tc.pw, err)
			}
			continue
		}
		var ae *AccountError
		if !errors.As(err, &ae) || !errors.Is(err, ErrBadAccount) {
			t.Errorf("CheckNewPassword(%q, %s, %q) = %v, want an AccountError", tc.name, tc.role, tc.pw, err)
			continue
		}
		if !strings.Contains(ae.Sentence(), tc.refuse) {
			t.Errorf("CheckNewPassword(%q, %s, %q) says %q, want it to say %q", tc.name, tc.role, tc.pw, ae.Sentence(), tc.refuse)
		}
		if strings.Contains(ae.Sentence(), tc.pw) {
			t.Errorf("the refusal of %q repeats the password: %q", tc.pw, ae.Sentence())
		}
	}
}

// TestCommonPasswordList checks the embedded list: 1,000 to 2,000 entries,
// each lower case, at least minListedBase characters, none twice.
func TestCommonPasswordList(t *testing.T) {
	seen := map[string]int{}
	for i, line := range strings.Split(commonPasswordsText, "\n") {
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		if line != strings.ToLower(line) || line != strings.TrimSpace(line) {
			t.Errorf("line %d %q: not lower case and trimmed", i+1, line)
		}
		if utf8.RuneCountInString(line) < minListedBase {
			t.Errorf("line %d %q: shorter than %d characters", i+1, line, minListedBase)
		}
		if j, dup := seen[line]; dup {
			t.Errorf("line %d %q: already on line %d", i+1, line, j)
		}
		seen[line] = i + 1
	}
	if n := CommonPasswords(); n < 1000 || n > 2000 || n != len(seen) {
		t.Errorf("the list holds %d entries (%d lines), want 1000 to 2000", n, len(seen))
	}
	if !strings.Contains(commonPasswordsText, "from memory") {
		t.Error("the list's header does not say how it was written")
	}
}

// TestLongPasswordNotTruncated: a password longer than bcrypt's 72 bytes
// is checked on every byte (NIST: no truncation).
func TestLongPasswordNotTruncated(t *testing.T) {
	st := openAccounts(t)
	ctx := context.Background()
	long := strings.Repeat("heron-", 16) + "end" // 99 bytes
	if _, err := st.CreateUser(ctx, "dr-vale", RoleClinician, long); err != nil {
		t.Fatal(err)
	}
	if _, err := st.CheckPassword(ctx, "dr-vale", long); err != nil {
		t.Errorf("the long password does not sign in: %v", err)
	}
	for _, wrong := range []string{long[:72], long[:len(long)-1] + "X", long + "!"} {
		if _, err := st.CheckPassword(ctx, "dr-vale", wrong); !errors.Is(err, ErrBadCredentials) {
			t.Errorf("a %d-byte variant of the long password signs in: %v", len(wrong), err)
		}
	}
}

// auditOf returns the audit log, oldest first, and fails the test when any
// entry holds one of the secrets.
func auditOf(t *testing.T, st *Store, secrets ...string) []AuditEntry {
	t.Helper()
	log, err := st.AuditLog(context.Background(), 1000)
	if err != nil {
		t.Fatal(err)
	}
	for i, j := 0, len(log)-1; i < j; i, j = i+1, j-1 {
		log[i], log[j] = log[j], log[i]
	}
	for _, e := range log {
		for _, s := range secrets {
			if strings.Contains(e.User+e.Subject+e.Client, s) {
				t.Errorf("audit entry %+v holds a password", e)
			}
		}
	}
	return log
}

func TestResetPassword(t *testing.T) {
	st := openAccounts(t)
	ctx := context.Background()
	const oldPW, newPW = "wren-ochre-1", "slate-quay-77"
	u, err := st.AddUser(ctx, cliActor, "dr-vale", RoleClinician, oldPW)
	if err != nil {
		t.Fatal(err)
	}
	tok, _, err := st.CreateSession(ctx, u, time.Hour)
	if err != nil {
		t.Fatal(err)
	}
	if err := st.ResetPassword(ctx, Actor{Name: "admin-oona", Client: "10.0.0.9"}, "dr-vale", "password1"); !errors.Is(err, ErrBadAccount) {
		t.Errorf("reset to a common password: %v, want ErrBadAccount", err)
	}
	if _, err := st.CheckPassword(ctx, "dr-vale", oldPW); err != nil {
		t.Errorf("a refused reset changed the password: %v", err)
	}
	if err := st.ResetPassword(ctx, Actor{Name: "admin-oona", Client: "10.0.0.9"}, "dr-vale", newPW); err != nil {
		t.Fatal(err)
	}
	if _, err := st.CheckPassword(ctx, "dr-vale", newPW); err != nil {
		t.Errorf("the reset password does not sign in: %v", err)
	}
	if _, err := st.CheckPassword(ctx, "dr-vale", oldPW); !errors.Is(err, ErrBadCredentials) {
		t.Errorf("the old password still signs in: %v", err)
	}
	if _, err := st.SessionByToken(ctx, tok); !errors.Is(err, ErrNoSession) {
		t.Errorf("session after reset: %v, want ErrNoSession", err)
	}
	if err := st.ResetPassword(ctx, cliActor, "nobody", newPW); !errors.Is(err, ErrNoUser) {
		t.Errorf("reset of an unknown user: %v", err)
	}
	log := auditOf(t, st, oldPW, newPW, "password1")
	want := []AuditEntry{
		{User: "cli:tester", Action: AuditUserCreated, Subject: "dr-vale (clinician)"},
		{User: "admin-oona", Action: AuditPasswordReset, Subject: "dr-vale", Client: "10.0.0.9"},
	}
	if len(log) != len(want) {
		t.Fatalf("audit log %+v, want %d entries", log, len(want))
	}
	for i, w := range want {
		if g := log[i]; g.User != w.User || g.Action != w.Action || g.Subject != w.Subject || g.Client != w.Client {
			t.Errorf("audit entry %d: %+v, want %+v", i, g, w)
		}
	}
}

func TestDisableEnableAndLastAdmin(t *testing.T) {
	st := openAccounts(t)
	ctx := context.Background()
	admin, err := st.CreateUser(ctx, "admin-oona", RoleAdmin, "tarn-fell-39x")
	if err != nil {
		t.Fatal(err)
	}
	vale, err := st.CreateUser(ctx, "dr-vale", RoleClinician, "wren-ochre-1")
	if err != nil {
		t.Fatal(err)
	}
	valeTok, _, _ := st.CreateSession(ctx, vale, time.Hour)
	adminTok, _, _ := st.CreateSession(ctx, admin, time.Hour)

	// The only admin: refused, nothing written, session kept.
	if _, err := st.SetDisabled(ctx, cliActor, "admin-oona", true); !errors.Is(err, ErrLastAdmin) {
		t.Fatalf("disable the last admin: %v, want ErrLastAdmin", err)
	}
	if err := st.SetRole(ctx, cliActor, "admin-oona", RoleClinician); !errors.Is(err, ErrLastAdmin) {
		t.Errorf("demote the last admin: %v, want ErrLastAdmin", err)
	}
	if _, err := st.SessionByToken(ctx, adminTok); err != nil {
		t.Errorf("a refused disable ended the admin's session: %v", err)
	}
	if !strings.Contains(ErrLastAdmin.Error(), "last enabled admin") {
		t.Errorf("ErrLastAdmin does not say why: %q", ErrLastAdmin)
	}

	// Disabling a clinician ends their session; a second disable changes nothing.
	for i, want := range []bool{true, false} {
		changed, err := st.SetDisabled(ctx, cliActor, "dr-vale", true)
		if err != nil || changed != want {
			t.Errorf("disable %d: changed %v, %v; want %v", i+1, changed, err, want)
		}
	}
	if _, err := st.SessionByToken(ctx, valeTok); !errors.Is(err, ErrNoSession) {
		t.Errorf("session of a disabled user: %v", err)
	}
	var rows int
	st.r.QueryRow(`SELECT count(*) FROM sessions WHERE user_id = ?`, vale.ID).Scan(&rows)
	if rows != 0 {
		t.Errorf("%d session rows of a disabled user left", rows)
	}
	if _, err := st.CheckPassword(ctx, "dr-vale", "wren-ochre-1"); !errors.Is(err, ErrBadCredentials) {
		t.Errorf("a disabled user signs in: %v", err)
	}
	if changed, err := st.SetDisabled(ctx, cliActor, "dr-vale", false); err != nil || !changed {
		t.Errorf("enable: %v %v", changed, err)
	}
	if _, err := st.CheckPassword(ctx, "dr-vale", "wren-ochre-1"); err != nil {
		t.Errorf("an enabled user cannot sign in: %v", err)
	}
	if _, err := st.SetDisabled(ctx, cliActor, "nobody", true); !errors.Is(err, ErrNoUser) {
		t.Errorf("disable unknown: %v", err)
	}

	// With a second admin the first may go; then the second is the last.
	if _, err := st.CreateUser(ctx, "admin-ilse", RoleAdmin, "tarn-fell-40y"); err != nil {
		t.Fatal(err)
	}
	if _, err := st.SetDisabled(ctx, Actor{Name: "admin-ilse"}, "admin-oona", true); err != nil {
		t.Errorf("disable one of two admins: %v", err)
	}
	if _, err := st.SetDisabled(ctx, cliActor, "admin-ilse", true); !errors.Is(err, ErrLastAdmin) {
		t.Errorf("disable the remaining admin: %v, want ErrLastAdmin", err)
	}
	var got []string
	for _, e := range auditOf(t, st, "wren-ochre-1", "tarn-fell") {
		got = append(got, e.User+" "+e.Action+" "+e.Subject)
	}
	want := []string{"cli:tester user_disabled dr-vale", "cli:tester user_enabled dr-vale", "admin-ilse user_disabled admin-oona"}
	if strings.Join(got, "|") != strings.Join(want, "|") {
		t.Errorf("audit log %q, want %q", got, want)
	}
}

func TestChangePassword(t *testing.T) {
	st := openAccounts(t)
	ctx := context.Background()
	const cur, next = "wren-ochre-1", "slate-quay-77"
	u, err := st.CreateUser(ctx, "dr-vale", RoleClinician, cur)
	if err != nil {
		t.Fatal(err)
	}
	here, _, _ := st.CreateSession(ctx, u, time.Hour)
	other, _, _ := st.CreateSession(ctx, u, time.Hour)
	me := Actor{Name: "dr-vale", Client: "10.0.0.4"}

	if err := st.ChangePassword(ctx, me, "not-the-current", next, here); !errors.Is(err, ErrBadCredentials) {
		t.Errorf("wrong current password: %v, want ErrBadCredentials", err)
	}
	if err := st.ChangePassword(ctx, me, cur, cur, here); !errors.Is(err, ErrSamePassword) {
		t.Errorf("same password: %v, want ErrSamePassword", err)
	}
	if err := st.ChangePassword(ctx, me, cur, "iloveyou2", here); !errors.Is(err, ErrBadAccount) {
		t.Errorf("common new password: %v, want ErrBadAccount", err)
	}
	for _, tok := range []string{here, other} {
		if _, err := st.SessionByToken(ctx, tok); err != nil {
			t.Fatalf("a refused change ended a session: %v", err)
		}
	}
	if err := st.ChangePassword(ctx, me, cur, next, here); err != nil {
		t.Fatal(err)
	}
	if _, err := st.SessionByToken(ctx, here); err != nil {
		t.Errorf("the session that made the change ended: %v", err)
	}
	if _, err := st.SessionByToken(ctx, other); !errors.Is(err, ErrNoSession) {
		t.Errorf("another session after the change: %v, want ErrNoSession", err)
	}
	if _, err := st.CheckPassword(ctx, "dr-vale", next); err != nil {
		t.Errorf("new password: %v", err)
	}
	if _, err := st.CheckPassword(ctx, "dr-vale", cur); !errors.Is(err, ErrBadCredentials) {
		t.Errorf("old password still signs in: %v", err)
	}
	var got []string
	for _, e := range auditOf(t, st, cur, next, "not-the-current", "iloveyou2") {
		got = append(got, e.User+" "+e.Action+" "+e.Subject+" "+e.Client)
	}
	want := []string{"dr-vale password_change_refused current password wrong 10.0.0.4", "dr-vale password_changed dr-vale 10.0.0.4"}
	if strings.Join(got, "|") != strings.Join(want, "|") {
		t.Errorf("audit log %q, want %q", got, want)
	}
}

// TestMigration5KeepsAuditLog upgrades a database made before 0005: its
// audit entries keep their ids and text, and the new actions are taken.
func TestMigration5KeepsAuditLog(t *testing.T) {
	all, err := migrations.All()
	if err != nil {
		t.Fatal(err)
	}
	if len(all) < 5 || all[4].Name != "0005_accounts_lifetime.sql" {
		t.Fatalf("migration 5 is %v", all[4].Name)
	}
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "v4.db")
	old, err := openAt(path, all[:4])
	if err != nil {
		t.Fatal(err)
	}
	if err := old.Audit(ctx, "dr-vale", AuditPatientView, "LW-0101", "10.0.0.4"); err != nil {
		t.Fatal(err)
	}
	if err := old.Audit(ctx, "dr-vale", AuditUserDisabled, "x", ""); err == nil {
		t.Error("the old schema took a lifetime action")
	}
	old.w.Close()
	old.r.Close()

	st, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	if v, _ := st.SchemaVersion(ctx); v != len(all) {
		t.Errorf("schema version %d, want %d", v, len(all))
	}
	for _, a := range []string{AuditUserDisabled, AuditUserEnabled, AuditPasswordReset, AuditPasswordChanged, AuditPasswordChangeRefused} {
		if err := st.Audit(ctx, "cli:tester", a, "dr-vale", ""); err != nil {
			t.Errorf("action %s refused after 0005: %v", a, err)
		}
	}
	if err := st.Audit(ctx, "cli:tester", "not_an_action", "", ""); err == nil {
		t.Error("an unknown action was taken after 0005")
	}
	log, err := st.AuditLog(ctx, 10)
	if err != nil {
		t.Fatal(err)
	}
	if first := log[len(log)-1]; len(log) != 6 || first.ID != 1 || first.Subject != "LW-0101" || first.Client != "10.0.0.4" {
		t.Errorf("old entry after 0005: %+v (%d entries)", first, len(log))
	}
	var strict int
	st.r.QueryRow(`SELECT strict FROM pragma_table_list WHERE name = 'audit_log'`).Scan(&strict)
	var idx int
	st.r.QueryRow(`SELECT count(*) FROM sqlite_schema WHERE type = 'index' AND name = 'audit_log_at'`).Scan(&idx)
	if strict != 1 || idx != 1 {
		t.Errorf("audit_log after 0005: strict %d, index %d; want 1 and 1", strict, idx)
	}
}

// TestAccountErrorWords: the sentences for people hold no key and start
// with a capital.
func TestAccountErrorWords(t *testing.T) {
	for _, pw := range []string{"x", "password1", "zzzzzzzzzz", "bcdefghij"} {
		var ae *AccountError
		if !errors.As(CheckNewPassword("dr-vale", RoleClinician, pw), &ae) {
			t.Fatalf("%q accepted", pw)
		}
		s := ae.Sentence()
		if !unicode.IsUpper([]rune(s)[0]) || !strings.HasSuffix(s, ".") || strings.Contains(s, "_") {
			t.Errorf("sentence %q", s)
		}
	}
}

// TestGeneratePassword: generated passwords have the stated length and
// alphabet, pass the rules for an admin named "abc", and differ from each
// other.
func TestGeneratePassword(t *testing.T) {
	seen := map[string]bool{}
	for range 50 {
		pw, err := GeneratePassword("abc", RoleAdmin)
		if err != nil {
			t.Fatal(err)
		}
		if len(pw) != GeneratedPasswordLength || strings.Trim(pw, generatedAlphabet) != "" {
			t.Errorf("generated %q: want %d characters of the alphabet", pw, GeneratedPasswordLength)
		}
		if err := CheckNewPassword("abc", RoleAdmin, pw); err != nil {
			t.Errorf("generated %q breaks a rule: %v", pw, err)
		}
		if seen[pw] {
			t.Errorf("generated %q twice", pw)
		}
		seen[pw] = true
	}
}
