package store

import (
	"bytes"
	"context"
	"encoding/json"
	"flag"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"longwave/ingest/testenv"
)

var updateLiterature = flag.Bool("update-literature", false, "rewrite testdata/trends/literature_ranges.json from migration 0002")

// literatureRowsFile holds the rows of migrations/0002_reference_ranges.sql as
// the store reads them back, in ID order: package trends tests its range
// lookups on them without opening SQLite.
const literatureRowsFile = "testdata/trends/literature_ranges.json"

// allReferenceRanges reads every set of the reference_ranges table through
// ReferenceRanges, in ID order.
func allReferenceRanges(t *testing.T, s *Store) []ReferenceRange {
	t.Helper()
	ctx := context.Background()
	sets, err := s.r.QueryContext(ctx, `SELECT set_name FROM reference_ranges GROUP BY set_name ORDER BY min(id)`)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for sets.Next() {
		var n string
		if err := sets.Scan(&n); err != nil {
			t.Fatal(err)
		}
		names = append(names, n)
	}
	sets.Close()
	var out []ReferenceRange
	for _, n := range names {
		rows, err := s.ReferenceRanges(ctx, n)
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, rows...)
	}
	slices.SortFunc(out, func(a, b ReferenceRange) int { return int(a.ID - b.ID) })
	return out
}

// The literature rows of migration 0002, read back through the store, are
// the rows of testdata/trends/literature_ranges.json (rewritten with
// -update-literature; .ci/run then fails if the file drifted). The values
// themselves are checked against REFERENCES.md section 1 by
// trends.TestMigrationRowsValidate, on that file.
func TestLiteratureRowsFile(t *testing.T) {
	s := mustOpen(t)
	rows := allReferenceRanges(t, s)
	if len(rows) == 0 {
		t.Fatal("migration 0002 loaded no reference ranges")
	}
	got, err := json.MarshalIndent(rows, "", "  ")
	if err != nil {
		t.Fatal(err)
	}
	got = append(got, '\n')
	path := filepath.Join(testenv.ModuleRoot(t), literatureRowsFile)
	if *updateLiterature {
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (make it with go test ./server/store/ -run TestLiteratureRowsFile -update-literature)", err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("the migration's rows differ from %s: rerun with -update-literature and review the diff", literatureRowsFile)
	}
}

// The schema itself refuses rows the range loader of package trends would
// refuse: a status other than checked or from memory, an age band upside
// down, an SD of 0, a limit that is not a number.
func TestReferenceRangesSchemaRefuses(t *testing.T) {
	s := mustOpen(t)
	for _, bad := range []string{
		`INSERT INTO reference_ranges (set_name, marker, region, state, age_min, age_max, population, method, bands, citation, status) VALUES ('x','pdr_frequency','posterior','closed',1,2,'p','m','b','c','abstract')`,
		`INSERT INTO reference_ranges (set_name, marker, region, state, age_min, age_max, population, method, bands, citation, status) VALUES ('x','pdr_frequency','posterior','closed',3,2,'p','m','b','c','checked')`,
		`INSERT INTO reference_ranges (set_name, marker, region, state, age_min, age_max, sd, mean, population, method, bands, citation, status) VALUES ('x','pdr_frequency','posterior','closed',1,2,0,9,'p','m','b','c','checked')`,
		`INSERT INTO reference_ranges (set_name, marker, region, state, age_min, age_max, lower, upper, population, method, bands, citation, status) VALUES ('x','pdr_frequency','posterior','closed',1,2,'low',9,'p','m','b','c','checked')`,
	} {
		if _, err := s.w.Exec(bad); err == nil {
			t.Errorf("schema accepted %s", bad)
		}
	}
	// A good row is accepted, so the refusals above are the rules, not a
	// broken statement.
	if _, err := s.w.Exec(`INSERT INTO reference_ranges (set_name, marker, region, state, age_min, age_max, lower, upper, population, method, bands, citation, status) VALUES ('x','pdr_frequency','posterior','closed',1,2,8,9,'p','m','b','c','checked')`); err != nil {
		t.Errorf("schema refused a good row: %v", err)
	}
}
