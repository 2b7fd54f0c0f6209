package store

import (
	"context"
	"database/sql"
	"fmt"
	"testing"
	"time"

	"longwave/metrics"
)

// BenchmarkSaveVisit times SaveVisit alone (one transaction: patient
// upsert, visit, recording row, conditions, 49 markers, a flag and ~100 kB
// of display JSON) on a file database in WAL mode with synchronous=NORMAL.
// Issue 4 asks that storing adds under 50 ms to an ingest.
func BenchmarkSaveVisit(b *testing.B) {
	s := mustOpen(b)
	ctx := context.Background()
	visits := make([]NewVisit, b.N)
	for i := range visits {
		visits[i] = sampleVisit(fmt.Sprintf("MC-%05d", i%500), fmt.Sprintf("%04d-01-01", 2000+i/500), []byte(fmt.Sprint(i)), uint64(i))
	}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := s.SaveVisit(ctx, visits[i]); err != nil {
			b.Fatal(err)
		}
	}
}

// saveVisitBudget is issue 4's limit for what storing adds to an ingest.
const saveVisitBudget = 50 * time.Millisecond

func TestSaveVisitUnderBudget(t *testing.T) {
	s := mustOpen(t)
	ctx := context.Background()
	const n = 40
	var worst, total time.Duration
	for i := 0; i < n; i++ {
		nv := sampleVisit(fmt.Sprintf("MC-T%02d", i%10), fmt.Sprintf("%04d-06-01", 2010+i/10), []byte(fmt.Sprint(i)), uint64(i))
		t0 := time.Now()
		if _, err := s.SaveVisit(ctx, nv); err != nil {
			t.Fatal(err)
		}
		d := time.Since(t0)
		total += d
		worst = max(worst, d)
	}
	mean := total / n
	t.Logf("SaveVisit: mean %v, worst %v over %d visits", mean, worst, n)
	if raceEnabled {
		t.Log("race detector on: the budget is not enforced")
		return
	}
	if mean > saveVisitBudget {
		t.Errorf("SaveVisit mean %v, want under %v", mean, saveVisitBudget)
	}
}

// fillPatients writes n patients (codes C-00000…, born 1940–1969) of
// group(i), each with `visits` yearly visits from firstYear (aged 70, a
// recording row, sampleAnalysis(1) without display products), in one
// transaction: the bulk data of the cohort benchmarks.
func fillPatients(b *testing.B, s *Store, n, visits, firstYear int, group func(i int) string) {
	b.Helper()
	ctx := context.Background()
	a := sampleAnalysis(1)
	a.Result.Display = metrics.Display{}
	err := s.inTx(ctx, func(tx *sql.Tx) error {
		for i := 0; i < n; i++ {
			pid, err := s.upsertPatient(ctx, tx, Patient{Code: fmt.Sprintf("C-%05d", i), BirthYear: 1940 + i%30, Group: group(i)})
			if err != nil {
				return err
			}
			for k := 0; k < visits; k++ {
				var vid int64
				if err := tx.QueryRowContext(ctx, `INSERT INTO visits (patient_id, visit_date, age_years, age_known, created_at)
					VALUES (?, ?, 70, 1, '') RETURNING id`, pid, fmt.Sprintf("%d-03-01", firstYear+k)).Scan(&vid); err != nil {
					return err
				}
				if _, err := tx.ExecContext(ctx, `INSERT INTO recordings (visit_id, sha256, format, size, role, created_at) VALUES (?, ?, 'EDF', 1, 'single', '')`,
					vid, shaOf([]byte(fmt.Sprint(vid)))); err != nil {
					return err
				}
				if err := s.writeAnalysis(ctx, tx, vid, a); err != nil {
					return err
				}
			}
		}
		return nil
	})
	if err != nil {
		b.Fatal(err)
	}
}

// BenchmarkCohort5000 reads a cohort of 5,000 patients with 3 visits each
// (49 markers a visit) the way the cohort page does: AllVisitRecords with
// the few marker names it shows, and with all markers (the export); and,
// with one patient in 50 a control (100 controls), the controls' stamp the
// norms cache checks on every cohort or course build and the controls'
// records a refit reads.
func BenchmarkCohort5000(b *testing.B) {
	s := mustOpen(b)
	ctx := context.Background()
	fillPatients(b, s, 5000, 3, 2020, func(i int) string {
		if i%50 == 0 {
			return "control"
		}
		return "patient"
	})
	b.Run("cohort-markers", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			pcs, err := s.AllVisitRecords(ctx, metrics.PDRFrequency, metrics.ThetaAlphaRatio)
			if err != nil || len(pcs) != 5000 {
				b.Fatal(err)
			}
		}
	})
	b.Run("all-markers", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			if _, err := s.AllVisitRecords(ctx); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("control-stamp", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			if _, err := s.GroupStamp(ctx, "control"); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("control-records", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			if pcs, err := s.GroupVisitRecords(ctx, "control"); err != nil || len(pcs) != 100 {
				b.Fatal(len(pcs), err)
			}
		}
	})
	b.Run("patients", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			if _, err := s.Patients(ctx); err != nil {
				b.Fatal(err)
			}
		}
	})
}
