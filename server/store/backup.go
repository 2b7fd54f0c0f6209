package store

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"os"
	"path/filepath"
)

// Backup writes a consistent copy of the database to dst with VACUUM INTO
// (sqlite.org/lang_vacuum.html#vacuuminto): the copy is made inside one
// read transaction, so it is whole even while visits are being saved, and
// writers are not blocked. dst must not exist. The recording files are not
// copied: the data folder only ever gains files (content-addressed, never
// rewritten), so any file copy of it taken after the backup is consistent
// with it.
func (s *Store) Backup(ctx context.Context, dst string) error {
	if _, err := os.Stat(dst); err == nil {
		return fmt.Errorf("store: backup to %s: file exists", dst)
	} else if !errors.Is(err, os.ErrNotExist) {
		return fmt.Errorf("store: backup to %s: %w", dst, err)
	}
	abs, err := filepath.Abs(dst)
	if err != nil {
		return fmt.Errorf("store: backup to %s: %w", dst, err)
	}
	// A connection of its own runs it: reader connections are query_only,
	// which refuses VACUUM INTO, and the one writer connection must stay
	// free for saves. The statement holds only a read snapshot (WAL), so
	// writers go on meanwhile.
	db, err := sql.Open("sqlite", dsn(s.path, false))
	if err != nil {
		return fmt.Errorf("store: backup to %s: %w", dst, err)
	}
	defer db.Close()
	db.SetMaxOpenConns(1)
	if _, err := db.ExecContext(ctx, `VACUUM INTO ?`, abs); err != nil {
		os.Remove(abs)
		return fmt.Errorf("store: backup to %s: %w", dst, err)
	}
	return nil
}
