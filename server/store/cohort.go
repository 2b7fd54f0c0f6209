package store

import (
	"context"
	"database/sql"
	"fmt"
	"strings"
	"sync"

	"longwave/trends"
)

// The cohort screen shows one row per patient, and building a row from a
// patient's visits reads and judges all of them. The store keeps each
// patient's trends.CohortEntry in cohort_summaries (migration 0006) and
// rebuilds it in the transaction that changes anything it is made of:
// triggers list the patient in cohort_dirty whenever a patient fact, a
// visit or a visit's conditions, markers or flags change, whoever writes
// them, and inTx rebuilds the listed patients' entries before it commits.
// CohortEntries then reads every entry with one query. An entry depends on
// the processing settings (a visit made by other settings is not
// comparable), so each row carries the settings and the entry format it was
// made with, and a row of other settings or another format is rebuilt when
// it is read.

// cohortSettings are the processing settings the kept entries judge
// comparability by.
type cohortSettings struct {
	mu            sync.Mutex
	version, hash string
}

func (c *cohortSettings) get() (string, string) {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.version, c.hash
}

// KeepCohortFor sets the processing settings the kept cohort entries are
// made for (Open sets metrics.Current()'s); the web service sets its
// pipeline's. Entries kept for other settings are rebuilt when
// CohortEntries reads them.
func (s *Store) KeepCohortFor(version, hash string) {
	s.cohort.mu.Lock()
	s.cohort.version, s.cohort.hash = version, hash
	s.cohort.mu.Unlock()
}

// entryMarkers are the names of the markers an entry is made from; the
// entry's visits load no other.
func entryMarkers() []any {
	var names []any
	for _, ref := range trends.DefaultMainMarkers() {
		names = append(names, ref.Marker)
	}
	return names
}

// CohortEntries returns every patient's kept cohort entry, ordered by
// patient code, made for the settings of KeepCohortFor. It is one query;
// entries missing (a database from before migration 0006), listed as dirty,
// of another format or made for other settings are first rebuilt from the
// visits and kept, in one write transaction.
func (s *Store) CohortEntries(ctx context.Context) ([]trends.CohortEntry, error) {
	version, hash := s.cohort.get()
	rows, err := s.r.QueryContext(ctx, `
		SELECT p.id, s.format, s.settings_version, s.settings_hash, s.entry,
		       EXISTS (SELECT 1 FROM cohort_dirty d WHERE d.patient_id = p.id)
		FROM patients p LEFT JOIN cohort_summaries s ON s.patient_id = p.id
		ORDER BY p.code`)
	if err != nil {
		return nil, fmt.Errorf("store: cohort entries: %w", err)
	}
	var out []trends.CohortEntry
	var stale []int64
	rebuilt := map[int64]bool{}
	for rows.Next() {
		var id int64
		var format sql.NullInt64
		var ver, h sql.NullString
		var blob []byte
		var dirty bool
		if err := rows.Scan(&id, &format, &ver, &h, &blob, &dirty); err != nil {
			rows.Close()
			return nil, fmt.Errorf("store: cohort entries: %w", err)
		}
		var e trends.CohortEntry
		ok := !dirty && format.Int64 == trends.EntryFormat && ver.String == version && h.String == hash
		if ok {
			// A row that does not decode is rebuilt like a stale one.
			e, err = trends.DecodeEntry(blob)
			ok = err == nil && e.PatientID == id
		}
		if !ok {
			stale = append(stale, id)
			rebuilt[id] = true
			e = trends.CohortEntry{PatientID: id}
		}
		out = append(out, e)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("store: cohort entries: %w", err)
	}
	if len(stale) == 0 {
		return out, nil
	}
	var fresh map[int64]trends.CohortEntry
	err = s.inTx(ctx, func(tx *sql.Tx) error {
		st, err := tx.PrepareContext(ctx, `INSERT OR IGNORE INTO cohort_dirty (patient_id) VALUES (?)`)
		if err != nil {
			return err
		}
		defer st.Close()
		for _, id := range stale {
			if _, err := st.ExecContext(ctx, id); err != nil {
				return err
			}
		}
		fresh, err = s.rebuildEntries(ctx, tx, version, hash)
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("store: cohort entries: rebuild %d: %w", len(stale), err)
	}
	keep := out[:0]
	for _, e := range out {
		if f, ok := fresh[e.PatientID]; ok {
			e = f
		} else if rebuilt[e.PatientID] {
			continue // deleted since the read
		}
		keep = append(keep, e)
	}
	return keep, nil
}

// refreshEntries rebuilds the entries of the patients listed in
// cohort_dirty, inside the write transaction that listed them.
func (s *Store) refreshEntries(ctx context.Context, tx *sql.Tx) error {
	var n int
	if err := tx.QueryRowContext(ctx, `SELECT count(*) FROM cohort_dirty`).Scan(&n); err != nil {
		return fmt.Errorf("cohort entries: %w", err)
	}
	if n == 0 {
		return nil
	}
	version, hash := s.cohort.get()
	if _, err := s.rebuildEntries(ctx, tx, version, hash); err != nil {
		return fmt.Errorf("cohort entries: %w", err)
	}
	return nil
}

// rebuildEntries makes the entries of every patient in cohort_dirty from
// their visits, keeps them, empties cohort_dirty and returns them by
// patient ID. A listed patient that no longer exists loses its row.
func (s *Store) rebuildEntries(ctx context.Context, tx *sql.Tx, version, hash string) (map[int64]trends.CohortEntry, error) {
	const dirty = `SELECT patient_id FROM cohort_dirty`
	courses, err := entryCourses(ctx, tx, dirty)
	if err != nil {
		return nil, err
	}
	put, err := tx.PrepareContext(ctx, `INSERT OR REPLACE INTO cohort_summaries (patient_id, format, settings_version, settings_hash, entry)
		VALUES (?, ?, ?, ?, ?)`)
	if err != nil {
		return nil, err
	}
	defer put.Close()
	opt := trends.EntryOptions{SettingsVersion: version, SettingsHash: hash}
	out := make(map[int64]trends.CohortEntry, len(courses))
	var buf []byte
	for _, c := range courses {
		e := trends.SummarisePatient(c.Patient, c.Visits, opt)
		buf = trends.AppendEntry(buf[:0], &e)
		if _, err := put.ExecContext(ctx, e.PatientID, trends.EntryFormat, version, hash, buf); err != nil {
			return nil, fmt.Errorf("patient %s: %w", e.Code, err)
		}
		out[e.PatientID] = e
	}
	if _, err := tx.ExecContext(ctx, `DELETE FROM cohort_summaries WHERE patient_id IN (`+dirty+`)
		AND patient_id NOT IN (SELECT id FROM patients)`); err != nil {
		return nil, err
	}
	if _, err := tx.ExecContext(ctx, `DELETE FROM cohort_dirty`); err != nil {
		return nil, err
	}
	return out, nil
}

// entryCourses reads what entries are made of for the patients whose IDs
// the query ids selects: the patients, their visits with the conditions
// columns that the comparison of consecutive visits reads (no JSON), the
// main markers and the flags. Four queries however many patients.
func entryCourses(ctx context.Context, tx *sql.Tx, ids string) ([]PatientCourse, error) {
	out, at, err := patientCourses(ctx, tx, `SELECT `+patientColumns+` FROM patients WHERE id IN (`+ids+`) ORDER BY id`)
	if err != nil {
		return nil, err
	}
	if len(out) == 0 {
		return nil, nil
	}
	type ref struct{ patient, visit int }
	visits := map[int64]ref{}
	visitWhere := `x.visit_id IN (SELECT id FROM visits WHERE patient_id IN (` + ids + `))`
	err = each(ctx, tx, `
		SELECT v.id, v.patient_id, v.visit_date, v.age_years, v.age_known, v.context,
		       coalesce(c.settings_version, ''), coalesce(c.settings_hash, ''),
		       coalesce(c.sample_rate, 0), coalesce(c.high_pass_hz, 0), coalesce(c.high_pass_known, 0),
		       coalesce(c.low_pass_hz, 0), coalesce(c.low_pass_known, 0), coalesce(c.notch_hz, 0), coalesce(c.notch_known, 0),
		       coalesce(c.line_frequency, 0), coalesce(c.reference, ''), coalesce(c.equipment, '')
		FROM visits v LEFT JOIN conditions c ON c.visit_id = v.id
		WHERE v.patient_id IN (`+ids+`) ORDER BY v.patient_id, v.visit_date`, nil, func(sc func(...any) error) error {
		var vr VisitRecord
		v, c := &vr.Visit, &vr.Conditions
		f := &c.Filters
		if err := sc(&v.ID, &v.PatientID, &v.Date, &v.AgeYears, &v.AgeKnown, &v.Context, &vr.SettingsVersion, &vr.SettingsHash,
			&c.SampleRate, &f.HighPass.Hz, &f.HighPass.Known, &f.LowPass.Hz, &f.LowPass.Known, &f.Notch.Hz, &f.Notch.Known,
			&vr.Quality.LineFrequency, &c.Reference, &c.Equipment); err != nil {
			return err
		}
		// The stored line frequency is the one analysis used: the
		// spectrum's, else the recording's (writeAnalysis), which is what
		// the comparison of visits reads.
		i, ok := at[v.PatientID]
		if !ok {
			return nil
		}
		visits[v.ID] = ref{i, len(out[i].Visits)}
		out[i].Visits = append(out[i].Visits, vr)
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("visits: %w", err)
	}
	names := entryMarkers()
	err = each(ctx, tx, `SELECT `+markerRowColumns+`
		FROM markers x WHERE `+visitWhere+` AND x.name IN (?`+strings.Repeat(`, ?`, len(names)-1)+`)
		ORDER BY x.visit_id, x.id`, names, func(sc func(...any) error) error {
		id, m, err := scanMarkerRow(sc)
		if err != nil {
			return err
		}
		if r, ok := visits[id]; ok {
			v := &out[r.patient].Visits[r.visit]
			v.Markers = append(v.Markers, m)
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("markers: %w", err)
	}
	err = each(ctx, tx, `SELECT `+flagRowColumns+` FROM flags x
		WHERE `+visitWhere+` ORDER BY x.visit_id, x.id`, nil, func(sc func(...any) error) error {
		id, f, err := scanFlagRow(sc)
		if err != nil {
			return err
		}
		if r, ok := visits[id]; ok {
			v := &out[r.patient].Visits[r.visit]
			v.Flags = append(v.Flags, f)
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("flags: %w", err)
	}
	return out, nil
}
