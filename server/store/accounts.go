package store

// Accounts of the web service: users with bcrypt password hashes, sign-in
// sessions with their CSRF token, failed sign-in counters and the audit log
// (migrations/0003_accounts.sql, 0005_accounts_lifetime.sql). Package
// server and the command line's "user" command are the callers.
//
// Every change to an account over its lifetime (added, disabled, enabled,
// password reset by an admin, password changed by its user, role changed)
// is written to the audit log in the same transaction as the change, with
// the Actor who made it, so no change goes unaudited and no audit entry
// names a change that did not happen. No audit entry holds a password.

import (
	"context"
	"crypto/rand"
	"crypto/sha256"
	"database/sql"
	"encoding/base64"
	"encoding/hex"
	"errors"
	"fmt"
	"sync"
	"time"
	"unicode"
	"unicode/utf8"

	"golang.org/x/crypto/bcrypt"
)

// Roles of a user. What each may do is decided in package server.
const (
	RoleClinician   = "clinician"
	RoleCoordinator = "coordinator"
	RoleAdmin       = "admin"
)

// Audit actions (the CHECK list of audit_log.action).
const (
	AuditSignIn       = "sign_in"
	AuditSignInFailed = "sign_in_failed"
	AuditSignOut      = "sign_out"
	AuditPatientView  = "patient_view"
	AuditVisitView    = "visit_view"
	AuditIngest       = "ingest"
	AuditIngestFailed = "ingest_failed"
	AuditExport       = "export"
	AuditUserCreated  = "user_created"
	AuditUserChanged  = "user_changed"
	// Added by migration 0005: an account's lifetime.
	AuditUserDisabled          = "user_disabled"
	AuditUserEnabled           = "user_enabled"
	AuditPasswordReset         = "password_reset"
	AuditPasswordChanged       = "password_changed"
	AuditPasswordChangeRefused = "password_change_refused"
)

// Limits of account values (the password lengths are in passwords.go).
const (
	// MaxUserName is the longest sign-in name, in bytes.
	MaxUserName = 64
	// maxPasswordBytes bounds the bytes of a password checked at sign-in
	// (MaxPassword characters of at most 4 bytes each); anything longer is
	// refused before any hashing.
	maxPasswordBytes = 4 * MaxPassword
	// sessionTokenBytes and csrfTokenBytes are the random bytes behind a
	// session cookie and a CSRF token (256 bits each).
	sessionTokenBytes = 32
	csrfTokenBytes    = 32
)

// Account errors that callers branch on with errors.Is.
var (
	ErrBadCredentials = errors.New("store: unknown user or wrong password")
	ErrNoSession      = errors.New("store: no such session or session expired")
	ErrUserExists     = errors.New("store: a user of that name exists")
	ErrNoUser         = errors.New("store: no such user")
	ErrBadAccount     = errors.New("store: invalid account value")
	// ErrLastAdmin refuses to disable or demote the only enabled admin:
	// without one nobody could manage the accounts from the web service.
	ErrLastAdmin = errors.New("store: the last enabled admin cannot be disabled or given another role (nobody could manage accounts); enable or add another admin first")
	// ErrSamePassword refuses a new password equal to the current one.
	ErrSamePassword = errors.New("store: the new password is the same as the current one")
)

// User is an account of the web service.
type User struct {
	ID       int64
	Name     string
	Role     string
	Created  time.Time
	Disabled bool
}

// Session is a signed-in session: its user, its CSRF token and when it ends.
type Session struct {
	User    User
	CSRF    string
	Expires time.Time
}

// AuditEntry is one line of the audit log.
type AuditEntry struct {
	ID      int64
	At      time.Time
	User    string
	Action  string
	Subject string
	Client  string
}

// Actor is who makes an account change, as the audit log names them: the
// signed-in user's name and client address for the web service, or
// "cli:<name>" and no address for the command line.
type Actor struct {
	Name   string
	Client string
}

// ValidRole reports whether role is one of the three roles.
func ValidRole(role string) bool {
	return role == RoleClinician || role == RoleCoordinator || role == RoleAdmin
}

// validUserName accepts 1–64 bytes of printable characters without spaces.
func validUserName(name string) error {
	if name == "" || len(name) > MaxUserName {
		return &AccountError{Field: "user name", Reason: fmt.Sprintf("must be 1 to %d bytes", MaxUserName)}
	}
	for _, r := range name {
		if !unicode.IsPrint(r) || unicode.IsSpace(r) {
			return &AccountError{Field: "user name", Reason: "may hold only printable characters without spaces"}
		}
	}
	return nil
}

func validRole(role string) error {
	if !ValidRole(role) {
		return &AccountError{Field: "role", Reason: "must be clinician, coordinator or admin"}
	}
	return nil
}

// hashPassword is the bcrypt hash (cost bcrypt.DefaultCost) of a password.
func hashPassword(password string) (string, error) {
	hash, err := bcrypt.GenerateFromPassword(bcryptInput(password), bcrypt.DefaultCost)
	if err != nil {
		return "", fmt.Errorf("store: hash password: %w", err)
	}
	return string(hash), nil
}

// auditTx appends an audit entry inside an account change's transaction.
func (s *Store) auditTx(ctx context.Context, tx *sql.Tx, by Actor, action, subject string) error {
	if _, err := tx.ExecContext(ctx,
		`INSERT INTO audit_log (at, user_name, action, subject, client) VALUES (?, ?, ?, ?, ?)`,
		s.now().UTC().Format(time.RFC3339Nano), truncate(by.Name, 200), action, truncate(subject, 500), truncate(by.Client, 100)); err != nil {
		return fmt.Errorf("store: audit %s: %w", action, err)
	}
	return nil
}

// CreateUser adds a user with a bcrypt hash of password and writes no
// audit entry (tests and first set-up; the user command and the users
// screen call AddUser). It returns ErrUserExists when the name is taken and
// an *AccountError (ErrBadAccount) for a bad name, role or password.
func (s *Store) CreateUser(ctx context.Context, name, role, password string) (User, error) {
	return s.createUser(ctx, nil, name, role, password)
}

// AddUser is CreateUser with a user_created audit entry naming by, in the
// same transaction.
func (s *Store) AddUser(ctx context.Context, by Actor, name, role, password string) (User, error) {
	return s.createUser(ctx, &by, name, role, password)
}

func (s *Store) createUser(ctx context.Context, by *Actor, name, role, password string) (_ User, err error) {
	if err := validUserName(name); err != nil {
		return User{}, err
	}
	if err := validRole(role); err != nil {
		return User{}, err
	}
	if err := CheckNewPassword(name, role, password); err != nil {
		return User{}, err
	}
	hash, err := hashPassword(password)
	if err != nil {
		return User{}, err
	}
	now := s.now().UTC()
	var id int64
	err = s.inTx(ctx, func(tx *sql.Tx) error {
		res, err := tx.ExecContext(ctx,
			`INSERT INTO users (name, role, password_hash, created_at) VALUES (?, ?, ?, ?)
			 ON CONFLICT (name) DO NOTHING`,
			name, role, hash, now.Format(time.RFC3339))
		if err != nil {
			return err
		}
		if n, err := res.RowsAffected(); err != nil {
			return err
		} else if n == 0 {
			return ErrUserExists
		}
		if id, err = res.LastInsertId(); err != nil {
			return err
		}
		if by != nil {
			return s.auditTx(ctx, tx, *by, AuditUserCreated, name+" ("+role+")")
		}
		return nil
	})
	if errors.Is(err, ErrUserExists) {
		return User{}, ErrUserExists
	}
	if err != nil {
		return User{}, fmt.Errorf("store: create user %s: %w", name, err)
	}
	return User{ID: id, Name: name, Role: role, Created: now.Truncate(time.Second)}, nil
}

// User returns the user of a name, or ErrNoUser.
func (s *Store) User(ctx context.Context, name string) (User, error) {
	return s.userBy(ctx, s.r, name)
}

func (s *Store) userBy(ctx context.Context, q querier, name string) (User, error) {
	var (
		u        User
		created  string
		disabled int
	)
	err := q.QueryRowContext(ctx, `SELECT id, name, role, created_at, disabled FROM users WHERE name = ?`, name).
		Scan(&u.ID, &u.Name, &u.Role, &created, &disabled)
	if errors.Is(err, sql.ErrNoRows) {
		return User{}, ErrNoUser
	}
	if err != nil {
		return User{}, fmt.Errorf("store: user %s: %w", name, err)
	}
	u.Created, _ = time.Parse(time.RFC3339, created)
	u.Disabled = disabled != 0
	return u, nil
}

// ResetPassword gives a user a new password chosen by an admin (or the
// command line), ends all the user's sessions and audits password_reset,
// in one transaction. The rules of CheckNewPassword apply with the user's
// role. ErrNoUser when there is no such user.
func (s *Store) ResetPassword(ctx context.Context, by Actor, name, password string) error {
	u, err := s.User(ctx, name)
	if err != nil {
		return err
	}
	if err := CheckNewPassword(u.Name, u.Role, password); err != nil {
		return err
	}
	hash, err := hashPassword(password)
	if err != nil {
		return err
	}
	// bcrypt ran outside the transaction; the role it was checked against
	// must still be the user's.
	err = s.inTx(ctx, func(tx *sql.Tx) error {
		res, err := tx.ExecContext(ctx, `UPDATE users SET password_hash = ? WHERE id = ? AND role = ?`, hash, u.ID, u.Role)
		if err != nil {
			return err
		}
		if n, err := res.RowsAffected(); err != nil {
			return err
		} else if n == 0 {
			return ErrNoUser
		}
		if _, err := tx.ExecContext(ctx, `DELETE FROM sessions WHERE user_id = ?`, u.ID); err != nil {
			return fmt.Errorf("end sessions: %w", err)
		}
		return s.auditTx(ctx, tx, by, AuditPasswordReset, u.Name)
	})
	if errors.Is(err, ErrNoUser) {
		return ErrNoUser
	}
	if err != nil {
		return fmt.Errorf("store: reset password of %s: %w", name, err)
	}
	return nil
}

// ChangePassword is a signed-in user changing their own password: the
// current password must match (else ErrBadCredentials, audited as
// password_change_refused), the new one must pass CheckNewPassword and
// differ from it (ErrSamePassword). Every other session of the user ends;
// the session of keepToken (the one making the change) stays. by.Name is
// the user.
func (s *Store) ChangePassword(ctx context.Context, by Actor, current, next, keepToken string) error {
	var (
		u        User
		old      string
		disabled int
	)
	err := s.r.QueryRowContext(ctx, `SELECT id, name, role, password_hash, disabled FROM users WHERE name = ?`, by.Name).
		Scan(&u.ID, &u.Name, &u.Role, &old, &disabled)
	if errors.Is(err, sql.ErrNoRows) {
		return ErrNoUser
	}
	if err != nil {
		return fmt.Errorf("store: change password of %s: %w", by.Name, err)
	}
	if disabled != 0 {
		return ErrNoUser
	}
	if len(current) > maxPasswordBytes || bcrypt.CompareHashAndPassword([]byte(old), bcryptInput(current)) != nil {
		if err := s.Audit(ctx, by.Name, AuditPasswordChangeRefused, "current password wrong", by.Client); err != nil {
			return err
		}
		return ErrBadCredentials
	}
	if next == current {
		return ErrSamePassword
	}
	if err := CheckNewPassword(u.Name, u.Role, next); err != nil {
		return err
	}
	hash, err := hashPassword(next)
	if err != nil {
		return err
	}
	err = s.inTx(ctx, func(tx *sql.Tx) error {
		// Only if the hash is still the one the current password matched:
		// a reset in between wins.
		res, err := tx.ExecContext(ctx, `UPDATE users SET password_hash = ? WHERE id = ? AND password_hash = ? AND disabled = 0`, hash, u.ID, old)
		if err != nil {
			return err
		}
		if n, err := res.RowsAffected(); err != nil {
			return err
		} else if n == 0 {
			return ErrBadCredentials
		}
		if _, err := tx.ExecContext(ctx, `DELETE FROM sessions WHERE user_id = ? AND token_hash <> ?`, u.ID, tokenHash(keepToken)); err != nil {
			return fmt.Errorf("end other sessions: %w", err)
		}
		return s.auditTx(ctx, tx, by, AuditPasswordChanged, u.Name)
	})
	if errors.Is(err, ErrBadCredentials) {
		return ErrBadCredentials
	}
	if err != nil {
		return fmt.Errorf("store: change password of %s: %w", by.Name, err)
	}
	return nil
}

// SetRole changes a user's role, ends the user's sessions (the new role
// applies from the next sign-in) and audits user_changed. The last enabled
// admin keeps the role (ErrLastAdmin).
func (s *Store) SetRole(ctx context.Context, by Actor, name, role string) error {
	if err := validRole(role); err != nil {
		return err
	}
	err := s.inTx(ctx, func(tx *sql.Tx) error {
		u, err := s.userBy(ctx, tx, name)
		if err != nil {
			return err
		}
		if u.Role == role {
			return nil
		}
		if u.Role == RoleAdmin && !u.Disabled {
			if err := lastAdminGuard(ctx, tx); err != nil {
				return err
			}
		}
		if _, err := tx.ExecContext(ctx, `UPDATE users SET role = ? WHERE id = ?`, role, u.ID); err != nil {
			return err
		}
		if _, err := tx.ExecContext(ctx, `DELETE FROM sessions WHERE user_id = ?`, u.ID); err != nil {
			return fmt.Errorf("end sessions: %w", err)
		}
		return s.auditTx(ctx, tx, by, AuditUserChanged, u.Name+": role "+u.Role+" → "+role)
	})
	if errors.Is(err, ErrNoUser) || errors.Is(err, ErrLastAdmin) {
		return err
	}
	if err != nil {
		return fmt.Errorf("store: set role of %s: %w", name, err)
	}
	return nil
}

// lastAdminGuard returns ErrLastAdmin when at most one enabled admin is
// left (the one about to be disabled or demoted).
func lastAdminGuard(ctx context.Context, tx *sql.Tx) error {
	var n int
	if err := tx.QueryRowContext(ctx, `SELECT count(*) FROM users WHERE role = 'admin' AND disabled = 0`).Scan(&n); err != nil {
		return err
	}
	if n <= 1 {
		return ErrLastAdmin
	}
	return nil
}

// SetDisabled disables or enables a user and audits user_disabled or
// user_enabled, in one transaction; disabling ends all the user's sessions
// in the same transaction. It reports whether anything changed (false when
// the user already was in that state: nothing is written). The last
// enabled admin cannot be disabled (ErrLastAdmin).
func (s *Store) SetDisabled(ctx context.Context, by Actor, name string, disabled bool) (changed bool, err error) {
	err = s.inTx(ctx, func(tx *sql.Tx) error {
		u, err := s.userBy(ctx, tx, name)
		if err != nil {
			return err
		}
		if u.Disabled == disabled {
			return nil
		}
		v, action := 0, AuditUserEnabled
		if disabled {
			v, action = 1, AuditUserDisabled
			if u.Role == RoleAdmin {
				if err := lastAdminGuard(ctx, tx); err != nil {
					return err
				}
			}
		}
		if _, err := tx.ExecContext(ctx, `UPDATE users SET disabled = ? WHERE id = ?`, v, u.ID); err != nil {
			return err
		}
		if disabled {
			if _, err := tx.ExecContext(ctx, `DELETE FROM sessions WHERE user_id = ?`, u.ID); err != nil {
				return fmt.Errorf("end sessions: %w", err)
			}
		}
		changed = true
		return s.auditTx(ctx, tx, by, action, u.Name)
	})
	if errors.Is(err, ErrNoUser) || errors.Is(err, ErrLastAdmin) {
		return false, err
	}
	if err != nil {
		return false, fmt.Errorf("store: set disabled of %s: %w", name, err)
	}
	return changed, nil
}

// dummyHash is compared against when the user does not exist, so that an
// unknown name costs the same bcrypt work as a wrong password (no timing
// oracle for which names exist). It is the hash of a random string, made
// on first use rather than at start-up: bcrypt at its default cost takes
// about 70 ms, which every command of the binary would otherwise pay,
// including those that never check a password. The server makes it when
// it starts (PreparePasswordChecks), so no sign-in pays for it.
var dummyHash = sync.OnceValue(func() []byte {
	b := make([]byte, 24)
	_, _ = rand.Read(b)
	h, err := bcrypt.GenerateFromPassword(b, bcrypt.DefaultCost)
	if err != nil {
		panic("store: cannot make the dummy bcrypt hash: " + err.Error()) // programmer error: bcrypt refuses its own default cost
	}
	return h
})

// PreparePasswordChecks does once, ahead of the first sign-in, the work
// CheckPassword needs for an unknown name, so that the first such attempt
// takes no longer than later ones.
func PreparePasswordChecks() { dummyHash() }

// CheckPassword returns the user when name and password match an enabled
// user, else ErrBadCredentials (the same error for an unknown name, a wrong
// password and a disabled user).
func (s *Store) CheckPassword(ctx context.Context, name, password string) (User, error) {
	var (
		u        User
		hash     string
		created  string
		disabled int
	)
	err := s.r.QueryRowContext(ctx,
		`SELECT id, name, role, password_hash, created_at, disabled FROM users WHERE name = ?`, name).
		Scan(&u.ID, &u.Name, &u.Role, &hash, &created, &disabled)
	if errors.Is(err, sql.ErrNoRows) || len(password) > maxPasswordBytes {
		_ = bcrypt.CompareHashAndPassword(dummyHash(), bcryptInput(password))
		return User{}, ErrBadCredentials
	}
	if err != nil {
		return User{}, fmt.Errorf("store: check password: %w", err)
	}
	if err := bcrypt.CompareHashAndPassword([]byte(hash), bcryptInput(password)); err != nil {
		return User{}, ErrBadCredentials
	}
	if disabled != 0 {
		return User{}, ErrBadCredentials
	}
	u.Created, _ = time.Parse(time.RFC3339, created)
	return u, nil
}

// Users lists every user by name.
func (s *Store) Users(ctx context.Context) ([]User, error) {
	rows, err := s.r.QueryContext(ctx,
		`SELECT id, name, role, created_at, disabled FROM users ORDER BY name`)
	if err != nil {
		return nil, fmt.Errorf("store: users: %w", err)
	}
	defer rows.Close()
	var out []User
	for rows.Next() {
		var (
			u        User
			created  string
			disabled int
		)
		if err := rows.Scan(&u.ID, &u.Name, &u.Role, &created, &disabled); err != nil {
			return nil, fmt.Errorf("store: users: %w", err)
		}
		u.Created, _ = time.Parse(time.RFC3339, created)
		u.Disabled = disabled != 0
		out = append(out, u)
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("store: users: %w", err)
	}
	return out, nil
}

// randomToken returns n random bytes as unpadded base64url text.
func randomToken(n int) (string, error) {
	b := make([]byte, n)
	if _, err := rand.Read(b); err != nil {
		return "", fmt.Errorf("store: random token: %w", err)
	}
	return base64.RawURLEncoding.EncodeToString(b), nil
}

// tokenHash is the hex SHA-256 of a session token, the key kept in the
// sessions table.
func tokenHash(token string) string {
	h := sha256.Sum256([]byte(token))
	return hex.EncodeToString(h[:])
}

// CreateSession starts a session for the user lasting ttl and returns the
// cookie token (only its SHA-256 is stored) and the session. Expired
// sessions of every user are removed on the way.
func (s *Store) CreateSession(ctx context.Context, user User, ttl time.Duration) (string, Session, error) {
	token, err := randomToken(sessionTokenBytes)
	if err != nil {
		return "", Session{}, err
	}
	csrf, err := randomToken(csrfTokenBytes)
	if err != nil {
		return "", Session{}, err
	}
	now := s.now().UTC()
	exp := now.Add(ttl).Truncate(time.Second)
	if _, err := s.w.ExecContext(ctx, `DELETE FROM sessions WHERE expires_at <= ?`, now.Format(time.RFC3339)); err != nil {
		return "", Session{}, fmt.Errorf("store: create session: purge: %w", err)
	}
	if _, err := s.w.ExecContext(ctx,
		`INSERT INTO sessions (token_hash, user_id, csrf_token, created_at, expires_at) VALUES (?, ?, ?, ?, ?)`,
		tokenHash(token), user.ID, csrf, now.Format(time.RFC3339), exp.Format(time.RFC3339)); err != nil {
		return "", Session{}, fmt.Errorf("store: create session: %w", err)
	}
	return token, Session{User: user, CSRF: csrf, Expires: exp}, nil
}

// SessionByToken returns the live session of a cookie token, or ErrNoSession
// when there is none, it has expired, or its user is disabled.
func (s *Store) SessionByToken(ctx context.Context, token string) (Session, error) {
	if token == "" || len(token) > 128 {
		return Session{}, ErrNoSession
	}
	var (
		sess     Session
		exp      string
		disabled int
		created  string
	)
	err := s.r.QueryRowContext(ctx,
		`SELECT u.id, u.name, u.role, u.created_at, u.disabled, s.csrf_token, s.expires_at
		 FROM sessions s JOIN users u ON u.id = s.user_id WHERE s.token_hash = ?`, tokenHash(token)).
		Scan(&sess.User.ID, &sess.User.Name, &sess.User.Role, &created, &disabled, &sess.CSRF, &exp)
	if errors.Is(err, sql.ErrNoRows) {
		return Session{}, ErrNoSession
	}
	if err != nil {
		return Session{}, fmt.Errorf("store: session: %w", err)
	}
	sess.Expires, err = time.Parse(time.RFC3339, exp)
	if err != nil {
		return Session{}, fmt.Errorf("store: session: expiry %q: %w", exp, err)
	}
	if disabled != 0 || !s.now().Before(sess.Expires) {
		return Session{}, ErrNoSession
	}
	sess.User.Created, _ = time.Parse(time.RFC3339, created)
	return sess, nil
}

// DeleteSession ends the session of a cookie token (no error when none).
func (s *Store) DeleteSession(ctx context.Context, token string) error {
	if _, err := s.w.ExecContext(ctx, `DELETE FROM sessions WHERE token_hash = ?`, tokenHash(token)); err != nil {
		return fmt.Errorf("store: delete session: %w", err)
	}
	return nil
}

// Failed sign-in counter keys.
func failureKeyName(name string) string { return "name:" + name }
func failureKeyAddr(addr string) string { return "addr:" + addr }

// SignInFailures returns the larger of the failed sign-in counts of a user
// name and of a client address, counting rows whose last failure is older
// than window as zero.
func (s *Store) SignInFailures(ctx context.Context, name, addr string, window time.Duration) (int, error) {
	cutoff := s.now().UTC().Add(-window).Format(time.RFC3339)
	var n sql.NullInt64
	err := s.r.QueryRowContext(ctx,
		`SELECT max(failures) FROM sign_in_failures WHERE key IN (?, ?) AND last_failed > ?`,
		failureKeyName(name), failureKeyAddr(addr), cutoff).Scan(&n)
	if err != nil {
		return 0, fmt.Errorf("store: sign-in failures: %w", err)
	}
	return int(n.Int64), nil
}

// RecordSignInFailure adds one to the counters of name and addr (a counter
// older than window starts again from one).
func (s *Store) RecordSignInFailure(ctx context.Context, name, addr string, window time.Duration) error {
	now := s.now().UTC()
	cutoff := now.Add(-window).Format(time.RFC3339)
	for _, key := range []string{failureKeyName(name), failureKeyAddr(addr)} {
		if _, err := s.w.ExecContext(ctx,
			`INSERT INTO sign_in_failures (key, failures, last_failed) VALUES (?, 1, ?)
			 ON CONFLICT (key) DO UPDATE SET
			   failures = CASE WHEN last_failed > ? THEN failures + 1 ELSE 1 END,
			   last_failed = excluded.last_failed`,
			key, now.Format(time.RFC3339), cutoff); err != nil {
			return fmt.Errorf("store: record sign-in failure: %w", err)
		}
	}
	return nil
}

// ClearSignInFailures resets the counters of name and addr after a
// successful sign-in.
func (s *Store) ClearSignInFailures(ctx context.Context, name, addr string) error {
	if _, err := s.w.ExecContext(ctx, `DELETE FROM sign_in_failures WHERE key IN (?, ?)`,
		failureKeyName(name), failureKeyAddr(addr)); err != nil {
		return fmt.Errorf("store: clear sign-in failures: %w", err)
	}
	return nil
}

// Audit appends an entry to the audit log at the store's clock time.
func (s *Store) Audit(ctx context.Context, user, action, subject, client string) error {
	if _, err := s.w.ExecContext(ctx,
		`INSERT INTO audit_log (at, user_name, action, subject, client) VALUES (?, ?, ?, ?, ?)`,
		s.now().UTC().Format(time.RFC3339Nano), truncate(user, 200), action, truncate(subject, 500), truncate(client, 100)); err != nil {
		return fmt.Errorf("store: audit %s: %w", action, err)
	}
	return nil
}

// AuditBatch appends several entries in one transaction (the server's
// group commit: one write for many concurrent patient views). Entries with
// a zero At get the store's clock time.
func (s *Store) AuditBatch(ctx context.Context, entries []AuditEntry) (err error) {
	if len(entries) == 0 {
		return nil
	}
	tx, err := s.w.BeginTx(ctx, nil)
	if err != nil {
		return fmt.Errorf("store: audit: %w", err)
	}
	defer func() {
		if err != nil {
			_ = tx.Rollback()
		}
	}()
	stmt, err := tx.PrepareContext(ctx, `INSERT INTO audit_log (at, user_name, action, subject, client) VALUES (?, ?, ?, ?, ?)`)
	if err != nil {
		return fmt.Errorf("store: audit: %w", err)
	}
	defer stmt.Close()
	now := s.now().UTC()
	for _, e := range entries {
		at := e.At
		if at.IsZero() {
			at = now
		}
		if _, err := stmt.ExecContext(ctx, at.UTC().Format(time.RFC3339Nano), truncate(e.User, 200), e.Action,
			truncate(e.Subject, 500), truncate(e.Client, 100)); err != nil {
			return fmt.Errorf("store: audit %s: %w", e.Action, err)
		}
	}
	if err := tx.Commit(); err != nil {
		return fmt.Errorf("store: audit: %w", err)
	}
	return nil
}

// truncate cuts s to at most n bytes without splitting a UTF-8 sequence.
func truncate(s string, n int) string {
	if len(s) <= n {
		return s
	}
	s = s[:n]
	for len(s) > 0 && !utf8.ValidString(s) {
		s = s[:len(s)-1]
	}
	return s
}

// AuditLog returns the latest entries, newest first, at most limit.
func (s *Store) AuditLog(ctx context.Context, limit int) ([]AuditEntry, error) {
	rows, err := s.r.QueryContext(ctx,
		`SELECT id, at, user_name, action, subject, client FROM audit_log ORDER BY id DESC LIMIT ?`, limit)
	if err != nil {
		return nil, fmt.Errorf("store: audit log: %w", err)
	}
	defer rows.Close()
	var out []AuditEntry
	for rows.Next() {
		var (
			e  AuditEntry
			at string
		)
		if err := rows.Scan(&e.ID, &at, &e.User, &e.Action, &e.Subject, &e.Client); err != nil {
			return nil, fmt.Errorf("store: audit log: %w", err)
		}
		e.At, _ = time.Parse(time.RFC3339Nano, at)
		out = append(out, e)
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("store: audit log: %w", err)
	}
	return out, nil
}
