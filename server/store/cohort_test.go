package store

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"reflect"
	"slices"
	"testing"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/migrations"
	"longwave/trends"
)

// Settings the test's analyses are made with (sampleAnalysis's).
const keptVersion, keptHash = "v1", "4f2a"

// keptEntries reads the kept entries straight from the table, by patient.
func keptEntries(tb testing.TB, s *Store) map[int64]trends.CohortEntry {
	tb.Helper()
	rows, err := s.r.Query(`SELECT patient_id, format, settings_version, settings_hash, entry FROM cohort_summaries`)
	if err != nil {
		tb.Fatal(err)
	}
	defer rows.Close()
	out := map[int64]trends.CohortEntry{}
	for rows.Next() {
		var id, format int64
		var ver, hash string
		var blob []byte
		if err := rows.Scan(&id, &format, &ver, &hash, &blob); err != nil {
			tb.Fatal(err)
		}
		e, err := trends.DecodeEntry(blob)
		if err != nil || format != trends.EntryFormat {
			tb.Fatalf("patient %d: format %d: %v", id, format, err)
		}
		if v, h := s.cohort.get(); ver != v || hash != h {
			tb.Fatalf("patient %d: kept for %s/%s, the store keeps for %s/%s", id, ver, hash, v, h)
		}
		out[id] = e
	}
	if err := rows.Err(); err != nil {
		tb.Fatal(err)
	}
	return out
}

// rebuiltEntries makes every patient's entry from scratch: every visit
// with every marker as the course reads them (AllVisitRecords, JSON and
// all), summarised by trends.
func rebuiltEntries(tb testing.TB, s *Store) []trends.CohortEntry {
	tb.Helper()
	all, err := s.AllVisitRecords(context.Background())
	if err != nil {
		tb.Fatal(err)
	}
	v, h := s.cohort.get()
	var out []trends.CohortEntry
	for _, pc := range all {
		out = append(out, trends.SummarisePatient(pc.Patient, pc.Visits, trends.EntryOptions{SettingsVersion: v, SettingsHash: h}))
	}
	return out
}

// checkKept fails unless every patient's kept entry equals its rebuild and
// no patient is left listed as dirty.
func checkKept(tb testing.TB, s *Store, after string) {
	tb.Helper()
	var dirty int
	if err := s.r.QueryRow(`SELECT count(*) FROM cohort_dirty`).Scan(&dirty); err != nil || dirty != 0 {
		tb.Fatalf("after %s: %d patients listed dirty after the commit (%v)", after, dirty, err)
	}
	kept := keptEntries(tb, s)
	want := rebuiltEntries(tb, s)
	if len(kept) != len(want) {
		tb.Fatalf("after %s: %d kept entries, %d patients", after, len(kept), len(want))
	}
	for _, w := range want {
		if got := kept[w.PatientID]; !reflect.DeepEqual(got, w) {
			tb.Fatalf("after %s: patient %s: kept entry\n%+v\nrebuilt\n%+v", after, w.Code, got, w)
		}
	}
}

// entryAnalysis is a random analysis of the main markers (and a few
// others): values, intervals, markers that cannot be computed, flags of
// both severities on some markers or all, conditions that change between
// visits (line frequency, reference, equipment, sampling rate, filters) and
// now and then another settings version.
func entryAnalysis(rng *rand.Rand) Analysis {
	a := sampleAnalysis(rng.Uint64())
	a.Result.Display = metrics.Display{}
	res := a.Result
	if rng.IntN(8) == 0 {
		res.SettingsVersion = "v0"
	}
	c := &res.Conditions
	c.SampleRate = []float64{256, 256, 512}[rng.IntN(3)]
	c.Reference = []string{"REF", "REF", "Cz", ""}[rng.IntN(4)]
	c.Equipment = []string{"amp-7", "amp-7", "amp-9"}[rng.IntN(3)]
	c.Filters.HighPass = ingest.Frequency{Hz: []float64{0.1, 0.5}[rng.IntN(2)], Known: rng.IntN(4) > 0}
	c.Filters.LowPass = ingest.Frequency{Hz: []float64{70, 35}[rng.IntN(2)], Known: rng.IntN(4) > 0}
	res.Quality.LineFrequency = []float64{50, 50, 60, 0}[rng.IntN(4)]
	c.LineFrequency = []float64{0, 50}[rng.IntN(2)]
	for _, ref := range trends.DefaultMainMarkers() {
		m := metrics.Marker{Name: ref.Marker, Region: ref.Region, State: ingest.EyeState(ref.State),
			Value: 8 + 3*rng.Float64(), Unit: "Hz", Computable: rng.IntN(6) > 0}
		switch {
		case !m.Computable:
			m.Value, m.Reason = 0, "too little clean data"
		case rng.IntN(2) == 0:
			se := 0.05 + 0.2*rng.Float64()
			m.Uncertainty = &metrics.Uncertainty{SE: se, Low: m.Value - 2*se, High: m.Value + 2*se, Level: 0.95, Method: "bootstrap", Resamples: 100}
		}
		// sampleAnalysis made some of these already: replace them.
		res.Markers = slices.DeleteFunc(res.Markers, func(x metrics.Marker) bool { return x.Key() == m.Key() })
		res.Markers = append(res.Markers, m)
	}
	a.Flags = nil
	for range rng.IntN(3) {
		f := metrics.Flag{Rule: []string{"drowsy", "short_clean", "no_eyes_open"}[rng.IntN(3)],
			Severity: []metrics.Severity{metrics.Caution, metrics.NotComparable}[rng.IntN(2)], Reason: "invented", Source: "test"}
		if rng.IntN(2) == 0 {
			f.Markers = []string{trends.DefaultMainMarkers()[rng.IntN(4)].Marker}
		}
		a.Flags = append(a.Flags, f)
	}
	return a
}

// The kept cohort entries equal a rebuild from scratch after every step of
// a seeded random sequence of ingests, reprocesses, patient fact changes
// (a patient made a control and back), visit and patient deletions.
func TestKeptEntriesMatchRebuild(t *testing.T) {
	s := mustOpen(t)
	s.KeepCohortFor(keptVersion, keptHash)
	ctx := context.Background()
	rng := rand.New(rand.NewPCG(12, 3))
	codes := make([]string, 10)
	for i := range codes {
		codes[i] = fmt.Sprintf("MC-K%02d", i)
	}
	var visitIDs []int64
	steps := 250
	if testing.Short() || raceEnabled { // every step rebuilds all entries from scratch to compare
		steps = 60
	}
	counts := map[string]int{}
	for step := 0; step < steps; step++ {
		var what string
		switch k := rng.IntN(20); {
		case k < 9 || len(visitIDs) == 0: // ingest
			what = "ingest"
			code := codes[rng.IntN(len(codes))]
			nv := NewVisit{
				Patient:    Patient{Code: code, BirthYear: []int{0, 1945, 1952}[rng.IntN(3)]},
				Visit:      Visit{Date: fmt.Sprintf("%d-%02d-%02d", 2015+rng.IntN(10), 1+rng.IntN(12), 1+rng.IntN(28))},
				Recordings: []Recording{{SHA256: shaOf([]byte(fmt.Sprint("kept ", step))), Format: "EDF+C", Size: 10, Role: RoleSingle}},
				Analysis:   entryAnalysis(rng),
			}
			v, err := s.SaveVisit(ctx, nv)
			if errors.Is(err, ErrVisitExists) {
				what = "ingest on a date taken"
				break
			}
			if err != nil {
				t.Fatalf("step %d: %v", step, err)
			}
			visitIDs = append(visitIDs, v.ID)
		case k < 13: // reprocess
			what = "reprocess"
			if err := s.ReplaceAnalysis(ctx, visitIDs[rng.IntN(len(visitIDs))], entryAnalysis(rng)); err != nil {
				t.Fatalf("step %d: %v", step, err)
			}
		case k < 17: // patient facts, a control in and out of the group
			what = "patient facts"
			p := Patient{Code: codes[rng.IntN(len(codes))], Group: []string{"patient", "control", " Control "}[rng.IntN(3)],
				Cohort: []string{"", "north", "south"}[rng.IntN(3)], FollowUpMonths: []int{0, 6, 24}[rng.IntN(3)]}
			if _, err := s.UpsertPatient(ctx, p); err != nil {
				t.Fatalf("step %d: %v", step, err)
			}
		case k < 19: // a visit deleted
			what = "visit deleted"
			i := rng.IntN(len(visitIDs))
			if err := s.inTx(ctx, func(tx *sql.Tx) error {
				_, err := tx.ExecContext(ctx, `DELETE FROM visits WHERE id = ?`, visitIDs[i])
				return err
			}); err != nil {
				t.Fatalf("step %d: %v", step, err)
			}
			visitIDs = slices.Delete(visitIDs, i, i+1)
		default: // a patient deleted, visits and all
			what = "patient deleted"
			code := codes[rng.IntN(len(codes))]
			if err := s.inTx(ctx, func(tx *sql.Tx) error {
				_, err := tx.ExecContext(ctx, `DELETE FROM patients WHERE code = ?`, code)
				return err
			}); err != nil {
				t.Fatalf("step %d: %v", step, err)
			}
			visitIDs = visitIDs[:0]
			rows, err := s.r.Query(`SELECT id FROM visits ORDER BY id`)
			if err != nil {
				t.Fatal(err)
			}
			for rows.Next() {
				var id int64
				if err := rows.Scan(&id); err != nil {
					t.Fatal(err)
				}
				visitIDs = append(visitIDs, id)
			}
			rows.Close()
		}
		counts[what]++
		checkKept(t, s, fmt.Sprintf("step %d (%s)", step, what))
	}
	t.Logf("steps: %v", counts)
	// What the kept entries show is not trivial: flags, comparable points
	// and other-settings visits all occur.
	var points, flagged, other int
	for _, e := range keptEntries(t, s) {
		for _, sr := range e.Series {
			points += len(sr.Points)
		}
		if len(e.LatestFlags) > 0 {
			flagged++
		}
		other += e.Visits - e.ComparableVisits
	}
	if points == 0 || flagged == 0 || other == 0 {
		t.Errorf("kept entries: %d points, %d flagged patients, %d non-comparable visits; want some of each", points, flagged, other)
	}
	got, err := s.CohortEntries(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if want := rebuiltEntries(t, s); !reflect.DeepEqual(got, want) {
		t.Errorf("CohortEntries differs from the rebuild (%d entries, want %d)", len(got), len(want))
	}
}

// Entries that are missing (a database from before migration 0006), made
// for other settings, or unreadable are rebuilt when read, and kept.
func TestCohortEntriesRebuildsStale(t *testing.T) {
	ctx := context.Background()
	path, old := openBefore0006(t)
	rng := rand.New(rand.NewPCG(5, 5))
	for i := 0; i < 12; i++ {
		nv := sampleVisit(fmt.Sprintf("MC-S%02d", i%4), fmt.Sprintf("%d-05-01", 2018+i/4), []byte(fmt.Sprint("stale ", i)), uint64(i))
		nv.Analysis = entryAnalysis(rng)
		if _, err := old.SaveVisit(ctx, nv); err != nil {
			t.Fatal(err)
		}
	}
	old.Close()
	s, err := Open(path, WithClock(fixedClock))
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	s.KeepCohortFor(keptVersion, keptHash)
	var n int
	s.r.QueryRow(`SELECT count(*) FROM cohort_summaries`).Scan(&n)
	if n != 0 {
		t.Fatalf("%d entries right after the migration, want none yet", n)
	}
	read := func(what string) {
		t.Helper()
		got, err := s.CohortEntries(ctx)
		if err != nil {
			t.Fatalf("%s: %v", what, err)
		}
		if want := rebuiltEntries(t, s); !reflect.DeepEqual(got, want) || len(got) != 4 {
			t.Fatalf("%s: CohortEntries (%d) differs from the rebuild (%d)", what, len(got), len(want))
		}
		checkKept(t, s, what)
	}
	read("migration")
	s.KeepCohortFor("v0", keptHash) // now the "v0" visits are the comparable ones
	read("other settings")
	if _, err := s.w.Exec(`UPDATE cohort_summaries SET entry = x'01ff' WHERE patient_id = (SELECT min(id) FROM patients)`); err != nil {
		t.Fatal(err)
	}
	if _, err := s.w.Exec(`UPDATE cohort_summaries SET format = format + 1 WHERE patient_id = (SELECT max(id) FROM patients)`); err != nil {
		t.Fatal(err)
	}
	read("corrupt and old-format rows")
}

// A merge's raw row copies keep the entries too.
func TestMergeKeepsEntries(t *testing.T) {
	_, a, b, _ := threeParts(t)
	into := openNamed(t, t.TempDir(), "clinic.db")
	into.KeepCohortFor(keptVersion, keptHash)
	if _, err := into.Merge(context.Background(), []*Store{a, b}, testMerge); err != nil {
		t.Fatal(err)
	}
	checkKept(t, into, "merge")
	if got := len(keptEntries(t, into)); got != 4 {
		t.Errorf("%d entries after the merge, want 4", got)
	}
}

// BenchmarkCohortEntries5000 reads 5,000 kept entries, as the first cohort
// page after a start does.
func BenchmarkCohortEntries5000(b *testing.B) {
	s := mustOpen(b)
	ctx := context.Background()
	fillPatients(b, s, 5000, 4, 2019, func(int) string { return "" })
	s.KeepCohortFor(keptVersion, keptHash)
	if _, err := s.CohortEntries(ctx); err != nil { // kept for these settings
		b.Fatal(err)
	}
	b.ResetTimer()
	for b.Loop() {
		es, err := s.CohortEntries(ctx)
		if err != nil || len(es) != 5000 {
			b.Fatal(err)
		}
	}
}

// wantOverlay is what OverlaySpectra should give for a visit: its display
// products' posterior eyes-closed spectra.
func wantOverlay(tb testing.TB, s *Store, id int64) []metrics.Spectrum {
	tb.Helper()
	d, err := s.VisitDisplay(context.Background(), id)
	if err != nil {
		tb.Fatal(err)
	}
	var want []metrics.Spectrum
	for _, sp := range d.Spectra {
		if sp.State == ingest.EyesClosed && sp.Region == metrics.RegionPosterior {
			want = append(want, sp)
		}
	}
	return want
}

// OverlaySpectra gives each visit's posterior eyes-closed spectra as its
// display products hold them, in one query, follows a reprocess, and
// leaves out visits without them and unknown IDs; a database from before
// migration 0006 gets them from its display products.
func TestOverlaySpectra(t *testing.T) {
	ctx := context.Background()
	path, old := openBefore0006(t)
	var err error
	var ids []int64
	for i := 0; i < 4; i++ {
		if i == 2 {
			old.Close()
			if old, err = Open(path, WithClock(fixedClock)); err != nil { // the last two after the migration
				t.Fatal(err)
			}
		}
		nv := sampleVisit("MC-SP1", fmt.Sprintf("202%d-01-01", i), []byte(fmt.Sprint("spectra ", i)), uint64(i))
		if i == 3 {
			nv.Analysis.Result.Display = metrics.Display{} // no spectra: null in the JSON
		}
		v, err := old.SaveVisit(ctx, nv)
		if err != nil {
			t.Fatal(err)
		}
		ids = append(ids, v.ID)
	}
	s := old
	defer s.Close()
	check := func(what string) {
		t.Helper()
		got, err := s.OverlaySpectra(ctx, append(slices.Clone(ids), 9999))
		if err != nil {
			t.Fatal(err)
		}
		if len(got) != 3 {
			t.Fatalf("%s: spectra of %d visits, want 3 (the fourth has none, 9999 is no visit)", what, len(got))
		}
		for _, id := range ids[:3] {
			if want := wantOverlay(t, s, id); len(want) != 1 || !reflect.DeepEqual(got[id], want) {
				t.Errorf("%s: visit %d: %d spectra, want the %d of VisitDisplay", what, id, len(got[id]), len(want))
			}
		}
	}
	check("ingest and migration")
	var kept int
	s.r.QueryRow(`SELECT count(*) FROM overlay_spectra WHERE format = ?`, spectraFormat).Scan(&kept)
	if kept != 4 {
		t.Errorf("%d overlay rows after the first read, want 4 (the older two filled in, one an empty list)", kept)
	}
	if _, err := s.w.Exec(`UPDATE overlay_spectra SET spectra = x'05' WHERE visit_id = ?`, ids[1]); err != nil {
		t.Fatal(err)
	}
	check("a corrupt row")
	a := sampleAnalysis(77)
	a.Result.Display.Spectra[0].PeakHz = 8.25
	if err := s.ReplaceAnalysis(ctx, ids[0], a); err != nil {
		t.Fatal(err)
	}
	check("reprocess")
	if got, _ := s.OverlaySpectra(ctx, ids[:1]); len(got[ids[0]]) != 1 || got[ids[0]][0].PeakHz != 8.25 {
		t.Errorf("after the reprocess: %+v, want the new peak 8.25 Hz", got[ids[0]])
	}
	if none, err := s.OverlaySpectra(ctx, nil); err != nil || len(none) != 0 {
		t.Errorf("no IDs: %v, %v", none, err)
	}
}

// CourseVisits are PatientVisits without the quality's window decisions.
func TestCourseVisits(t *testing.T) {
	s := mustOpen(t)
	ctx := context.Background()
	for i := 0; i < 3; i++ {
		nv := sampleVisit("MC-CV1", fmt.Sprintf("202%d-01-01", i), []byte(fmt.Sprint("course ", i)), uint64(i))
		nv.Analysis.Result.Quality.Windows = []metrics.Window{{Start: 0, End: 1, State: ingest.EyesClosed, Kept: true},
			{Start: 1, End: 2, State: ingest.EyesClosed, Region: metrics.RegionFrontal, Reason: "slow waves"}}
		if _, err := s.SaveVisit(ctx, nv); err != nil {
			t.Fatal(err)
		}
	}
	p, err := s.PatientByCode(ctx, "MC-CV1")
	if err != nil {
		t.Fatal(err)
	}
	full, err := s.PatientVisits(ctx, p.ID)
	if err != nil {
		t.Fatal(err)
	}
	got, err := s.CourseVisits(ctx, p.ID)
	if err != nil {
		t.Fatal(err)
	}
	if len(full) != 3 || len(full[0].Quality.Windows) != 2 {
		t.Fatalf("PatientVisits: %d visits, %d windows; want 3 and 2", len(full), len(full[0].Quality.Windows))
	}
	for i := range full {
		full[i].Quality.Windows = nil
	}
	if !reflect.DeepEqual(got, full) {
		t.Errorf("CourseVisits differ from PatientVisits without windows")
	}
}

// The overlay spectra's binary form gives back what it was given, nil
// series nil, and refuses bytes that are not one without allocating from a
// declared count.
func TestSpectraCodec(t *testing.T) {
	a := sampleAnalysis(3).Result.Display.Spectra
	cases := [][]metrics.Spectrum{nil, a, {{State: ingest.EyesClosed, Region: "posterior", Freqs: []float64{}, PeakHz: math.Inf(1)}}}
	for i, c := range cases {
		b := appendSpectra(nil, c)
		got, err := decodeSpectra(b)
		if err != nil || !reflect.DeepEqual(got, c) {
			t.Errorf("case %d: %v, round trip differs", i, err)
		}
		for n := 0; n < len(b); n++ {
			if _, err := decodeSpectra(b[:n]); !errors.Is(err, errSpectra) {
				t.Fatalf("case %d cut at %d: %v, want errSpectra", i, n, err)
			}
		}
		if _, err := decodeSpectra(append(slices.Clone(b), 0)); !errors.Is(err, errSpectra) {
			t.Errorf("case %d with a trailing byte: %v", i, err)
		}
	}
	// One spectrum declaring 2^40 frequencies.
	huge := []byte{1, 1, 'c', 1, 'p', 0x81, 0x80, 0x80, 0x80, 0x80, 0x20}
	if _, err := decodeSpectra(huge); !errors.Is(err, errSpectra) {
		t.Errorf("huge list: %v, want errSpectra", err)
	}
	if _, err := decodeSpectra([]byte{0xff, 0xff, 0xff, 0x0f}); !errors.Is(err, errSpectra) {
		t.Errorf("huge count: %v, want errSpectra", err)
	}
}

// openBefore0006 opens a new database at a temporary path with the
// migrations before 0006 only (no kept cohort entries, no overlay spectra).
func openBefore0006(t *testing.T) (string, *Store) {
	t.Helper()
	all, err := migrations.All()
	if err != nil {
		t.Fatal(err)
	}
	var before []migrations.Migration
	for _, m := range all {
		if m.Version < 6 {
			before = append(before, m)
		}
	}
	path := filepath.Join(t.TempDir(), "old.db")
	old, err := openAt(path, before)
	if err != nil {
		t.Fatal(err)
	}
	return path, old
}
