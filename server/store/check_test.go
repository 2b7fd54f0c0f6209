package store

import (
	"bytes"
	"context"
	"crypto/sha256"
	"database/sql"
	"errors"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"longwave/metrics"
	"longwave/migrations"
)

// checkFixture is a closed database of two patients with one visit each:
// visit 1 (CK-001) analysed under settings v2 with a 600 KB recording (more
// than one read of the hash loop), visit 2 (CK-002) under v1 with a 40 KB
// one. It returns the database path and the two recordings' contents.
func checkFixture(t *testing.T) (string, [2][]byte) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "clinic.db")
	s, err := Open(path, WithClock(fixedClock))
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(12, 1))
	var contents [2][]byte
	for i, spec := range []struct {
		code, date string
		size       int
		set        metrics.Settings
	}{
		{"CK-001", "2025-02-03", 600_000, metrics.V2()},
		{"CK-002", "2025-04-05", 40_000, metrics.V1()},
	} {
		contents[i] = make([]byte, spec.size)
		for j := range contents[i] {
			contents[i][j] = byte(rng.Uint32())
		}
		nv := sampleVisit(spec.code, spec.date, contents[i], uint64(i))
		nv.Analysis.Result.SettingsVersion = spec.set.Version
		nv.Analysis.Result.SettingsHash = spec.set.Hash()
		saveWithFile(t, s, nv, contents[i])
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	return path, contents
}

// rawExec runs statements on the database with foreign keys off, as a
// damaged or hand-edited database would have them.
func rawExec(t *testing.T, path string, stmts ...string) {
	t.Helper()
	db, err := sql.Open("sqlite", path+"?_pragma=foreign_keys(0)&_pragma=busy_timeout(5000)")
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	for _, q := range stmts {
		if _, err := db.Exec(q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
}

// runCheck opens path read-only and checks it.
func runCheck(t *testing.T, path string) *Report {
	t.Helper()
	s, err := OpenReadOnly(path)
	if err != nil {
		t.Fatalf("OpenReadOnly: %v", err)
	}
	defer s.Close()
	r, err := s.Check(context.Background())
	if err != nil {
		t.Fatalf("Check: %v", err)
	}
	return r
}

func problemLines(r *Report) []string {
	var out []string
	for _, p := range r.Problems {
		out = append(out, p.String())
	}
	return out
}

func TestCheckCleanDatabase(t *testing.T) {
	path, contents := checkFixture(t)
	before := fileSHA(t, path)
	r := runCheck(t, path)
	if !r.OK() {
		t.Fatalf("clean database: problems:\n%s", strings.Join(problemLines(r), "\n"))
	}
	got := fmt.Sprintf("migrations %d/%d, patients %d, visits %d, recordings %d, files %d, bytes %d, settings %v",
		r.MigrationsApplied, r.MigrationsKnown, r.Patients, r.Visits, r.Recordings, r.Files, r.Bytes, r.SettingsVisits)
	all, err := migrations.All()
	if err != nil {
		t.Fatal(err)
	}
	want := fmt.Sprintf("migrations %d/%d, patients 2, visits 2, recordings 2, files 2, bytes %d, settings map[1:1 2:1]",
		len(all), len(all), len(contents[0])+len(contents[1]))
	if got != want {
		t.Errorf("report counts\n got %s\nwant %s", got, want)
	}
	if r.Markers == 0 || r.Tables < 10 {
		t.Errorf("report: %d markers, %d tables: the checks looked at nothing", r.Markers, r.Tables)
	}
	if after := fileSHA(t, path); after != before {
		t.Errorf("Check changed the database file")
	}
}

func fileSHA(t *testing.T, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return fmt.Sprintf("%x", sha256.Sum256(b))
}

// TestCheckFindsEachProblem damages a clean database in one way per case
// and wants exactly the lines that name that damage.
func TestCheckFindsEachProblem(t *testing.T) {
	v1Hash, v2Hash := metrics.V1().Hash(), metrics.V2().Hash()
	recPath := func(path string, content []byte) string {
		return filepath.Join(path+".data", shaOf(content)[:2], shaOf(content)+".edf")
	}
	cases := []struct {
		name   string
		damage func(t *testing.T, path string, contents [2][]byte)
		want   []string // one substring per expected problem line, in order
	}{
		{"recording file removed", func(t *testing.T, path string, c [2][]byte) {
			if err := os.Remove(recPath(path, c[1])); err != nil {
				t.Fatal(err)
			}
		}, []string{"recording: recording 2 of visit 2 (patient CK-002): file " + "%REC1%" + " is missing"}},
		{"recording altered by one byte", func(t *testing.T, path string, c [2][]byte) {
			b := bytes.Clone(c[0])
			b[len(b)/2] ^= 0x01
			if err := os.WriteFile(recPath(path, c[0]), b, 0o640); err != nil {
				t.Fatal(err)
			}
		}, []string{"recording: recording 1 of visit 1 (patient CK-001): file %REC0% has SHA-256 "}},
		{"recording cut short", func(t *testing.T, path string, c [2][]byte) {
			if err := os.Truncate(recPath(path, c[1]), 39_999); err != nil {
				t.Fatal(err)
			}
		}, []string{"recording: recording 2 of visit 2 (patient CK-002): file %REC1% has 39999 bytes, the row says 40000"}},
		{"visit without a recording", func(t *testing.T, path string, c [2][]byte) {
			rawExec(t, path, `DELETE FROM recordings WHERE visit_id = 2`)
		}, []string{"visit: visit 2 (patient CK-002): no recording stored"}},
		{"unknown settings version", func(t *testing.T, path string, c [2][]byte) {
			rawExec(t, path, `UPDATE conditions SET settings_version = '9' WHERE visit_id = 2`,
				`UPDATE markers SET settings_version = '9' WHERE visit_id = 2`)
		}, []string{
			`visit: visit 2 (patient CK-002): conditions made by settings version "9", unknown to this longwave`,
			`visit: visit 2 (patient CK-002): 49 markers made by settings version "9", unknown to this longwave`,
		}},
		{"known version with another hash", func(t *testing.T, path string, c [2][]byte) {
			rawExec(t, path, `UPDATE markers SET settings_hash = '`+v1Hash+`' WHERE visit_id = 1 AND name = 'pdr_frequency'`)
		}, []string{"visit: visit 1 (patient CK-001): 6 markers made by settings version 2 with hash " + v1Hash[:12] +
			", not that version's hash " + v2Hash[:12]}},
		{"markers and conditions of different known versions", func(t *testing.T, path string, c [2][]byte) {
			rawExec(t, path, `UPDATE markers SET settings_version = '1', settings_hash = '`+v1Hash+`' WHERE visit_id = 1 AND name = 'rel_beta'`)
		}, []string{"visit: visit 1 (patient CK-001): 6 markers made by settings version 1 (hash " + v1Hash[:12] +
			"), its conditions by version 2 (hash " + v2Hash[:12] + ")"}},
		{"analysis missing", func(t *testing.T, path string, c [2][]byte) {
			rawExec(t, path, `DELETE FROM conditions WHERE visit_id = 1`)
		}, []string{"visit: visit 1 (patient CK-001): no analysis stored"}},
		{"migration not applied", func(t *testing.T, path string, c [2][]byte) {
			rawExec(t, path, `DELETE FROM schema_version WHERE version = 3`)
		}, []string{"migration: 0003_accounts.sql: not applied (no schema_version row for version 3)"}},
		{"unknown migration applied", func(t *testing.T, path string, c [2][]byte) {
			rawExec(t, path, `INSERT INTO schema_version (version, name, applied_at) VALUES (7, '0007_later.sql', '2026-01-01T00:00:00Z')`)
		}, []string{"migration: version 7 (0007_later.sql): applied, but unknown to this longwave"}},
		{"migration recorded under another name", func(t *testing.T, path string, c [2][]byte) {
			rawExec(t, path, `UPDATE schema_version SET name = '0002_other.sql' WHERE version = 2`)
		}, []string{`migration: 0002_reference_ranges.sql: schema_version row 2 names "0002_other.sql" instead`}},
		{"foreign key violated", func(t *testing.T, path string, c [2][]byte) {
			rawExec(t, path, `INSERT INTO flags (id, visit_id, rule, severity, reason, source) VALUES (900, 77, 'r', 'caution', 'x', 'y')`)
		}, []string{"foreign key: table flags rowid 900: refers to a row of visits that does not exist"}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			path, contents := checkFixture(t)
			tc.damage(t, path, contents)
			r := runCheck(t, path)
			got := problemLines(r)
			if len(got) != len(tc.want) {
				t.Fatalf("%d problems, want %d:\n%s", len(got), len(tc.want), strings.Join(got, "\n"))
			}
			for i, w := range tc.want {
				w = strings.ReplaceAll(w, "%REC0%", recPath(path, contents[0]))
				w = strings.ReplaceAll(w, "%REC1%", recPath(path, contents[1]))
				if !strings.HasPrefix(got[i], w) {
					t.Errorf("problem %d\n got %s\nwant %s…", i, got[i], w)
				}
			}
		})
	}
}

// TestCheckCorruptPage overwrites the cells of an index's root page in a
// copy of a clean database; integrity_check must say so.
func TestCheckCorruptPage(t *testing.T) {
	path, _ := checkFixture(t)
	db, err := sql.Open("sqlite", path)
	if err != nil {
		t.Fatal(err)
	}
	var pageSize, root int64
	err = db.QueryRow(`SELECT (SELECT page_size FROM pragma_page_size),
		(SELECT rootpage FROM sqlite_schema WHERE name = 'markers_name')`).Scan(&pageSize, &root)
	db.Close()
	if err != nil {
		t.Fatal(err)
	}
	f, err := os.OpenFile(path, os.O_RDWR, 0)
	if err != nil {
		t.Fatal(err)
	}
	// The cell content area fills a b-tree page from its end: overwrite its
	// last quarter, the keys of the index entries.
	junk := bytes.Repeat([]byte{0x5a}, int(pageSize/4))
	if _, err := f.WriteAt(junk, root*pageSize-int64(len(junk))); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
	r := runCheck(t, path)
	var integrity int
	for _, p := range r.Problems {
		if p.Check != CheckIntegrity {
			continue
		}
		integrity++
		if strings.Contains(p.What, "\n") || !strings.HasPrefix(p.Where, "index markers_name") && p.Where != "database file" && p.Where != "database" {
			t.Errorf("integrity problem not one line about the index: %s", p)
		}
	}
	if integrity == 0 {
		t.Fatalf("no integrity problem after corrupting page %d:\n%s", root, strings.Join(problemLines(r), "\n"))
	}
	t.Logf("%d problems:\n%s", len(r.Problems), strings.Join(problemLines(r), "\n"))
}

// TestOpenReadOnly: nothing is created, nothing migrated, nothing written.
func TestOpenReadOnly(t *testing.T) {
	dir := t.TempDir()
	missing := filepath.Join(dir, "none.db")
	if _, err := OpenReadOnly(missing); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("missing file: error %v, want one wrapping os.ErrNotExist", err)
	}
	if _, err := os.Stat(missing); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("OpenReadOnly created %s", missing)
	}
	notDB := filepath.Join(dir, "notes.db")
	if err := os.WriteFile(notDB, []byte("not a database at all"), 0o600); err != nil {
		t.Fatal(err)
	}
	if _, err := OpenReadOnly(notDB); !errors.Is(err, ErrNotLongwave) {
		t.Errorf("text file: error %v, want ErrNotLongwave", err)
	}

	// The newest migration made to look not applied, whatever its number.
	all, err := migrations.All()
	if err != nil {
		t.Fatal(err)
	}
	newest, below := lastVersion(all), 0
	for _, m := range all {
		if m.Version < newest {
			below = max(below, m.Version)
		}
	}
	path, _ := checkFixture(t)
	rawExec(t, path, fmt.Sprintf(`DELETE FROM schema_version WHERE version = %d`, newest))
	before := fileSHA(t, path)
	s, err := OpenReadOnly(path)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if _, err := s.CreateUser(context.Background(), "ro-test", RoleClinician, "long-enough-password-1"); err == nil {
		t.Errorf("CreateUser on a read-only store succeeded")
	}
	if v, err := s.SchemaVersion(context.Background()); err != nil || v != below {
		t.Errorf("schema version %d, %v; want %d (no migration applied)", v, err, below)
	}
	if after := fileSHA(t, path); after != before {
		t.Errorf("OpenReadOnly changed the database file")
	}
}

// BenchmarkHashFiles re-hashes 16 recording files of 4 MiB (from the page
// cache after the first run) with 1, 2 and 4 workers: the figure behind
// hashWorkers.
func BenchmarkHashFiles(b *testing.B) {
	dir := b.TempDir()
	rng := rand.New(rand.NewPCG(3, 4))
	var paths []string
	var total int64
	for i := range 16 {
		content := make([]byte, 4<<20)
		for j := range content {
			content[j] = byte(rng.Uint32())
		}
		p := filepath.Join(dir, fmt.Sprintf("f%02d.edf", i))
		if err := os.WriteFile(p, content, 0o600); err != nil {
			b.Fatal(err)
		}
		paths = append(paths, p)
		total += int64(len(content))
	}
	for _, n := range []int{1, 2, 4} {
		b.Run(fmt.Sprintf("workers=%d", n), func(b *testing.B) {
			b.SetBytes(total)
			for b.Loop() {
				facts, got := hashFiles(context.Background(), paths, n)
				if got != total || len(facts) != len(paths) {
					b.Fatalf("hashed %d bytes of %d files, want %d of %d", got, len(facts), total, len(paths))
				}
			}
		})
	}
}
