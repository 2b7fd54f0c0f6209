-- 0005: accounts over their lifetime (owner: package server, helper
-- "accounts"). The audit log learns the actions of an account's life after
-- it is added: disabled, enabled, password reset by an admin or the command
-- line, password changed by its own user, and a refused change (wrong
-- current password). user_name is who acted (a signed-in user, or
-- "cli:<name>" for the command line); subject is the account acted on.
-- Passwords never appear in the log.
--
-- SQLite cannot change a CHECK constraint in place, so the table is built
-- again with the longer list and its rows copied across, ids and all
-- (sqlite.org/lang_altertable.html, "making other kinds of table schema
-- changes"). Nothing references audit_log, so no foreign key is involved.

CREATE TABLE audit_log_0005 (
    id        INTEGER PRIMARY KEY,
    at        TEXT NOT NULL,
    user_name TEXT NOT NULL,
    action    TEXT NOT NULL CHECK (action IN (
                  'sign_in', 'sign_in_failed', 'sign_out', 'patient_view',
                  'visit_view', 'ingest', 'ingest_failed', 'export',
                  'user_created', 'user_changed',
                  'user_disabled', 'user_enabled', 'password_reset',
                  'password_changed', 'password_change_refused')),
    subject   TEXT NOT NULL DEFAULT '',
    client    TEXT NOT NULL DEFAULT ''
) STRICT;

INSERT INTO audit_log_0005 (id, at, user_name, action, subject, client)
    SELECT id, at, user_name, action, subject, client FROM audit_log ORDER BY id;

DROP TABLE audit_log;

ALTER TABLE audit_log_0005 RENAME TO audit_log;

CREATE INDEX audit_log_at ON audit_log (at);
