// Package migrations holds longwave's database schema as numbered,
// append-only SQL files (NNNN_name.sql), embedded in the binary. Package
// store applies the ones a database has not seen yet, in order, each in its
// own transaction, and records each in the schema_version table.
//
// Owners: 0001 is the store's (patients, visits, recordings, analysis);
// 0002 the trends package's (reference ranges); 0003 the server's
// (accounts, sessions, audit log); 0004 the store's (marker intervals);
// 0005 the server's (the audit actions of an account's lifetime).
// A file, once released, is never edited: a change is a new file with the
// next number.
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

// ErrBadName reports a file in FS whose name is not NNNN_name.sql, a number
// used twice, or a gap in the numbering.
var ErrBadName = errors.New("migrations: bad file set")

// All returns the migrations of FS ordered by version. The versions must be
// 1, 2, … without gap or repeat, so that a database's recorded version says
// exactly which files it has had.
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
	for i, m := range out {
		if m.Version != i+1 {
			return nil, fmt.Errorf("%w: expected version %d, found %s", ErrBadName, i+1, m.Name)
		}
	}
	return out, nil
}
