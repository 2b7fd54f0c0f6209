package store

import (
	"context"
	"database/sql"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"testing/fstest"

	"longwave/migrations"
)

func TestOpenAppliesEveryMigration(t *testing.T) {
	s := mustOpen(t)
	all, err := migrations.All()
	if err != nil {
		t.Fatal(err)
	}
	got, err := s.SchemaVersion(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if got != lastVersion(all) {
		t.Errorf("schema version = %d, want %d (the last file's)", got, lastVersion(all))
	}
	var applied int
	s.w.QueryRow(`SELECT count(*) FROM schema_version`).Scan(&applied)
	if applied != len(all) {
		t.Errorf("schema_version rows = %d, want %d (one per file)", applied, len(all))
	}
	// Every table of 0001 exists and is STRICT (a text in an INTEGER column
	// is refused, sqlite.org/stricttables.html).
	for _, table := range []string{"schema_version", "patients", "visits", "recordings", "conditions",
		"markers", "flags", "display_products"} {
		var strict int
		err := s.r.QueryRow(`SELECT strict FROM pragma_table_list WHERE name = ?`, table).Scan(&strict)
		if err != nil {
			t.Errorf("table %s: %v", table, err)
			continue
		}
		if strict != 1 {
			t.Errorf("table %s: strict = %d, want 1", table, strict)
		}
	}
	_, err = s.w.Exec(`INSERT INTO patients (code, birth_year, created_at, updated_at) VALUES ('X', 'nineteen', '', '')`)
	if err == nil {
		t.Error("STRICT table took text in birth_year")
	}
	// The pragmas of the DSN are on, on both pools.
	for name, db := range map[string]*sql.DB{"writer": s.w, "reader": s.r} {
		var fk, sync int
		var mode string
		db.QueryRow(`PRAGMA foreign_keys`).Scan(&fk)
		db.QueryRow(`PRAGMA journal_mode`).Scan(&mode)
		db.QueryRow(`PRAGMA synchronous`).Scan(&sync)
		if fk != 1 || mode != "wal" || sync != 1 {
			t.Errorf("%s: foreign_keys=%d journal_mode=%s synchronous=%d, want 1 wal 1", name, fk, mode, sync)
		}
	}
	if _, err := s.r.Exec(`DELETE FROM patients`); err == nil {
		t.Error("reader pool accepted a write")
	}
}

func TestOpenUpgradesOlderDatabase(t *testing.T) {
	all, err := migrations.All()
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "old.db")
	// A database at version 1, as the first release left it.
	s, err := openAt(path, all[:1])
	if err != nil {
		t.Fatal(err)
	}
	if _, err := s.UpsertPatient(context.Background(), Patient{Code: "P-OLD", BirthYear: 1948}); err != nil {
		t.Fatal(err)
	}
	s.Close()

	// A later release adds a migration: opening applies it and keeps the data.
	extra := append(append([]migrations.Migration{}, all...), migrations.Migration{
		Version: lastVersion(all) + 1, Name: "9999_test.sql",
		SQL: "CREATE TABLE test_extra (id INTEGER PRIMARY KEY) STRICT; INSERT INTO test_extra VALUES (7);",
	})
	s, err = openAt(path, extra)
	if err != nil {
		t.Fatalf("upgrade: %v", err)
	}
	defer s.Close()
	v, _ := s.SchemaVersion(context.Background())
	if v != lastVersion(extra) {
		t.Errorf("version after upgrade = %d, want %d", v, lastVersion(extra))
	}
	var n int
	if err := s.w.QueryRow(`SELECT id FROM test_extra`).Scan(&n); err != nil || n != 7 {
		t.Errorf("test_extra: %d, %v; want 7", n, err)
	}
	var applied int
	s.w.QueryRow(`SELECT count(*) FROM schema_version`).Scan(&applied)
	if applied != len(extra) {
		t.Errorf("schema_version rows = %d, want %d", applied, len(extra))
	}
	if p, err := s.PatientByCode(context.Background(), "P-OLD"); err != nil || p.BirthYear != 1948 {
		t.Errorf("patient after upgrade: %+v, %v", p, err)
	}
	s.Close()

	// And the real Open takes the version-1 database up to the embedded set.
	path2 := filepath.Join(t.TempDir(), "v1.db")
	s1, err := openAt(path2, all[:1])
	if err != nil {
		t.Fatal(err)
	}
	s1.Close()
	s2, err := Open(path2)
	if err != nil {
		t.Fatalf("Open of a version-1 database: %v", err)
	}
	defer s2.Close()
	if v, _ := s2.SchemaVersion(context.Background()); v != lastVersion(all) {
		t.Errorf("Open left version %d, want %d", v, lastVersion(all))
	}
}

func TestFailedMigrationLeavesVersion(t *testing.T) {
	all, _ := migrations.All()
	path := filepath.Join(t.TempDir(), "m.db")
	bad := append(append([]migrations.Migration{}, all...), migrations.Migration{
		Version: lastVersion(all) + 1, Name: "9999_bad.sql",
		SQL: "CREATE TABLE half_done (id INTEGER) STRICT; INSERT INTO no_such_table VALUES (1);",
	})
	if _, err := openAt(path, bad); err == nil || !strings.Contains(err.Error(), "9999_bad.sql") {
		t.Fatalf("bad migration: err = %v, want one naming 9999_bad.sql", err)
	}
	s, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if v, _ := s.SchemaVersion(context.Background()); v != lastVersion(all) {
		t.Errorf("version = %d, want %d", v, lastVersion(all))
	}
	var n int
	s.w.QueryRow(`SELECT count(*) FROM sqlite_schema WHERE name = 'half_done'`).Scan(&n)
	if n != 0 {
		t.Error("a failed migration left its first table behind")
	}
}

func TestOpenRefuses(t *testing.T) {
	dir := t.TempDir()
	newer := filepath.Join(dir, "newer.db")
	s, err := Open(newer)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := s.w.Exec(`INSERT INTO schema_version VALUES (999, '0999_future.sql', '2030-01-01T00:00:00Z')`); err != nil {
		t.Fatal(err)
	}
	s.Close()

	text := filepath.Join(dir, "notes.db")
	os.WriteFile(text, []byte("visit notes, not a database\n"), 0o644)
	// The SQLite magic followed by garbage: SQLite itself says SQLITE_NOTADB.
	broken := filepath.Join(dir, "broken.db")
	os.WriteFile(broken, append([]byte("SQLite format 3\x00"), make([]byte, 200)...), 0o644)
	other := filepath.Join(dir, "other.db")
	db, _ := sql.Open("sqlite", other)
	db.Exec(`CREATE TABLE t (x)`)
	db.Close()

	tests := []struct {
		name, path string
		want       error
		wantText   string
	}{
		{"newer schema", newer, ErrNewerSchema, "schema version is 999"},
		{"text file", text, ErrNotLongwave, "not a longwave database (file is not SQLite)"},
		{"broken header", broken, ErrNotLongwave, "not a longwave database"},
		{"other application's SQLite", other, ErrNotLongwave, "no schema_version"},
		{"folder", dir, ErrNotLongwave, "folder"},
	}
	for _, tt := range tests {
		s, err := Open(tt.path)
		if err == nil {
			s.Close()
			t.Errorf("%s: Open succeeded, want refusal", tt.name)
			continue
		}
		if !errors.Is(err, tt.want) || !strings.Contains(err.Error(), tt.wantText) || !strings.Contains(err.Error(), tt.path) {
			t.Errorf("%s: err = %q, want %v with %q and the path", tt.name, err, tt.want, tt.wantText)
		}
	}
	// Refusing did not touch the text file.
	if b, _ := os.ReadFile(text); string(b) != "visit notes, not a database\n" {
		t.Error("refused file was changed")
	}
}

func TestLoadMigrationNames(t *testing.T) {
	tests := []struct {
		name  string
		files fstest.MapFS
		ok    bool
	}{
		{"ordered", fstest.MapFS{"0002_b.sql": {}, "0001_a.sql": {}}, true},
		{"gap", fstest.MapFS{"0001_a.sql": {}, "0003_c.sql": {}}, true},
		{"repeat", fstest.MapFS{"0001_a.sql": {}, "0001_b.sql": {}}, false},
		{"bad name", fstest.MapFS{"1_a.sql": {}}, false},
	}
	for _, tt := range tests {
		list, err := migrations.Load(tt.files)
		if (err == nil) != tt.ok {
			t.Errorf("%s: err = %v, want ok %v", tt.name, err, tt.ok)
		}
		if tt.ok && (len(list) != 2 || list[0].Version != 1 || list[1].Version <= 1) {
			t.Errorf("%s: order %+v", tt.name, list)
		}
	}
}

// lastVersion is the highest version of list (the embedded set may skip a
// number while branches that claimed numbers are merged).
func lastVersion(list []migrations.Migration) int {
	v := 0
	for _, m := range list {
		v = max(v, m.Version)
	}
	return v
}

// A migration whose number was skipped is applied when it arrives, after a
// higher one: the database is judged by the set of versions it has had.
func TestMigrationArrivingLate(t *testing.T) {
	all, err := migrations.All()
	if err != nil {
		t.Fatal(err)
	}
	last := lastVersion(all)
	late := migrations.Migration{Version: last + 1, Name: "late.sql", SQL: "CREATE TABLE test_late (id INTEGER PRIMARY KEY) STRICT;"}
	after := migrations.Migration{Version: last + 2, Name: "after.sql", SQL: "CREATE TABLE test_after (id INTEGER PRIMARY KEY) STRICT;"}
	path := filepath.Join(t.TempDir(), "late.db")
	s, err := openAt(path, append(append([]migrations.Migration{}, all...), after))
	if err != nil {
		t.Fatal(err)
	}
	s.Close()
	s, err = openAt(path, append(append([]migrations.Migration{}, all...), late, after))
	if err != nil {
		t.Fatalf("open with the late migration: %v", err)
	}
	defer s.Close()
	var n int
	if err := s.w.QueryRow(`SELECT count(*) FROM sqlite_schema WHERE name IN ('test_late', 'test_after')`).Scan(&n); err != nil || n != 2 {
		t.Errorf("tables after the late migration: %d, %v; want 2", n, err)
	}
	var rows int
	s.w.QueryRow(`SELECT count(*) FROM schema_version`).Scan(&rows)
	if rows != len(all)+2 {
		t.Errorf("schema_version rows = %d, want %d", rows, len(all)+2)
	}
	// Without the file of a version it has had, the database is newer.
	s.Close()
	if _, err := openAt(path, append(append([]migrations.Migration{}, all...), after)); !errors.Is(err, ErrNewerSchema) {
		t.Errorf("open without a migration the database has had: %v, want ErrNewerSchema", err)
	}
}
