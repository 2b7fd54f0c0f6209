package store

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// openNamed opens a fresh store called name in dir.
func openNamed(tb testing.TB, dir, name string) *Store {
	tb.Helper()
	s, err := Open(filepath.Join(dir, name), WithClock(fixedClock))
	if err != nil {
		tb.Fatalf("Open: %v", err)
	}
	tb.Cleanup(func() { s.Close() })
	return s
}

// saveWithFile stores the visit and its recording file, as an ingest does.
func saveWithFile(tb testing.TB, s *Store, nv NewVisit, content []byte) {
	tb.Helper()
	if _, _, err := s.PutRecording(shaOf(content), nv.Recordings[0].Format, bytes.NewReader(content)); err != nil {
		tb.Fatal(err)
	}
	if _, err := s.SaveVisit(context.Background(), nv); err != nil {
		tb.Fatal(err)
	}
}

// dump is every stored fact of every visit but the row IDs, one JSON line
// per visit in code and date order: two stores hold the same visits exactly
// when their dumps are equal.
func dump(tb testing.TB, s *Store) string {
	tb.Helper()
	ctx := context.Background()
	courses, err := s.AllVisitRecords(ctx)
	if err != nil {
		tb.Fatal(err)
	}
	var b strings.Builder
	for _, pc := range courses {
		p := pc.Patient
		p.ID = 0
		for _, v := range pc.Visits {
			src, err := s.VisitSource(ctx, v.Visit.ID)
			if err != nil {
				tb.Fatal(err)
			}
			d, err := s.VisitDisplay(ctx, v.Visit.ID)
			if err != nil {
				tb.Fatal(err)
			}
			v.Visit.ID, v.Visit.PatientID = 0, 0
			for i := range v.Recordings {
				v.Recordings[i].ID, v.Recordings[i].VisitID = 0, 0
			}
			js, err := json.Marshal([]any{p, v, src.DeclaredState, src.Periods, d})
			if err != nil {
				tb.Fatal(err)
			}
			b.Write(js)
			b.WriteByte('\n')
		}
	}
	return b.String()
}

var testMerge = MergeOptions{SettingsVersion: "v1", SettingsHash: "4f2a"}

// threeParts builds two parts and a store holding both parts' visits made
// directly (the "whole ingest"), with one recording shared by two visits.
func threeParts(t *testing.T) (dir string, a, b, whole *Store) {
	dir = t.TempDir()
	a, b, whole = openNamed(t, dir, "part-0.db"), openNamed(t, dir, "part-1.db"), openNamed(t, dir, "whole.db")
	x, y, z, shared := []byte("recording x"), []byte("recording y"), []byte("recording z"), []byte("recording shared")
	for _, st := range []*Store{a, whole} {
		saveWithFile(t, st, sampleVisit("MC-0001", "2024-03-05", x, 1), x)
		saveWithFile(t, st, sampleVisit("MC-0002", "2024-05-01", y, 2), y)
	}
	for _, st := range []*Store{b, whole} {
		saveWithFile(t, st, sampleVisit("MC-0001", "2025-03-04", z, 3), z)
	}
	// The same file in two parts: MC-0003 comes before MC-0004 on the same
	// day, so MC-0003's visit is kept whichever part is merged first.
	saveWithFile(t, a, sampleVisit("MC-0004", "2024-06-10", shared, 4), shared)
	saveWithFile(t, b, sampleVisit("MC-0003", "2024-06-10", shared, 5), shared)
	saveWithFile(t, whole, sampleVisit("MC-0003", "2024-06-10", shared, 5), shared)
	// A patient without visits is carried too.
	for _, st := range []*Store{b, whole} {
		if _, err := st.UpsertPatient(context.Background(), Patient{Code: "MC-0004", Sex: "F", BirthYear: 1950, Group: "patient", Cohort: "north"}); err != nil {
			t.Fatal(err)
		}
	}
	return dir, a, b, whole
}

func TestMergeEqualsWholeAndIsIdempotent(t *testing.T) {
	ctx := context.Background()
	dir, a, b, whole := threeParts(t)
	want := dump(t, whole)
	for _, order := range [][]*Store{{a, b}, {b, a}} {
		into := openNamed(t, t.TempDir(), "clinic.db")
		rep, err := into.Merge(ctx, order, testMerge)
		if err != nil {
			t.Fatal(err)
		}
		if rep.Visits != 4 || rep.Already != 0 || len(rep.Duplicates) != 1 || rep.Files != 4 || rep.Patients != 4 {
			t.Errorf("report %+v, want 4 visits, 1 duplicate, 4 files, 4 patients", rep)
		}
		if d := rep.Duplicates[0]; d.Visit != "MC-0004 2024-06-10" || d.Of != "MC-0003 2024-06-10" || d.Part != "part-0.db" {
			t.Errorf("duplicate %+v, want MC-0004 of MC-0003 from part-0.db", d)
		}
		if got := dump(t, into); got != want {
			t.Errorf("merged store differs from the whole one:\n%.600s\nwant\n%.600s", got, want)
		}
		if n := len(filesIn(t, into.DataDir())); n != 4 {
			t.Errorf("%d files in the data folder, want 4", n)
		}
		for _, v := range []string{"x", "y", "z", "shared"} {
			if _, err := into.StoredRecordingPath(ctx, shaOf([]byte("recording "+v))); err != nil {
				t.Errorf("recording %s: %v", v, err)
			}
		}
		// Twice: nothing added, not even a changed row.
		counts := fmtCounts(rowCounts(t, into))
		rep, err = into.Merge(ctx, order, testMerge)
		if err != nil || rep.Visits != 0 || rep.Already != 4 || rep.Patients != 0 || rep.Files != 0 || len(rep.Duplicates) != 1 {
			t.Errorf("second merge: %+v %v", rep, err)
		}
		if got := fmtCounts(rowCounts(t, into)); got != counts {
			t.Errorf("second merge changed counts %s -> %s", counts, got)
		}
		if got := dump(t, into); got != want {
			t.Error("second merge changed the store")
		}
	}
	_ = dir
}

// TestMergeCarriesEveryColumn: a column that a later migration adds below
// visits (to markers, say) reaches the merged store without the merge code
// naming it.
func TestMergeCarriesEveryColumn(t *testing.T) {
	ctx := context.Background()
	dir := t.TempDir()
	part, into := openNamed(t, dir, "part.db"), openNamed(t, dir, "clinic.db")
	x := []byte("recording x")
	saveWithFile(t, part, sampleVisit("MC-0001", "2024-03-05", x, 1), x)
	for _, st := range []*Store{part, into} {
		for _, q := range []string{`ALTER TABLE markers ADD COLUMN extra_low REAL`,
			`CREATE TABLE marker_notes (id INTEGER PRIMARY KEY, marker_id INTEGER NOT NULL REFERENCES markers (id) ON DELETE CASCADE, note TEXT NOT NULL) STRICT`} {
			if _, err := st.w.ExecContext(ctx, q); err != nil {
				t.Fatal(err)
			}
		}
	}
	if _, err := part.w.ExecContext(ctx, `UPDATE markers SET extra_low = value - 0.5`); err != nil {
		t.Fatal(err)
	}
	if _, err := part.w.ExecContext(ctx, `INSERT INTO marker_notes (marker_id, note) SELECT id, 'note of ' || name || '/' || region || '/' || state FROM markers`); err != nil {
		t.Fatal(err)
	}
	if _, err := into.Merge(ctx, []*Store{part}, testMerge); err != nil {
		t.Fatal(err)
	}
	q := `SELECT count(*), coalesce(sum(abs(m.extra_low - (m.value - 0.5)) < 1e-12), 0),
		coalesce(sum(n.note = 'note of ' || m.name || '/' || m.region || '/' || m.state), 0)
		FROM markers m JOIN marker_notes n ON n.marker_id = m.id`
	var want, gotLow, gotNote int
	if err := part.r.QueryRowContext(ctx, `SELECT count(*) FROM markers`).Scan(&want); err != nil {
		t.Fatal(err)
	}
	var n int
	if err := into.r.QueryRowContext(ctx, q).Scan(&n, &gotLow, &gotNote); err != nil {
		t.Fatal(err)
	}
	if want == 0 || n != want || gotLow != want || gotNote != want {
		t.Errorf("merged %d markers with notes, %d with their interval, %d with their own note; want %d of each", n, gotLow, gotNote, want)
	}
}

func TestMergeRefusesAndWritesNothing(t *testing.T) {
	ctx := context.Background()
	x, y := []byte("recording x"), []byte("recording y")
	cases := []struct {
		name  string
		setup func(t *testing.T, part, into *Store)
		want  []string // in the error
	}{
		{"another birth year", func(t *testing.T, part, into *Store) {
			nv := sampleVisit("MC-0001", "2024-03-05", x, 1)
			nv.Patient.BirthYear = 1951
			saveWithFile(t, part, nv, x)
			into.UpsertPatient(ctx, Patient{Code: "MC-0001", BirthYear: 1950, Sex: "F"})
		}, []string{"patient MC-0001: birth year 1950 in clinic.db, 1951 in part.db"}},
		{"another sex and cohort", func(t *testing.T, part, into *Store) {
			nv := sampleVisit("MC-0001", "2024-03-05", x, 1)
			saveWithFile(t, part, nv, x)
			into.UpsertPatient(ctx, Patient{Code: "MC-0001", Sex: "M", Cohort: "south"})
		}, []string{"sex M in clinic.db, F in part.db", "cohort south in clinic.db, north in part.db"}},
		{"another recording on the same day", func(t *testing.T, part, into *Store) {
			saveWithFile(t, part, sampleVisit("MC-0001", "2024-03-05", x, 1), x)
			saveWithFile(t, into, sampleVisit("MC-0001", "2024-03-05", y, 1), y)
		}, []string{"patient MC-0001 on 2024-03-05: part.db holds other recording files than clinic.db"}},
		{"other settings", func(t *testing.T, part, into *Store) {
			nv := sampleVisit("MC-0001", "2024-03-05", x, 1)
			nv.Analysis.Result.SettingsVersion = "v0"
			saveWithFile(t, part, nv, x)
		}, []string{"part.db holds 1 visit(s) not analysed with settings v1", "reprocess"}},
		{"a missing file", func(t *testing.T, part, into *Store) {
			saveWithFile(t, part, sampleVisit("MC-0002", "2024-05-01", y, 2), y)
			saveWithFile(t, part, sampleVisit("MC-0001", "2024-03-05", x, 1), x)
			os.Remove(part.RecordingFilePath(shaOf(x), "EDF+C"))
		}, []string{"patient MC-0001 on 2024-03-05", "stored file"}},
		{"a write failing in the transaction", func(t *testing.T, part, into *Store) {
			saveWithFile(t, part, sampleVisit("MC-0001", "2024-03-05", x, 1), x)
			saveWithFile(t, part, sampleVisit("MC-0002", "2024-05-01", y, 2), y)
			// The second visit's markers fail, after the first visit's rows
			// and both files were written.
			if _, err := into.w.ExecContext(ctx, `CREATE TRIGGER refuse BEFORE INSERT ON markers
				WHEN (SELECT count(*) FROM markers) >= 49 BEGIN SELECT RAISE(ABORT, 'simulated write failure'); END`); err != nil {
				t.Fatal(err)
			}
		}, []string{"part.db: patient MC-0002 on 2024-05-01", "simulated write failure"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			part, into := openNamed(t, dir, "part.db"), openNamed(t, dir, "clinic.db")
			c.setup(t, part, into)
			before, files := dump(t, into), len(filesIn(t, into.DataDir()))
			counts := fmtCounts(rowCounts(t, into))
			_, err := into.Merge(ctx, []*Store{part}, testMerge)
			if err == nil {
				t.Fatal("merged")
			}
			for _, w := range c.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not say %q", err, w)
				}
			}
			if !strings.HasPrefix(c.name, "a ") && !errors.Is(err, ErrMergeConflict) {
				t.Errorf("error %v is not ErrMergeConflict", err)
			}
			if dump(t, into) != before || fmtCounts(rowCounts(t, into)) != counts {
				t.Error("a refused merge changed the store")
			}
			if n := len(filesIn(t, into.DataDir())); n != files {
				t.Errorf("a refused merge left %d files, had %d", n, files)
			}
		})
	}
	// The store itself as a part.
	dir := t.TempDir()
	into := openNamed(t, dir, "clinic.db")
	same, err := Open(into.Path())
	if err != nil {
		t.Fatal(err)
	}
	defer same.Close()
	if _, err := into.Merge(ctx, []*Store{same}, testMerge); !errors.Is(err, ErrMergeConflict) || !strings.Contains(err.Error(), "is the database merged into") {
		t.Errorf("merge into itself: %v", err)
	}
}
