-- 0003: accounts of the web service (owner: package server, helper "web").
-- Users with bcrypt password hashes, sign-in sessions, the audit log and the
-- failed sign-in counters that drive the growing delay. Times are UTC
-- RFC 3339 text from the store's injected clock.

-- A user of the web service. The role decides what the user may do (the
-- matrix is in server/API.md and server/auth.go). The hash is bcrypt's
-- modular-crypt text ("$2a$" or "$2b$" and the cost), never a plain password.
CREATE TABLE users (
    id            INTEGER PRIMARY KEY,
    name          TEXT NOT NULL UNIQUE
                  -- sign-in names are short, printable and case-sensitive
                  CHECK (length(name) BETWEEN 1 AND 64),
    role          TEXT NOT NULL
                  CHECK (role IN ('clinician', 'coordinator', 'admin')),
    password_hash TEXT NOT NULL CHECK (substr(password_hash, 1, 2) = '$2'),
    created_at    TEXT NOT NULL,
    -- disabled users keep their audit history but cannot sign in
    disabled      INTEGER NOT NULL DEFAULT 0 CHECK (disabled IN (0, 1))
) STRICT;

-- A signed-in session. Only the SHA-256 of the cookie token is kept, so a
-- copy of the database does not hand out live sessions. The CSRF token is
-- per session and sent back in every form (hidden field) and XHR (header).
CREATE TABLE sessions (
    token_hash TEXT PRIMARY KEY CHECK (length(token_hash) = 64),
    user_id    INTEGER NOT NULL REFERENCES users (id) ON DELETE CASCADE,
    csrf_token TEXT NOT NULL CHECK (length(csrf_token) >= 32),
    created_at TEXT NOT NULL,
    expires_at TEXT NOT NULL
) STRICT;

CREATE INDEX sessions_user ON sessions (user_id);

-- The audit log: every sign-in (success and failure), patient view, ingest
-- and export. Append-only; user_name is kept as text so that an entry
-- outlives its user and a failed sign-in can name the name that was tried.
CREATE TABLE audit_log (
    id        INTEGER PRIMARY KEY,
    at        TEXT NOT NULL,
    user_name TEXT NOT NULL,
    action    TEXT NOT NULL CHECK (action IN (
                  'sign_in', 'sign_in_failed', 'sign_out', 'patient_view',
                  'visit_view', 'ingest', 'ingest_failed', 'export',
                  'user_created', 'user_changed')),
    subject   TEXT NOT NULL DEFAULT '',
    client    TEXT NOT NULL DEFAULT ''
) STRICT;

CREATE INDEX audit_log_at ON audit_log (at);

-- Failed sign-in counters, one row per key: "name:<user name>" or
-- "addr:<client address>". The delay before the next attempt grows with the
-- count; a success clears the name's row, and a row older than the reset
-- window counts as zero.
CREATE TABLE sign_in_failures (
    key         TEXT PRIMARY KEY,
    failures    INTEGER NOT NULL CHECK (failures >= 0),
    last_failed TEXT NOT NULL
) STRICT;
