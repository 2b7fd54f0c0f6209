// Package migrations holds longwave's database schema as numbered,
// append-only SQL files (NNNN_name.sql), embedded in the binary. Package
// store applies the ones a database has not seen yet, in order, each in its
// own transaction, and records each in the schema_version table.
//
// Owners: 0001 is the store's (patients, visits, recordings, analysis);
// 0002 the trends package's (reference ranges); 0003 the server's
// (accounts, sessions, audit log); 0004 the store's (marker intervals);
// 0005 the server's (the audit actions of an account's lifetime); 0006 the
// store's (the cohort's kept entries, the course's overlay spectra). A
// file, once released, is never edited: a change is a new file with the
// next number.
//
// A number may be missing while branches that each claim one are merged
// (0005 was claimed when 0006 was written): the store records every
// migration applied by its number and applies those it has not had, so a
// file that arrives with a lower number than one already applied is still
// applied once.
package migrations

import (
	"embed"
	"errors"
	"fmt"
	"io/fs"
	"sort"
	"strconv"
	"strings"
)

// FS holds every migration file.
//
//go:embed *.sql
var FS embed.FS

// Migration is one numbered schema change.
type Migration struct {
	Version int    // the file's number, 1 for 0001_store.sql
	Name    string // the file name, e.g. "0001_store.sql"
	SQL     string // the statements, run as one script
}

// ErrBadName reports a file in FS whose name is not NNNN_name.sql, or a
// number used twice.
var ErrBadName = errors.New("migrations: bad file set")

// All returns the migrations of FS ordered by version. Each version is used
// once; a gap is allowed (see the package comment), since a database
// records the set of versions it has had, not only the highest.
func All() ([]Migration, error) {
	return Load(FS)
}

// Load reads the migrations of any file system laid out like FS (tests use
// it with a subset).
func Load(fsys fs.FS) ([]Migration, error) {
	names, err := fs.Glob(fsys, "*.sql")
	if err != nil {
		return nil, fmt.Errorf("migrations: list: %w", err)
	}
	var out []Migration
	for _, name := range names {
		num, _, ok := strings.Cut(name, "_")
		v, err := strconv.Atoi(num)
		if !ok || err != nil || len(num) != 4 || v <= 0 {
			return nil, fmt.Errorf("%w: %q is not named NNNN_name.sql", ErrBadName, name)
		}
		b, err := fs.ReadFile(fsys, name)
		if err != nil {
			return nil, fmt.Errorf("migrations: read %s: %w", name, err)
		}
		out = append(out, Migration{Version: v, Name: name, SQL: string(b)})
	}
	sort.Slice(out, func(i, j int) bool { return out[i].Version < out[j].Version })
	for i := 1; i < len(out); i++ {
		if out[i].Version == out[i-1].Version {
			return nil, fmt.Errorf("%w: version %d used by %s and %s", ErrBadName, out[i].Version, out[i-1].Name, out[i].Name)
		}
	}
	return out, nil
}
