package store

import (
	"bytes"
	"context"
	"database/sql"
	"errors"
	"fmt"
	"io"
	"net/url"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"time"

	"longwave/metrics"

	"modernc.org/sqlite"
	sqlite3 "modernc.org/sqlite/lib"
)

// Sentinel errors callers branch on with errors.Is.
var (
	// ErrNotFound: no row with that key.
	ErrNotFound = errors.New("store: not found")
	// ErrNotLongwave: the file is not SQLite, or is SQLite without longwave's
	// schema_version table.
	ErrNotLongwave = errors.New("not a longwave database")
	// ErrNewerSchema: the database was written by a newer longwave.
	ErrNewerSchema = errors.New("database is newer than this program")
	// ErrVisitExists: the patient already has a visit on that date.
	ErrVisitExists = errors.New("store: visit already exists")
	// ErrInvalid: a value handed to the store breaks a rule of the schema.
	ErrInvalid = errors.New("store: invalid value")
)

// busyTimeout is how long a statement waits for another process's write lock
// before failing with SQLITE_BUSY. Within one process the single writer
// connection queues writes, so the wait only matters for a second process
// (a backup, a command-line ingest beside the server). 10 s covers the
// longest write transaction (one visit's rows, a few ms) many times over.
const busyTimeout = 10 * time.Second

// Store is longwave's SQLite database and the folder of recording files
// beside it. It is safe for concurrent use.
//
// Writes go through w, a pool of exactly one connection whose transactions
// begin IMMEDIATE, so that SQLite's single writer is queued inside the
// process instead of failing with "database is locked" on a read-to-write
// lock upgrade. Reads go through r, a pool of query-only connections that
// WAL lets run beside the writer.
type Store struct {
	w       *sql.DB
	r       *sql.DB
	dataDir string
	now     func() time.Time
	path    string
	// wrapWriter, when set by a test, wraps the writer of each recording
	// file (to simulate a full disk).
	wrapWriter func(io.Writer) io.Writer
	// cohort are the settings the kept cohort entries are made for
	// (cohort.go). current is set once every migration is applied: only
	// then do writes keep the tables of migration 0006 (cohort entries,
	// overlay spectra); the test hook openAt leaves it unset to write as an
	// older release did.
	cohort  cohortSettings
	current bool
}

// Option configures Open.
type Option func(*options)

type options struct {
	dataDir string
	now     func() time.Time
}

// WithDataDir keeps the recording files in dir instead of "<db>.data".
func WithDataDir(dir string) Option { return func(o *options) { o.dataDir = dir } }

// WithClock sets the clock for the stored times (tests use a fixed one).
func WithClock(now func() time.Time) Option { return func(o *options) { o.now = now } }

// sqliteMagic opens every SQLite 3 database file (sqlite.org/fileformat.html,
// "The Database Header", offset 0).
var sqliteMagic = []byte("SQLite format 3\x00")

// Open opens the database at path, creating it when absent, and brings its
// schema up to date: migrations the database has not had are applied in
// order, each in its own transaction. It refuses a file that is not SQLite,
// an SQLite file that is not longwave's, and a database whose schema is
// newer than this program knows.
func Open(path string, opts ...Option) (*Store, error) {
	o := options{dataDir: path + ".data", now: time.Now}
	for _, f := range opts {
		f(&o)
	}
	if strings.ContainsAny(path, "?#") || path == "" || strings.HasPrefix(path, "file:") {
		return nil, fmt.Errorf("longwave: open %s: %w: use a plain file path without ? or #", path, ErrInvalid)
	}
	if st, err := os.Stat(filepath.Dir(path)); err != nil || !st.IsDir() {
		return nil, fmt.Errorf("longwave: open %s: folder %s does not exist", path, filepath.Dir(path))
	}
	if err := checkHeader(path); err != nil {
		return nil, fmt.Errorf("longwave: open %s: %w", path, err)
	}
	w, err := sql.Open("sqlite", dsn(path, false))
	if err != nil {
		return nil, fmt.Errorf("longwave: open %s: %w", path, err)
	}
	w.SetMaxOpenConns(1)
	w.SetMaxIdleConns(1)
	w.SetConnMaxLifetime(0)
	s := &Store{w: w, dataDir: o.dataDir, now: o.now, path: path}
	if err := s.migrate(context.Background(), nil); err != nil {
		w.Close()
		return nil, fmt.Errorf("longwave: open %s: %w", path, notADatabase(err))
	}
	cur := metrics.Current()
	s.KeepCohortFor(cur.Version, cur.Hash())
	s.current = true
	r, err := sql.Open("sqlite", dsn(path, true))
	if err != nil {
		w.Close()
		return nil, fmt.Errorf("longwave: open %s: %w", path, err)
	}
	n := max(4, 2*runtime.GOMAXPROCS(0))
	r.SetMaxOpenConns(n)
	r.SetMaxIdleConns(n)
	s.r = r
	s.sweepIncoming()
	return s, nil
}

// dsn builds the connection string: every per-connection pragma is in it so
// that every pooled connection has them (modernc.org/sqlite runs each
// _pragma on connect, busy_timeout first).
func dsn(path string, readOnly bool) string {
	q := url.Values{}
	q.Add("_pragma", fmt.Sprintf("busy_timeout(%d)", busyTimeout.Milliseconds()))
	q.Add("_pragma", "foreign_keys(1)")
	q.Add("_pragma", "journal_mode(WAL)")
	// NORMAL is durable in WAL mode except for the last transactions before
	// a power cut, and never corrupts (sqlite.org/pragma.html#pragma_synchronous).
	q.Add("_pragma", "synchronous(NORMAL)")
	if readOnly {
		q.Add("_pragma", "query_only(1)")
	} else {
		q.Set("_txlock", "immediate")
	}
	return path + "?" + q.Encode()
}

// checkHeader refuses an existing non-empty file that does not start with
// the SQLite magic string, before the driver is asked to open it.
func checkHeader(path string) error {
	f, err := os.Open(path)
	if errors.Is(err, os.ErrNotExist) {
		return nil
	}
	if err != nil {
		return err
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return err
	}
	if st.IsDir() {
		return fmt.Errorf("%w (it is a folder)", ErrNotLongwave)
	}
	head := make([]byte, len(sqliteMagic))
	n, err := io.ReadFull(f, head)
	if n == 0 && (err == io.EOF || err == nil) {
		return nil // an empty file becomes a new database
	}
	if err != nil && !errors.Is(err, io.ErrUnexpectedEOF) {
		return err
	}
	if !bytes.Equal(head[:n], sqliteMagic) {
		return fmt.Errorf("%w (file is not SQLite)", ErrNotLongwave)
	}
	return nil
}

// notADatabase turns SQLITE_NOTADB from the driver into ErrNotLongwave.
func notADatabase(err error) error {
	var se *sqlite.Error
	if errors.As(err, &se) && se.Code()&0xff == sqlite3.SQLITE_NOTADB {
		return fmt.Errorf("%w (file is not SQLite)", ErrNotLongwave)
	}
	return err
}

// Close closes both connection pools (one pool for a store opened with
// OpenReadOnly).
func (s *Store) Close() error {
	var errR error
	if s.r != nil && s.r != s.w {
		errR = s.r.Close()
	}
	errW := s.w.Close()
	return errors.Join(errW, errR)
}

// DataDir returns the folder that holds the recording files.
func (s *Store) DataDir() string { return s.dataDir }

// Path returns the database file's path.
func (s *Store) Path() string { return s.path }

// stamp is the current time as stored: UTC, RFC 3339 with seconds.
func (s *Store) stamp() string { return s.now().UTC().Format(time.RFC3339) }

// inTx runs f in one write transaction, committed when f returns nil and
// rolled back otherwise. Before it commits, the cohort entries of the
// patients f changed are rebuilt (cohort.go), so that no transaction leaves
// a kept entry behind its visits.
func (s *Store) inTx(ctx context.Context, f func(tx *sql.Tx) error) error {
	tx, err := s.w.BeginTx(ctx, nil)
	if err != nil {
		return err
	}
	if err := f(tx); err != nil {
		tx.Rollback()
		return err
	}
	if s.current {
		if err := s.refreshEntries(ctx, tx); err != nil {
			tx.Rollback()
			return err
		}
	}
	return tx.Commit()
}
