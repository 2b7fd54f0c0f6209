package store

import (
	"context"
	"errors"
	"math"
	"path/filepath"
	"reflect"
	"testing"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/migrations"
)

// withIntervals gives every second computable marker of a sample analysis
// an interval (as settings v2 makes them), leaving the others without one.
func withIntervals(a Analysis) Analysis {
	for i := range a.Result.Markers {
		m := &a.Result.Markers[i]
		if !m.Computable || i%2 == 1 {
			continue
		}
		m.Uncertainty = &metrics.Uncertainty{SE: 0.05 + float64(i)/1000, Low: m.Value - 0.1, High: m.Value + 0.12,
			Level: 0.95, Method: "percentile bootstrap over kept windows (Efron & Tibshirani 1993)", Resamples: 1000}
	}
	return a
}

func TestIntervalRoundTrip(t *testing.T) {
	ctx := context.Background()
	s := mustOpen(t)
	nv := sampleVisit("MC-0101", "2025-01-20", []byte("interval round trip"), 3)
	nv.Analysis = withIntervals(nv.Analysis)
	v, err := s.SaveVisit(ctx, nv)
	if err != nil {
		t.Fatal(err)
	}
	got, err := s.Visit(ctx, v.ID)
	if err != nil {
		t.Fatal(err)
	}
	want := nv.Analysis.Result.Markers
	if len(got.Markers) != len(want) {
		t.Fatalf("markers: got %d, want %d", len(got.Markers), len(want))
	}
	with := 0
	for i := range want {
		if !reflect.DeepEqual(got.Markers[i], want[i]) {
			t.Errorf("marker %s: got %+v (interval %+v), want %+v (interval %+v)", want[i].Key(),
				got.Markers[i], got.Markers[i].Uncertainty, want[i], want[i].Uncertainty)
		}
		if want[i].Uncertainty != nil {
			with++
		}
	}
	if with == 0 || with == len(want) {
		t.Fatalf("sample has %d of %d markers with intervals: want some of each", with, len(want))
	}
	// A marker without an interval is stored as NULLs, not as a zero interval.
	var nulls, set int
	if err := s.r.QueryRowContext(ctx, `SELECT sum(interval_method IS NULL AND interval_se IS NULL AND interval_low IS NULL
		AND interval_high IS NULL AND interval_level IS NULL AND interval_resamples IS NULL), sum(interval_method IS NOT NULL)
		FROM markers WHERE visit_id = ?`, v.ID).Scan(&nulls, &set); err != nil {
		t.Fatal(err)
	}
	if nulls != len(want)-with || set != with {
		t.Errorf("rows: %d all NULL and %d with an interval, want %d and %d", nulls, set, len(want)-with, with)
	}
	// The cohort read (AllVisitRecords) carries them too.
	all, err := s.AllVisitRecords(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if len(all) != 1 || len(all[0].Visits) != 1 || !reflect.DeepEqual(all[0].Visits[0].Markers, want) {
		t.Errorf("AllVisitRecords lost the intervals")
	}
}

func TestIntervalRefused(t *testing.T) {
	good := metrics.Uncertainty{SE: 0.1, Low: 9, High: 9.4, Level: 0.95, Method: "bootstrap", Resamples: 500}
	cases := []struct {
		name string
		edit func(m *metrics.Marker)
	}{
		{"not computable", func(m *metrics.Marker) { m.Computable, m.Reason = false, "no peak" }},
		{"low above high", func(m *metrics.Marker) { m.Uncertainty.Low, m.Uncertainty.High = 9.5, 9.1 }},
		{"level 95", func(m *metrics.Marker) { m.Uncertainty.Level = 95 }},
		{"level 0", func(m *metrics.Marker) { m.Uncertainty.Level = 0 }},
		{"negative se", func(m *metrics.Marker) { m.Uncertainty.SE = -0.1 }},
		{"no method", func(m *metrics.Marker) { m.Uncertainty.Method = "" }},
		{"negative resamples", func(m *metrics.Marker) { m.Uncertainty.Resamples = -1 }},
		{"infinite high", func(m *metrics.Marker) { m.Uncertainty.High = math.Inf(1) }},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s := mustOpen(t)
			nv := sampleVisit("MC-0102", "2025-02-03", []byte("refused "+c.name), 4)
			u := good
			m := &nv.Analysis.Result.Markers[0]
			m.Uncertainty = &u
			c.edit(m)
			_, err := s.SaveVisit(context.Background(), nv)
			if !errors.Is(err, ErrInvalid) {
				t.Fatalf("SaveVisit: %v, want ErrInvalid", err)
			}
			if n := rowCounts(t, s); n["visits"] != 0 || n["markers"] != 0 {
				t.Errorf("rows left behind: %s", fmtCounts(n))
			}
		})
	}
}

// TestIntervalSchemaHoldsColumnsTogether writes past the Go checks: the
// schema itself refuses half an interval, or one on a marker without value.
func TestIntervalSchemaHoldsColumnsTogether(t *testing.T) {
	ctx := context.Background()
	s := mustOpen(t)
	v, err := s.SaveVisit(ctx, sampleVisit("MC-0103", "2025-03-03", []byte("schema"), 5))
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name string
		sql  string
		ok   bool
	}{
		{"whole", `UPDATE markers SET interval_se = 0.1, interval_low = 1, interval_high = 2, interval_level = 0.95,
			interval_method = 'bootstrap', interval_resamples = 200 WHERE visit_id = ?1 AND computable = 1`, true},
		{"cleared", `UPDATE markers SET interval_se = NULL, interval_low = NULL, interval_high = NULL, interval_level = NULL,
			interval_method = NULL, interval_resamples = NULL WHERE visit_id = ?1`, true},
		{"method missing", `UPDATE markers SET interval_se = 0.1, interval_low = 1, interval_high = 2, interval_level = 0.95,
			interval_resamples = 200 WHERE visit_id = ?1 AND computable = 1`, false},
		{"zero interval without method", `UPDATE markers SET interval_se = 0, interval_low = 0, interval_high = 0 WHERE visit_id = ?1`, false},
		{"low above high", `UPDATE markers SET interval_se = 0.1, interval_low = 3, interval_high = 2, interval_level = 0.95,
			interval_method = 'bootstrap', interval_resamples = 200 WHERE visit_id = ?1 AND computable = 1`, false},
		{"not computable", `UPDATE markers SET interval_se = 0.1, interval_low = 1, interval_high = 2, interval_level = 0.95,
			interval_method = 'bootstrap', interval_resamples = 200 WHERE visit_id = ?1 AND computable = 0`, false},
	}
	for _, c := range cases {
		_, err := s.w.ExecContext(ctx, c.sql, v.ID)
		if (err == nil) != c.ok {
			t.Errorf("%s: err = %v, want ok %v", c.name, err, c.ok)
		}
	}
}

// TestMigration4KeepsOldMarkersWithoutInterval upgrades a database made
// before migration 0004: its markers come back with no interval.
func TestMigration4KeepsOldMarkersWithoutInterval(t *testing.T) {
	all, err := migrations.All()
	if err != nil {
		t.Fatal(err)
	}
	if len(all) < 4 || all[3].Name != "0004_marker_intervals.sql" {
		t.Fatalf("migration 4 is %v", all[3].Name)
	}
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "v3.db")
	old, err := openAt(path, all[:3])
	if err != nil {
		t.Fatal(err)
	}
	// The markers table as 0001 made it: write a visit the way the store
	// did then (the current SaveVisit names the new columns).
	res, err := old.w.ExecContext(ctx, `INSERT INTO patients (code, created_at, updated_at) VALUES ('MC-0104', 'x', 'x')`)
	if err != nil {
		t.Fatal(err)
	}
	pid, _ := res.LastInsertId()
	res, err = old.w.ExecContext(ctx, `INSERT INTO visits (patient_id, visit_date, created_at) VALUES (?, '2020-05-05', 'x')`, pid)
	if err != nil {
		t.Fatal(err)
	}
	vid, _ := res.LastInsertId()
	for _, stmt := range []string{
		`INSERT INTO recordings (visit_id, sha256, format, size, role, created_at) VALUES (?1, '` + shaOf([]byte("v1")) + `', 'EDF', 10, 'single', 'x')`,
		`INSERT INTO conditions (visit_id, format, sample_rate, uv_per_step, bits, high_pass_known, low_pass_known, notch_known,
			duration_s, period_source, settings_version, settings_hash, conditions_json, quality_json, analysed_at)
			VALUES (?1, 'EDF', 256, 0.1, 16, 0, 0, 0, 300, 'annotations', '1', 'abc', '{}', '{}', 'x')`,
		`INSERT INTO markers (visit_id, name, region, state, value, unit, computable, reason, settings_version, settings_hash)
			VALUES (?1, 'pdr_frequency', 'posterior', 'closed', 9.5, 'Hz', 1, '', '1', 'abc')`,
	} {
		if _, err := old.w.ExecContext(ctx, stmt, vid); err != nil {
			t.Fatalf("%s: %v", stmt, err)
		}
	}
	old.Close()
	s, err := Open(path)
	if err != nil {
		t.Fatalf("upgrade: %v", err)
	}
	defer s.Close()
	got, err := s.Visit(ctx, vid)
	if err != nil {
		t.Fatal(err)
	}
	want := []metrics.Marker{{Name: metrics.PDRFrequency, Region: metrics.RegionPosterior, State: ingest.EyesClosed,
		Value: 9.5, Unit: "Hz", Computable: true}}
	if !reflect.DeepEqual(got.Markers, want) {
		t.Errorf("markers after upgrade = %+v (interval %+v), want %+v", got.Markers, got.Markers[0].Uncertainty, want)
	}
}
