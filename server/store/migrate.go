package store

import (
	"context"
	"database/sql"
	"fmt"

	"longwave/migrations"
)

// SchemaVersion returns the highest migration the database has had.
func (s *Store) SchemaVersion(ctx context.Context) (int, error) {
	return schemaVersion(ctx, s.w)
}

type querier interface {
	QueryRowContext(ctx context.Context, query string, args ...any) *sql.Row
}

func schemaVersion(ctx context.Context, q querier) (int, error) {
	var tables, hasVersion int
	err := q.QueryRowContext(ctx, `SELECT count(*), coalesce(sum(name = 'schema_version'), 0)
		FROM sqlite_schema WHERE type = 'table' AND name NOT LIKE 'sqlite_%'`).Scan(&tables, &hasVersion)
	if err != nil {
		return 0, err
	}
	if hasVersion == 0 {
		if tables > 0 {
			return 0, fmt.Errorf("%w (SQLite, but it has %d tables and no schema_version)", ErrNotLongwave, tables)
		}
		return 0, nil
	}
	var v int
	err = q.QueryRowContext(ctx, `SELECT coalesce(max(version), 0) FROM schema_version`).Scan(&v)
	return v, err
}

// migrate applies the migrations the database has not had, in version
// order, each in its own transaction that also records it in
// schema_version. A database is judged by the set of versions recorded, so
// a migration whose number was skipped while branches were merged is
// applied when it arrives; a recorded version this program does not know
// means the database is newer. list nil means every embedded migration.
func (s *Store) migrate(ctx context.Context, list []migrations.Migration) error {
	if list == nil {
		var err error
		if list, err = migrations.All(); err != nil {
			return err
		}
	}
	have, err := schemaVersion(ctx, s.w)
	if err != nil {
		return err
	}
	applied := map[int]bool{}
	if have > 0 {
		rows, err := s.w.QueryContext(ctx, `SELECT version FROM schema_version ORDER BY version`)
		if err != nil {
			return err
		}
		for rows.Next() {
			var v int
			if err := rows.Scan(&v); err != nil {
				rows.Close()
				return err
			}
			applied[v] = true
		}
		rows.Close()
		if err := rows.Err(); err != nil {
			return err
		}
	}
	known := map[int]bool{}
	last := 0
	for _, m := range list {
		known[m.Version] = true
		last = max(last, m.Version)
	}
	for v := range applied {
		if !known[v] {
			return fmt.Errorf("%w: its schema version is %d (migration %d), this longwave knows up to %d; use a newer longwave",
				ErrNewerSchema, have, v, last)
		}
	}
	for _, m := range list {
		if applied[m.Version] {
			continue
		}
		err := s.inTx(ctx, func(tx *sql.Tx) error {
			if _, err := tx.ExecContext(ctx, m.SQL); err != nil {
				return err
			}
			_, err := tx.ExecContext(ctx, `INSERT INTO schema_version (version, name, applied_at) VALUES (?, ?, ?)`,
				m.Version, m.Name, s.stamp())
			return err
		})
		if err != nil {
			return fmt.Errorf("store: migration %s: %w", m.Name, err)
		}
	}
	return nil
}
