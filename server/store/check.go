package store

import (
	"context"
	"crypto/sha256"
	"database/sql"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"net/url"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"strings"
	"sync"
	"time"

	"longwave/metrics"
	"longwave/migrations"
)

// OpenReadOnly opens an existing database as it is, for looking only: no
// migration is applied, no file is created, and every write fails with
// SQLITE_READONLY. It is what `longwave check` uses, so that a database
// missing a migration is reported instead of being brought up to date, and
// so that checking never changes what it checks. It is safe beside a
// running server (WAL lets readers run beside the writer).
//
// It refuses a missing file, a file that is not SQLite and an SQLite file
// whose tables are not longwave's; a database newer than this program is
// opened (Check reports its unknown migrations).
func OpenReadOnly(path string, opts ...Option) (*Store, error) {
	o := options{dataDir: path + ".data", now: time.Now}
	for _, f := range opts {
		f(&o)
	}
	if strings.ContainsAny(path, "?#") || path == "" || strings.HasPrefix(path, "file:") {
		return nil, fmt.Errorf("longwave: open %s: %w: use a plain file path without ? or #", path, ErrInvalid)
	}
	st, err := os.Stat(path)
	if err != nil {
		return nil, fmt.Errorf("longwave: open %s: %w", path, err)
	}
	if st.IsDir() {
		return nil, fmt.Errorf("longwave: open %s: %w (it is a folder)", path, ErrNotLongwave)
	}
	if err := checkHeader(path); err != nil {
		return nil, fmt.Errorf("longwave: open %s: %w", path, err)
	}
	uri, err := readOnlyDSN(path)
	if err != nil {
		return nil, fmt.Errorf("longwave: open %s: %w", path, err)
	}
	db, err := sql.Open("sqlite", uri)
	if err != nil {
		return nil, fmt.Errorf("longwave: open %s: %w", path, err)
	}
	n := max(4, 2*runtime.GOMAXPROCS(0))
	db.SetMaxOpenConns(n)
	db.SetMaxIdleConns(n)
	if _, err := schemaVersion(context.Background(), db); err != nil {
		db.Close()
		return nil, fmt.Errorf("longwave: open %s: %w", path, notADatabase(err))
	}
	return &Store{w: db, r: db, dataDir: o.dataDir, now: o.now, path: path}, nil
}

// readOnlyDSN is a "file:" URI with mode=ro: only in that form does SQLite
// itself see the mode (the driver drops SQLite's URI parameters from a plain
// path), and mode=ro fails on a missing file instead of creating it. No
// journal_mode pragma: setting WAL on a database in another mode is a write.
func readOnlyDSN(path string) (string, error) {
	abs, err := filepath.Abs(path)
	if err != nil {
		return "", err
	}
	q := url.Values{}
	q.Set("mode", "ro")
	q.Add("_pragma", fmt.Sprintf("busy_timeout(%d)", busyTimeout.Milliseconds()))
	q.Add("_pragma", "query_only(1)")
	u := url.URL{Scheme: "file", Path: filepath.ToSlash(abs), RawQuery: q.Encode()}
	return u.String(), nil
}

// Problem is one thing Check found wrong: which check, where (a visit and
// its patient code, a recording file, a table row, a migration), and what.
// It never holds a recording header field or any other identifying value:
// patients are named by their pseudonymous code only.
type Problem struct {
	Check string // CheckIntegrity, CheckForeignKeys, CheckMigrations, CheckRecordings, CheckVisits
	Where string
	What  string
}

// The checks, as they name themselves in a Problem.
const (
	CheckIntegrity   = "integrity"
	CheckForeignKeys = "foreign key"
	CheckMigrations  = "migration"
	CheckRecordings  = "recording"
	CheckVisits      = "visit"
)

// String is the problem as one line: "check: where: what".
func (p Problem) String() string {
	return p.Check + ": " + p.Where + ": " + p.What
}

// Report is what Check looked at and what it found. The counts say how much
// was checked, so that "no problem" can be told from "nothing looked at".
type Report struct {
	Problems []Problem
	// MigrationsKnown is the number of migrations embedded in this program;
	// MigrationsApplied the number the database records.
	MigrationsKnown, MigrationsApplied int
	// Tables is the number of longwave tables the integrity and foreign-key
	// checks covered (all of the database's own tables).
	Tables int
	// Visits, Patients and Markers are row counts.
	Visits, Patients, Markers int
	// Recordings is the number of recording rows; Files the distinct files
	// they name, and Bytes the bytes read to re-hash them.
	Recordings, Files int
	Bytes             int64
	// SettingsVisits counts the visits per settings version of their
	// analysis (known versions only).
	SettingsVisits map[string]int
}

// OK reports whether every check held.
func (r *Report) OK() bool { return len(r.Problems) == 0 }

func (r *Report) add(check, where, format string, args ...any) {
	r.Problems = append(r.Problems, Problem{Check: check, Where: where, What: fmt.Sprintf(format, args...)})
}

// Check looks the whole database and its data folder over, reading only:
//   - SQLite's PRAGMA integrity_check (every page, index and constraint of
//     the file) and PRAGMA foreign_key_check (every row's parent exists);
//   - migrations: every migration embedded in this program is recorded as
//     applied under its own name, and none is recorded that it does not know;
//   - recordings: every recording row's file is in the data folder, with
//     the stored size and SHA-256 (each file re-read and hashed);
//   - visits: every visit has a recording and an analysis, its conditions
//     and markers come from a settings version this program knows, with that
//     version's hash, and its markers from the same settings as its
//     conditions (a course never mixes versions).
//
// A check that cannot run to its end (a table unreadable in a damaged
// file) is itself a problem, "check stopped", and the other checks still run. The error is for a check
// stopped from outside (ctx) only.
func (s *Store) Check(ctx context.Context) (*Report, error) {
	r := &Report{SettingsVisits: map[string]int{}}
	steps := []struct {
		check string
		run   func(context.Context, *Report) error
	}{
		{CheckIntegrity, s.checkIntegrity},
		{CheckForeignKeys, s.checkForeignKeys},
		{CheckMigrations, s.checkMigrations},
		{CheckVisits, s.checkVisits},
		{CheckRecordings, s.checkRecordings},
	}
	for _, st := range steps {
		if err := st.run(ctx, r); err != nil {
			if ctx.Err() != nil {
				return r, fmt.Errorf("store: check: %w", ctx.Err())
			}
			r.add(st.check, "database", "check stopped: %v", err)
		}
	}
	return r, nil
}

// checkIntegrity runs PRAGMA integrity_check: one row "ok", or one row per
// fault found (sqlite.org/pragma.html#pragma_integrity_check). The messages
// name pages, tables, indexes and row ids, never column values.
func (s *Store) checkIntegrity(ctx context.Context, r *Report) error {
	if err := s.r.QueryRowContext(ctx, `SELECT count(*) FROM sqlite_schema
		WHERE type = 'table' AND name NOT LIKE 'sqlite_%'`).Scan(&r.Tables); err != nil {
		return err
	}
	trees := s.treeNames(ctx)
	rows, err := s.r.QueryContext(ctx, `PRAGMA integrity_check`)
	if err != nil {
		return err
	}
	defer rows.Close()
	for rows.Next() {
		var msg string
		if err := rows.Scan(&msg); err != nil {
			return err
		}
		if msg == "ok" {
			continue
		}
		// One row may hold several faults, one a line, under a heading
		// naming the schema ("*** in database main ***").
		for _, line := range strings.Split(msg, "\n") {
			line = strings.TrimSpace(line)
			if line == "" || strings.HasPrefix(line, "***") {
				continue
			}
			where := "database file"
			var root int64
			if _, err := fmt.Sscanf(line, "Tree %d ", &root); err == nil && trees[root] != "" {
				where = trees[root]
			}
			r.add(CheckIntegrity, where, "%s", line)
		}
	}
	return rows.Err()
}

// treeNames maps each b-tree's root page to its table or index ("index
// markers_name"), so that an integrity fault on "Tree 18" says what holds
// it. Best effort: a schema too damaged to read gives an empty map.
func (s *Store) treeNames(ctx context.Context) map[int64]string {
	out := map[int64]string{}
	rows, err := s.r.QueryContext(ctx, `SELECT rootpage, type, name FROM sqlite_schema WHERE rootpage > 0`)
	if err != nil {
		return out
	}
	defer rows.Close()
	for rows.Next() {
		var root int64
		var typ, name string
		if rows.Scan(&root, &typ, &name) == nil {
			out[root] = typ + " " + name
		}
	}
	return out
}

// checkForeignKeys runs PRAGMA foreign_key_check: one row per child row
// whose parent is missing (table, rowid, parent table, constraint index).
func (s *Store) checkForeignKeys(ctx context.Context, r *Report) error {
	rows, err := s.r.QueryContext(ctx, `PRAGMA foreign_key_check`)
	if err != nil {
		return err
	}
	defer rows.Close()
	for rows.Next() {
		var table, parent string
		var rowid sql.NullInt64
		var fk int
		if err := rows.Scan(&table, &rowid, &parent, &fk); err != nil {
			return err
		}
		where := "table " + table
		if rowid.Valid {
			where += fmt.Sprintf(" rowid %d", rowid.Int64)
		}
		r.add(CheckForeignKeys, where, "refers to a row of %s that does not exist", parent)
	}
	return rows.Err()
}

// checkMigrations compares the schema_version rows with the embedded
// migrations, by version and by name: a missing row is a migration not
// applied (Open applies only those above the highest recorded version, so
// a gap is never filled by itself), a row this program has no file for was
// written by another longwave.
func (s *Store) checkMigrations(ctx context.Context, r *Report) error {
	known, err := migrations.All()
	if err != nil {
		return err
	}
	r.MigrationsKnown = len(known)
	var has int
	if err := s.r.QueryRowContext(ctx, `SELECT count(*) FROM sqlite_schema
		WHERE type = 'table' AND name = 'schema_version'`).Scan(&has); err != nil {
		return err
	}
	applied := map[int]string{}
	if has == 0 {
		r.add(CheckMigrations, "table schema_version", "missing: no migration was ever applied")
	} else {
		rows, err := s.r.QueryContext(ctx, `SELECT version, name FROM schema_version ORDER BY version`)
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			var v int
			var name string
			if err := rows.Scan(&v, &name); err != nil {
				return err
			}
			applied[v] = name
		}
		if err := rows.Err(); err != nil {
			return err
		}
	}
	r.MigrationsApplied = len(applied)
	byVersion := map[int]string{}
	for _, m := range known {
		byVersion[m.Version] = m.Name
		name, ok := applied[m.Version]
		switch {
		case !ok:
			r.add(CheckMigrations, m.Name, "not applied (no schema_version row for version %d)", m.Version)
		case name != m.Name:
			r.add(CheckMigrations, m.Name, "schema_version row %d names %q instead", m.Version, name)
		}
	}
	var extra []int
	for v := range applied {
		if _, ok := byVersion[v]; !ok {
			extra = append(extra, v)
		}
	}
	sort.Ints(extra)
	for _, v := range extra {
		r.add(CheckMigrations, fmt.Sprintf("version %d (%s)", v, applied[v]),
			"applied, but unknown to this longwave (written by a newer or another one)")
	}
	return nil
}

// visitWhere names a visit by id and patient code ("" when the visit or
// its patient row is missing).
func visitWhere(id int64, code string) string {
	if code == "" {
		return fmt.Sprintf("visit %d (no patient row)", id)
	}
	return fmt.Sprintf("visit %d (patient %s)", id, code)
}

// settingsJudge says whether a settings version and hash pair is one this
// program knows, computing each known version's hash once.
type settingsJudge map[string]string

func (j settingsJudge) problem(version, hash string) string {
	want, seen := j[version]
	if !seen {
		if set, ok := metrics.ByVersion(version); ok {
			want = set.Hash()
		}
		j[version] = want
	}
	if want == "" {
		return fmt.Sprintf("settings version %q, unknown to this longwave", version)
	}
	if hash != want {
		return fmt.Sprintf("settings version %s with hash %s, not that version's hash %s",
			version, short(hash), short(want))
	}
	return ""
}

// short is the first 12 characters of a hash, enough to tell hashes apart
// in a message.
func short(h string) string { return h[:min(12, len(h))] }

// checkVisits: every visit has a recording (else it cannot be processed
// again) and an analysis, and both its conditions and its markers carry a
// known settings version with that version's hash.
func (s *Store) checkVisits(ctx context.Context, r *Report) error {
	if err := s.r.QueryRowContext(ctx, `SELECT (SELECT count(*) FROM patients), (SELECT count(*) FROM markers)`).
		Scan(&r.Patients, &r.Markers); err != nil {
		return err
	}
	judge := settingsJudge{}
	// analysis holds each analysed visit's settings pair, which all its
	// markers must repeat (0001_store.sql, conditions.settings_version).
	analysis := map[int64][2]string{}
	rows, err := s.r.QueryContext(ctx, `
		SELECT v.id, coalesce(p.code, ''),
		       (SELECT count(*) FROM recordings WHERE visit_id = v.id),
		       c.visit_id IS NOT NULL, coalesce(c.settings_version, ''), coalesce(c.settings_hash, '')
		FROM visits v
		LEFT JOIN patients p ON p.id = v.patient_id
		LEFT JOIN conditions c ON c.visit_id = v.id
		ORDER BY v.id`)
	if err != nil {
		return err
	}
	defer rows.Close()
	for rows.Next() {
		var id int64
		var code, version, hash string
		var recs int
		var analysed bool
		if err := rows.Scan(&id, &code, &recs, &analysed, &version, &hash); err != nil {
			return err
		}
		r.Visits++
		where := visitWhere(id, code)
		if recs == 0 {
			r.add(CheckVisits, where, "no recording stored: the visit cannot be processed again")
		}
		if !analysed {
			r.add(CheckVisits, where, "no analysis stored (no conditions row)")
			continue
		}
		analysis[id] = [2]string{version, hash}
		if p := judge.problem(version, hash); p != "" {
			r.add(CheckVisits, where, "conditions made by %s", p)
		} else {
			r.SettingsVisits[version]++
		}
	}
	if err := rows.Err(); err != nil {
		return err
	}
	rows.Close()
	// Markers, grouped per visit and settings pair: a visit's markers are
	// written together, so one line per visit and pair is enough.
	mrows, err := s.r.QueryContext(ctx, `
		SELECT m.visit_id, coalesce(p.code, ''), m.settings_version, m.settings_hash, count(*)
		FROM markers m
		LEFT JOIN visits v ON v.id = m.visit_id
		LEFT JOIN patients p ON p.id = v.patient_id
		GROUP BY m.visit_id, m.settings_version, m.settings_hash
		ORDER BY m.visit_id, m.settings_version, m.settings_hash`)
	if err != nil {
		return err
	}
	defer mrows.Close()
	for mrows.Next() {
		var id int64
		var code, version, hash string
		var n int
		if err := mrows.Scan(&id, &code, &version, &hash, &n); err != nil {
			return err
		}
		if p := judge.problem(version, hash); p != "" {
			r.add(CheckVisits, visitWhere(id, code), "%d markers made by %s", n, p)
			continue
		}
		if c, ok := analysis[id]; ok && c != [2]string{version, hash} {
			r.add(CheckVisits, visitWhere(id, code), "%d markers made by settings version %s (hash %s), its conditions by version %s (hash %s)",
				n, version, short(hash), c[0], short(c[1]))
		}
	}
	return mrows.Err()
}

// hashWorkers is how many recording files are hashed at once: two, so that
// one file is read from disk while another is hashed (on a cold page cache
// reading is the slower half). More would only compete with a running
// server for its cores: SHA-256 runs at about 1.4 GB/s on one core here
// (BenchmarkHashFiles), faster than most disks deliver.
func hashWorkers() int { return max(1, min(2, runtime.GOMAXPROCS(0))) }

// fileFacts is what re-reading one recording file found.
type fileFacts struct {
	size int64
	sha  string
	err  error // from stat, open or read; errors.Is(err, os.ErrNotExist) when missing
}

// checkRecordings re-reads every recording file named by a recording row
// and compares its size and SHA-256 with the row. A file named by several
// rows (the same recording in two visits) is read once. Each file is
// streamed through the hash in 256 KiB reads, so memory stays bounded
// whatever the files' sizes.
func (s *Store) checkRecordings(ctx context.Context, r *Report) error {
	type recRow struct {
		id, visit int64
		code      string
		sha, fmt  string
		size      int64
	}
	rows, err := s.r.QueryContext(ctx, `
		SELECT r.id, r.visit_id, coalesce(p.code, ''), r.sha256, r.format, r.size
		FROM recordings r
		LEFT JOIN visits v ON v.id = r.visit_id
		LEFT JOIN patients p ON p.id = v.patient_id
		ORDER BY r.id`)
	if err != nil {
		return err
	}
	var recs []recRow
	for rows.Next() {
		var x recRow
		if err := rows.Scan(&x.id, &x.visit, &x.code, &x.sha, &x.fmt, &x.size); err != nil {
			rows.Close()
			return err
		}
		recs = append(recs, x)
	}
	if err := rows.Close(); err != nil {
		return err
	}
	if err := rows.Err(); err != nil {
		return err
	}
	r.Recordings = len(recs)
	var paths []string
	seen := map[string]bool{}
	for _, x := range recs {
		if !validSHA(x.sha) {
			continue
		}
		p := s.RecordingFilePath(x.sha, x.fmt)
		if !seen[p] {
			seen[p] = true
			paths = append(paths, p)
		}
	}
	facts, bytes := hashFiles(ctx, paths, hashWorkers())
	if err := ctx.Err(); err != nil {
		return err
	}
	r.Files = len(paths)
	r.Bytes = bytes
	for _, x := range recs {
		where := fmt.Sprintf("recording %d of %s", x.id, visitWhere(x.visit, x.code))
		if !validSHA(x.sha) {
			r.add(CheckRecordings, where, "stored SHA-256 %q is not 64 lower-case hex digits", x.sha)
			continue
		}
		p := s.RecordingFilePath(x.sha, x.fmt)
		f := facts[p]
		switch {
		case errors.Is(f.err, os.ErrNotExist):
			r.add(CheckRecordings, where, "file %s is missing", p)
		case f.err != nil:
			r.add(CheckRecordings, where, "file %s cannot be read: %v", p, f.err)
		case f.size != x.size:
			r.add(CheckRecordings, where, "file %s has %d bytes, the row says %d", p, f.size, x.size)
		case f.sha != x.sha:
			r.add(CheckRecordings, where, "file %s has SHA-256 %s, not the %s it is stored under", p, short(f.sha), short(x.sha))
		}
	}
	return nil
}

// hashFiles stats and hashes each path with n workers and returns what it
// found per path and the bytes read. It stops starting files when ctx ends.
func hashFiles(ctx context.Context, paths []string, n int) (map[string]fileFacts, int64) {
	out := make(map[string]fileFacts, len(paths))
	var mu sync.Mutex
	var total int64
	jobs := make(chan string)
	var wg sync.WaitGroup
	for range n {
		wg.Add(1)
		go func() {
			defer wg.Done()
			buf := make([]byte, 256<<10)
			for p := range jobs {
				f := hashFile(ctx, p, buf)
				mu.Lock()
				out[p] = f
				if f.err == nil {
					total += f.size
				}
				mu.Unlock()
			}
		}()
	}
	for _, p := range paths {
		if ctx.Err() != nil {
			break
		}
		jobs <- p
	}
	close(jobs)
	wg.Wait()
	return out, total
}

// hashFile streams one file through SHA-256 with buf.
func hashFile(ctx context.Context, path string, buf []byte) fileFacts {
	f, err := os.Open(path)
	if err != nil {
		return fileFacts{err: err}
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return fileFacts{err: err}
	}
	if !st.Mode().IsRegular() {
		return fileFacts{err: fmt.Errorf("not a regular file (%s)", st.Mode().Type())}
	}
	h := sha256.New()
	n, err := io.CopyBuffer(h, ctxReader{ctx, f}, buf)
	if err != nil {
		return fileFacts{err: err}
	}
	return fileFacts{size: n, sha: hex.EncodeToString(h.Sum(nil))}
}

// ctxReader ends a long read when ctx ends.
type ctxReader struct {
	ctx context.Context
	r   io.Reader
}

func (c ctxReader) Read(p []byte) (int, error) {
	if err := c.ctx.Err(); err != nil {
		return 0, err
	}
	return c.r.Read(p)
}
