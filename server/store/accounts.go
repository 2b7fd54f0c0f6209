package store

// Accounts of the web service: users with bcrypt password hashes, sign-in
// sessions with their CSRF token, failed sign-in counters and the audit log
// (migrations/0003_accounts.sql). Package server is the only caller.

import (
	"context"
	"crypto/rand"
	"crypto/sha256"
	"database/sql"
	"encoding/base64"
	"encoding/hex"
	"errors"
	"fmt"
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
)

// Limits of account values.
const (
	// MaxUserName is the longest sign-in name, in bytes.
	MaxUserName = 64
	// MinPassword is the shortest password accepted, in bytes; MaxPassword
	// the longest, bcrypt's own limit (it reads at most 72 bytes).
	MinPassword = 10
	MaxPassword = 72
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

// ValidRole reports whether role is one of the three roles.
func ValidRole(role string) bool {
	return role == RoleClinician || role == RoleCoordinator || role == RoleAdmin
}

// validUserName accepts 1–64 bytes of printable characters without spaces.
func validUserName(name string) error {
	if name == "" || len(name) > MaxUserName {
		return fmt.Errorf("%w: user name must be 1 to %d bytes", ErrBadAccount, MaxUserName)
	}
	for _, r := range name {
		if !unicode.IsPrint(r) || unicode.IsSpace(r) {
			return fmt.Errorf("%w: user name may hold only printable characters without spaces", ErrBadAccount)
		}
	}
	return nil
}

func validPassword(pw string) error {
	if len(pw) < MinPassword || len(pw) > MaxPassword {
		return fmt.Errorf("%w: password must be %d to %d bytes", ErrBadAccount, MinPassword, MaxPassword)
	}
	return nil
}

// CreateUser adds a user with a bcrypt hash (cost bcrypt.DefaultCost) of
// password. It returns ErrUserExists when the name is taken and ErrBadAccount
// for a bad name, role or password.
func (s *Store) CreateUser(ctx context.Context, name, role, password string) (User, error) {
	if err := validUserName(name); err != nil {
		return User{}, err
	}
	if !ValidRole(role) {
		return User{}, fmt.Errorf("%w: role must be clinician, coordinator or admin", ErrBadAccount)
	}
	if err := validPassword(password); err != nil {
		return User{}, err
	}
	hash, err := bcrypt.GenerateFromPassword([]byte(password), bcrypt.DefaultCost)
	if err != nil {
		return User{}, fmt.Errorf("store: hash password: %w", err)
	}
	now := s.now().UTC()
	res, err := s.w.ExecContext(ctx,
		`INSERT INTO users (name, role, password_hash, created_at) VALUES (?, ?, ?, ?)
		 ON CONFLICT (name) DO NOTHING`,
		name, role, string(hash), now.Format(time.RFC3339))
	if err != nil {
		return User{}, fmt.Errorf("store: create user: %w", err)
	}
	if n, err := res.RowsAffected(); err != nil {
		return User{}, fmt.Errorf("store: create user: %w", err)
	} else if n == 0 {
		return User{}, ErrUserExists
	}
	id, err := res.LastInsertId()
	if err != nil {
		return User{}, fmt.Errorf("store: create user: %w", err)
	}
	return User{ID: id, Name: name, Role: role, Created: now.Truncate(time.Second)}, nil
}

// SetPassword replaces a user's password hash and ends the user's sessions.
func (s *Store) SetPassword(ctx context.Context, name, password string) error {
	if err := validPassword(password); err != nil {
		return err
	}
	hash, err := bcrypt.GenerateFromPassword([]byte(password), bcrypt.DefaultCost)
	if err != nil {
		return fmt.Errorf("store: hash password: %w", err)
	}
	return s.changeUser(ctx, name, `UPDATE users SET password_hash = ? WHERE name = ?`, string(hash), name)
}

// SetRole changes a user's role and ends the user's sessions, so the new
// role applies from the next sign-in.
func (s *Store) SetRole(ctx context.Context, name, role string) error {
	if !ValidRole(role) {
		return fmt.Errorf("%w: role must be clinician, coordinator or admin", ErrBadAccount)
	}
	return s.changeUser(ctx, name, `UPDATE users SET role = ? WHERE name = ?`, role, name)
}

// SetDisabled disables or enables a user; disabling ends the user's sessions.
func (s *Store) SetDisabled(ctx context.Context, name string, disabled bool) error {
	v := 0
	if disabled {
		v = 1
	}
	return s.changeUser(ctx, name, `UPDATE users SET disabled = ? WHERE name = ?`, v, name)
}

func (s *Store) changeUser(ctx context.Context, name, query string, args ...any) (err error) {
	tx, err := s.w.BeginTx(ctx, nil)
	if err != nil {
		return fmt.Errorf("store: change user: %w", err)
	}
	defer func() {
		if err != nil {
			_ = tx.Rollback()
		}
	}()
	res, err := tx.ExecContext(ctx, query, args...)
	if err != nil {
		return fmt.Errorf("store: change user: %w", err)
	}
	if n, err := res.RowsAffected(); err != nil {
		return fmt.Errorf("store: change user: %w", err)
	} else if n == 0 {
		return ErrNoUser
	}
	if _, err := tx.ExecContext(ctx,
		`DELETE FROM sessions WHERE user_id = (SELECT id FROM users WHERE name = ?)`, name); err != nil {
		return fmt.Errorf("store: change user: end sessions: %w", err)
	}
	if err := tx.Commit(); err != nil {
		return fmt.Errorf("store: change user: %w", err)
	}
	return nil
}

// dummyHash is compared against when the user does not exist, so that an
// unknown name costs the same bcrypt work as a wrong password (no timing
// oracle for which names exist). It is the hash of a random string.
var dummyHash = func() []byte {
	b := make([]byte, 24)
	_, _ = rand.Read(b)
	h, err := bcrypt.GenerateFromPassword(b, bcrypt.DefaultCost)
	if err != nil {
		panic("store: cannot make the dummy bcrypt hash: " + err.Error()) // programmer error: bcrypt refuses its own default cost
	}
	return h
}()

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
	if errors.Is(err, sql.ErrNoRows) || len(password) > MaxPassword {
		_ = bcrypt.CompareHashAndPassword(dummyHash, []byte(password))
		return User{}, ErrBadCredentials
	}
	if err != nil {
		return User{}, fmt.Errorf("store: check password: %w", err)
	}
	if err := bcrypt.CompareHashAndPassword([]byte(hash), []byte(password)); err != nil {
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
