package store

import (
	"context"
	"database/sql"

	"longwave/migrations"
)

// openAt opens a database applying only the migrations in list, as an older
// or newer release of longwave would.
func openAt(path string, list []migrations.Migration) (*Store, error) {
	w, err := sql.Open("sqlite", dsn(path, false))
	if err != nil {
		return nil, err
	}
	w.SetMaxOpenConns(1)
	s := &Store{w: w, now: fixedClock, path: path, dataDir: path + ".data"}
	if err := s.migrate(context.Background(), list); err != nil {
		w.Close()
		return nil, err
	}
	s.r, _ = sql.Open("sqlite", dsn(path, true))
	return s, nil
}
