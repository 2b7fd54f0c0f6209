package store

import (
	"context"
	"database/sql"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strings"

	"longwave/ingest"
	"longwave/metrics"
)

// Analysis is what processing made of a visit's recording: the metrics
// result (conditions, quality, markers, display products, settings), the
// flags of the quality and comparability rules, and the eye-state periods
// that were analysed.
type Analysis struct {
	Result  *metrics.Result
	Flags   []metrics.Flag
	Periods []ingest.Period
}

// NewVisit is everything SaveVisit stores for one visit.
type NewVisit struct {
	// Patient is added or updated by Code (see UpsertPatient); ID is ignored.
	Patient Patient
	// Visit: ID and PatientID are ignored. When AgeKnown is false the age is
	// computed from the patient's birth date or year (AgeAt).
	Visit Visit
	// DeclaredState is the eye state the user declared for a single file
	// ("" none), kept for reprocessing.
	DeclaredState ingest.EyeState
	// Recordings of the visit, their files already in the data folder
	// (PutRecording); ID and VisitID are ignored.
	Recordings []Recording
	Analysis   Analysis
}

// SaveVisit stores a whole visit in one transaction: the patient (added or
// updated), the visit, its recording rows, conditions, markers, flags and
// display products. Either all of it is stored or, on any error, none of it.
// A patient has at most one visit per date: a second one on the same date
// fails with ErrVisitExists. It returns the visit as stored.
func (s *Store) SaveVisit(ctx context.Context, nv NewVisit) (Visit, error) {
	if err := checkAnalysis(nv.Analysis); err != nil {
		return Visit{}, err
	}
	if len(nv.Recordings) == 0 {
		return Visit{}, fmt.Errorf("%w: visit %s %s has no recording", ErrInvalid, nv.Patient.Code, nv.Visit.Date)
	}
	for _, r := range nv.Recordings {
		if !validSHA(r.SHA256) {
			return Visit{}, fmt.Errorf("%w: recording hash %q", ErrInvalid, r.SHA256)
		}
	}
	v := nv.Visit
	err := s.inTx(ctx, func(tx *sql.Tx) error {
		pid, err := s.upsertPatient(ctx, tx, nv.Patient)
		if err != nil {
			return err
		}
		v.PatientID = pid
		if !v.AgeKnown {
			p, err := scanPatient(tx.QueryRowContext(ctx, `SELECT `+patientColumns+` FROM patients WHERE id = ?`, pid))
			if err != nil {
				return err
			}
			if v.AgeYears, v.AgeKnown, err = AgeAt(p, v.Date); err != nil {
				return fmt.Errorf("patient %s: %w", p.Code, err)
			}
		}
		var existing int64
		err = tx.QueryRowContext(ctx, `SELECT id FROM visits WHERE patient_id = ? AND visit_date = ?`, pid, v.Date).Scan(&existing)
		if err == nil {
			return fmt.Errorf("%w: patient %s already has a visit on %s (visit %d)", ErrVisitExists, nv.Patient.Code, v.Date, existing)
		}
		if !errors.Is(err, sql.ErrNoRows) {
			return err
		}
		now := s.stamp()
		err = tx.QueryRowContext(ctx, `
			INSERT INTO visits (patient_id, visit_date, age_years, age_known, context, declared_state, created_at)
			VALUES (?, ?, ?, ?, ?, ?, ?) RETURNING id`,
			pid, v.Date, v.AgeYears, v.AgeKnown, v.Context, string(nv.DeclaredState), now).Scan(&v.ID)
		if err != nil {
			return fmt.Errorf("visit %s %s: %w", nv.Patient.Code, v.Date, err)
		}
		for _, r := range nv.Recordings {
			if _, err := tx.ExecContext(ctx, `
				INSERT INTO recordings (visit_id, sha256, format, size, role, created_at) VALUES (?, ?, ?, ?, ?, ?)`,
				v.ID, r.SHA256, r.Format, r.Size, r.Role, now); err != nil {
				return fmt.Errorf("recording %s (%s): %w", r.SHA256[:12], r.Role, err)
			}
		}
		return s.writeAnalysis(ctx, tx, v.ID, nv.Analysis)
	})
	if err != nil {
		if errors.Is(err, ErrInvalid) || errors.Is(err, ErrVisitExists) {
			return Visit{}, err
		}
		return Visit{}, fmt.Errorf("store: save visit: %w", err)
	}
	return v, nil
}

// ReplaceAnalysis replaces the conditions, markers, flags and display
// products of a visit with a new analysis, in one transaction (used when
// reprocessing under new settings). The visit and its recordings stay.
func (s *Store) ReplaceAnalysis(ctx context.Context, visitID int64, a Analysis) error {
	if err := checkAnalysis(a); err != nil {
		return err
	}
	err := s.inTx(ctx, func(tx *sql.Tx) error {
		var one int
		if err := tx.QueryRowContext(ctx, `SELECT 1 FROM visits WHERE id = ?`, visitID).Scan(&one); err != nil {
			if errors.Is(err, sql.ErrNoRows) {
				return fmt.Errorf("%w: visit %d", ErrNotFound, visitID)
			}
			return err
		}
		for _, table := range []string{"markers", "flags", "conditions", "display_products", "overlay_spectra"} {
			if _, err := tx.ExecContext(ctx, `DELETE FROM `+table+` WHERE visit_id = ?`, visitID); err != nil {
				return fmt.Errorf("clear %s: %w", table, err)
			}
		}
		return s.writeAnalysis(ctx, tx, visitID, a)
	})
	if err != nil && !errors.Is(err, ErrInvalid) && !errors.Is(err, ErrNotFound) {
		return fmt.Errorf("store: replace analysis of visit %d: %w", visitID, err)
	}
	return err
}

// checkAnalysis refuses what the schema would refuse with a less helpful
// message: a missing result, a marker value that is not finite.
func checkAnalysis(a Analysis) error {
	if a.Result == nil {
		return fmt.Errorf("%w: analysis has no result", ErrInvalid)
	}
	if a.Result.SettingsVersion == "" || a.Result.SettingsHash == "" {
		return fmt.Errorf("%w: analysis has no settings version or hash", ErrInvalid)
	}
	for _, m := range a.Result.Markers {
		if math.IsNaN(m.Value) || math.IsInf(m.Value, 0) {
			return fmt.Errorf("%w: marker %s: value %v is not a finite number", ErrInvalid, m.Key(), m.Value)
		}
		if !m.Computable && m.Reason == "" {
			return fmt.Errorf("%w: marker %s: not computable without a reason", ErrInvalid, m.Key())
		}
		if err := checkInterval(m); err != nil {
			return fmt.Errorf("%w: marker %s: %v", ErrInvalid, m.Key(), err)
		}
	}
	for _, f := range a.Flags {
		if f.Severity != metrics.Caution && f.Severity != metrics.NotComparable {
			return fmt.Errorf("%w: flag %s: severity %q", ErrInvalid, f.Rule, f.Severity)
		}
	}
	return nil
}

// checkInterval refuses an interval the markers table would refuse (see
// migration 0004): one on a marker that is not computable, a figure that is
// not finite, low above high, a level outside (0, 1), a negative standard
// error or resample count, no method.
func checkInterval(m metrics.Marker) error {
	u := m.Uncertainty
	if u == nil {
		return nil
	}
	switch {
	case !m.Computable:
		return errors.New("interval on a marker that is not computable")
	case !finite(u.SE) || !finite(u.Low) || !finite(u.High) || !finite(u.Level):
		return fmt.Errorf("interval figures se %v, low %v, high %v, level %v are not all finite", u.SE, u.Low, u.High, u.Level)
	case u.SE < 0:
		return fmt.Errorf("interval standard error %v is negative", u.SE)
	case u.Low > u.High:
		return fmt.Errorf("interval low %v is above high %v", u.Low, u.High)
	case u.Level <= 0 || u.Level >= 1:
		return fmt.Errorf("interval level %v is not between 0 and 1", u.Level)
	case u.Method == "":
		return errors.New("interval without a method")
	case u.Resamples < 0:
		return fmt.Errorf("interval resamples %d is negative", u.Resamples)
	}
	return nil
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// intervalArgs are the six interval columns of a marker row: all NULL when
// the marker has no interval (settings v1, or not computable).
func intervalArgs(u *metrics.Uncertainty) []any {
	if u == nil {
		return []any{nil, nil, nil, nil, nil, nil}
	}
	return []any{u.SE, u.Low, u.High, u.Level, u.Method, u.Resamples}
}

// intervalScan reads the six interval columns back.
type intervalScan struct {
	se, low, high, level sql.NullFloat64
	method               sql.NullString
	resamples            sql.NullInt64
}

func (i *intervalScan) dest() []any {
	return []any{&i.se, &i.low, &i.high, &i.level, &i.method, &i.resamples}
}

// uncertainty is the interval read, or nil when the row has none (the
// schema keeps the six columns all NULL or all set).
func (i *intervalScan) uncertainty() *metrics.Uncertainty {
	if !i.method.Valid {
		return nil
	}
	return &metrics.Uncertainty{SE: i.se.Float64, Low: i.low.Float64, High: i.high.Float64,
		Level: i.level.Float64, Method: i.method.String, Resamples: int(i.resamples.Int64)}
}

func (s *Store) writeAnalysis(ctx context.Context, tx *sql.Tx, visitID int64, a Analysis) error {
	res := a.Result
	c, q := res.Conditions, res.Quality
	condJSON, err := json.Marshal(c)
	if err != nil {
		return fmt.Errorf("conditions: %w", err)
	}
	qualJSON, err := json.Marshal(q)
	if err != nil {
		return fmt.Errorf("quality: %w", err)
	}
	periods := a.Periods
	if periods == nil {
		periods = []ingest.Period{}
	}
	perJSON, err := json.Marshal(periods)
	if err != nil {
		return fmt.Errorf("periods: %w", err)
	}
	lineHz, lineSrc := q.LineFrequency, q.LineFrequencySource
	if lineHz == 0 && c.LineFrequency > 0 {
		lineHz, lineSrc = c.LineFrequency, "sidecar"
	}
	_, err = tx.ExecContext(ctx, `
		INSERT INTO conditions (visit_id, format, sample_rate, uv_per_step, bits,
			high_pass_hz, high_pass_known, low_pass_hz, low_pass_known, notch_hz, notch_known,
			line_frequency, line_frequency_source, reference, equipment, duration_s, start_time_of_day,
			period_source, clean_closed_s, clean_open_s, rejected_share, settings_version, settings_hash,
			conditions_json, quality_json, periods_json, analysed_at)
		VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`,
		visitID, string(c.Format), c.SampleRate, c.UVPerStep, c.Bits,
		c.Filters.HighPass.Hz, c.Filters.HighPass.Known, c.Filters.LowPass.Hz, c.Filters.LowPass.Known,
		c.Filters.Notch.Hz, c.Filters.Notch.Known,
		lineHz, lineSrc, c.Reference, c.Equipment, c.Duration, c.StartTimeOfDay,
		string(c.PeriodSource), q.CleanSeconds[ingest.EyesClosed], q.CleanSeconds[ingest.EyesOpen], q.RejectedShare,
		res.SettingsVersion, res.SettingsHash, string(condJSON), string(qualJSON), string(perJSON), s.stamp())
	if err != nil {
		return fmt.Errorf("conditions: %w", err)
	}
	mst, err := tx.PrepareContext(ctx, `
		INSERT INTO markers (visit_id, name, region, state, value, unit, computable, reason, settings_version, settings_hash,
			interval_se, interval_low, interval_high, interval_level, interval_method, interval_resamples)
		VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`)
	if err != nil {
		return fmt.Errorf("markers: %w", err)
	}
	defer mst.Close()
	for _, m := range res.Markers {
		args := append([]any{visitID, m.Name, m.Region, string(m.State), m.Value, m.Unit,
			m.Computable, m.Reason, res.SettingsVersion, res.SettingsHash}, intervalArgs(m.Uncertainty)...)
		if _, err := mst.ExecContext(ctx, args...); err != nil {
			return fmt.Errorf("marker %s: %w", m.Key(), err)
		}
	}
	for _, f := range a.Flags {
		names := f.Markers
		if names == nil {
			names = []string{}
		}
		mj, err := json.Marshal(names)
		if err != nil {
			return fmt.Errorf("flag %s: %w", f.Rule, err)
		}
		if _, err := tx.ExecContext(ctx, `
			INSERT INTO flags (visit_id, rule, severity, markers_json, reason, source) VALUES (?, ?, ?, ?, ?, ?)`,
			visitID, f.Rule, string(f.Severity), string(mj), f.Reason, f.Source); err != nil {
			return fmt.Errorf("flag %s: %w", f.Rule, err)
		}
	}
	dj, err := json.Marshal(res.Display)
	if err != nil {
		return fmt.Errorf("display: %w", err)
	}
	if _, err := tx.ExecContext(ctx, `INSERT INTO display_products (visit_id, display_json) VALUES (?, ?)`,
		visitID, string(dj)); err != nil {
		return fmt.Errorf("display: %w", err)
	}
	if s.current {
		if err := writeOverlay(ctx, tx, visitID, res.Display); err != nil {
			return fmt.Errorf("overlay spectra: %w", err)
		}
	}
	return nil
}

// RecordingKnown reports whether a recording with that SHA-256 is stored,
// and returns its row (the first, should two visits share a file).
func (s *Store) RecordingKnown(ctx context.Context, sha string) (Recording, bool, error) {
	var r Recording
	err := s.r.QueryRowContext(ctx, `SELECT id, visit_id, sha256, format, size, role FROM recordings
		WHERE sha256 = ? ORDER BY id LIMIT 1`, sha).Scan(&r.ID, &r.VisitID, &r.SHA256, &r.Format, &r.Size, &r.Role)
	if errors.Is(err, sql.ErrNoRows) {
		return Recording{}, false, nil
	}
	if err != nil {
		return Recording{}, false, fmt.Errorf("store: recording %s: %w", sha, err)
	}
	return r, true, nil
}

// Visit returns the visit with everything analysis made of it, or
// ErrNotFound.
func (s *Store) Visit(ctx context.Context, id int64) (VisitRecord, error) {
	vs, err := s.loadVisits(ctx, "v.id = ?", nil, true, id)
	if err != nil {
		return VisitRecord{}, err
	}
	if len(vs) == 0 {
		return VisitRecord{}, fmt.Errorf("%w: visit %d", ErrNotFound, id)
	}
	return vs[0], nil
}

// PatientVisits returns the patient's visits ordered by date (an empty list
// for a patient without visits or an unknown ID).
func (s *Store) PatientVisits(ctx context.Context, patientID int64) ([]VisitRecord, error) {
	return s.loadVisits(ctx, "v.patient_id = ?", nil, true, patientID)
}

// CourseVisits is PatientVisits without the per-window decisions of each
// visit's quality (Quality.Windows is nil): a patient's course summarises
// the quality and never reads them, and they are about four fifths of the
// quality JSON, so a 40-visit course decodes a fifth as much. SQLite drops
// them (json_remove) before the JSON reaches Go.
func (s *Store) CourseVisits(ctx context.Context, patientID int64) ([]VisitRecord, error) {
	return s.loadVisits(ctx, "v.patient_id = ?", nil, false, patientID)
}

// VisitDisplay returns the display products of a visit, or ErrNotFound.
func (s *Store) VisitDisplay(ctx context.Context, id int64) (metrics.Display, error) {
	var js string
	err := s.r.QueryRowContext(ctx, `SELECT display_json FROM display_products WHERE visit_id = ?`, id).Scan(&js)
	if errors.Is(err, sql.ErrNoRows) {
		return metrics.Display{}, fmt.Errorf("%w: display of visit %d", ErrNotFound, id)
	}
	if err != nil {
		return metrics.Display{}, fmt.Errorf("store: display of visit %d: %w", id, err)
	}
	var d metrics.Display
	if err := json.Unmarshal([]byte(js), &d); err != nil {
		return metrics.Display{}, fmt.Errorf("store: display of visit %d: %w", id, err)
	}
	return d, nil
}

// AllVisitRecords returns every patient (ordered by code) with its visits
// (ordered by date), for the export. It runs five queries whatever the
// number of patients. With marker names given, only markers of those names
// are loaded. The cohort page reads CohortEntries instead.
func (s *Store) AllVisitRecords(ctx context.Context, markerNames ...string) ([]PatientCourse, error) {
	return s.courses(ctx, "1", "1", markerNames)
}

// GroupVisitRecords returns the patients of one group (Patient.Group equal
// to group, ignoring ASCII case and surrounding spaces, as
// clinic.Patient.IsControl compares), ordered by code, with all their
// visits and markers: the clinic's controls for their norms, without
// reading any other patient.
func (s *Store) GroupVisitRecords(ctx context.Context, group string) ([]PatientCourse, error) {
	const match = `lower(trim(group_name)) = lower(trim(?))`
	return s.courses(ctx, match, `v.patient_id IN (SELECT id FROM patients WHERE `+match+`)`, nil, group)
}

// GroupStamp is a fingerprint of everything GroupVisitRecords would return
// for group: it changes when a patient of the group is added or changed,
// or one of their visits is added, analysed again or has its markers or
// flags replaced. A cache of values built from the group (the control
// norms) compares stamps instead of rebuilding on a timer. One query of
// aggregates, no rows.
func (s *Store) GroupStamp(ctx context.Context, group string) (string, error) {
	const ids = `SELECT id FROM patients WHERE lower(trim(group_name)) = lower(trim(?1))`
	const visits = `SELECT id FROM visits WHERE patient_id IN (` + ids + `)`
	var stamp string
	err := s.r.QueryRowContext(ctx, `
		SELECT (SELECT count(*) || '/' || coalesce(max(updated_at), '') FROM patients WHERE id IN (`+ids+`))
		    || '|' || (SELECT count(*) || '/' || coalesce(max(id), 0) FROM visits WHERE id IN (`+visits+`))
		    || '|' || (SELECT count(*) || '/' || coalesce(max(analysed_at), '') FROM conditions WHERE visit_id IN (`+visits+`))
		    || '|' || (SELECT count(*) || '/' || coalesce(max(id), 0) || '/' || total(value) FROM markers WHERE visit_id IN (`+visits+`))
		    || '|' || (SELECT count(*) || '/' || coalesce(max(id), 0) FROM flags WHERE visit_id IN (`+visits+`))`,
		group).Scan(&stamp)
	if err != nil {
		return "", fmt.Errorf("store: group %q stamp: %w", group, err)
	}
	return stamp, nil
}

// rowsQuerier is what *sql.DB and *sql.Tx share for reading rows.
type rowsQuerier interface {
	QueryContext(ctx context.Context, query string, args ...any) (*sql.Rows, error)
}

// patientCourses runs query (selecting patientColumns) and returns one
// course per patient, without visits, in the query's order, with each
// patient's index in it by ID.
func patientCourses(ctx context.Context, q rowsQuerier, query string, args ...any) ([]PatientCourse, map[int64]int, error) {
	rows, err := q.QueryContext(ctx, query, args...)
	if err != nil {
		return nil, nil, fmt.Errorf("patients: %w", err)
	}
	defer rows.Close()
	var out []PatientCourse
	index := map[int64]int{}
	for rows.Next() {
		p, err := scanPatient(rows)
		if err != nil {
			return nil, nil, fmt.Errorf("patients: %w", err)
		}
		index[p.ID] = len(out)
		out = append(out, PatientCourse{Patient: p})
	}
	if err := rows.Err(); err != nil {
		return nil, nil, fmt.Errorf("patients: %w", err)
	}
	return out, index, nil
}

// courses returns the patients matching patientWhere (over patients) with
// the visits matching visitWhere (over visits v), both taking args.
func (s *Store) courses(ctx context.Context, patientWhere, visitWhere string, markerNames []string, args ...any) ([]PatientCourse, error) {
	out, index, err := patientCourses(ctx, s.r, `SELECT `+patientColumns+` FROM patients WHERE `+patientWhere+` ORDER BY code`, args...)
	if err != nil {
		return nil, fmt.Errorf("store: %w", err)
	}
	if len(out) == 0 {
		return nil, nil
	}
	vs, err := s.loadVisits(ctx, visitWhere, markerNames, true, args...)
	if err != nil {
		return nil, err
	}
	for _, v := range vs {
		if i, ok := index[v.Visit.PatientID]; ok {
			out[i].Visits = append(out[i].Visits, v)
		}
	}
	return out, nil
}

// VisitsWithOtherSettings returns the IDs (ascending) of the visits whose
// analysis, or any of whose markers, was made by settings other than
// version and hash.
func (s *Store) VisitsWithOtherSettings(ctx context.Context, version, hash string) ([]int64, error) {
	rows, err := s.r.QueryContext(ctx, `
		SELECT visit_id FROM conditions WHERE settings_version <> ?1 OR settings_hash <> ?2
		UNION
		SELECT visit_id FROM markers WHERE settings_version <> ?1 OR settings_hash <> ?2
		UNION
		SELECT v.id FROM visits v WHERE NOT EXISTS (SELECT 1 FROM conditions c WHERE c.visit_id = v.id)
		ORDER BY 1`, version, hash)
	if err != nil {
		return nil, fmt.Errorf("store: visits with other settings: %w", err)
	}
	defer rows.Close()
	var ids []int64
	for rows.Next() {
		var id int64
		if err := rows.Scan(&id); err != nil {
			return nil, fmt.Errorf("store: visits with other settings: %w", err)
		}
		ids = append(ids, id)
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("store: visits with other settings: %w", err)
	}
	return ids, nil
}

// VisitSource is what reprocessing needs to decode a visit again: the
// patient code, the visit, its recordings, the declared eye state and the
// periods and conditions of the last analysis (which hold what sidecars
// said, since only the recording files are kept).
type VisitSource struct {
	PatientCode   string
	Visit         Visit
	DeclaredState ingest.EyeState
	Recordings    []Recording
	Periods       []ingest.Period
	Conditions    ingest.Conditions
}

// VisitSource returns the visit's source for reprocessing, or ErrNotFound.
func (s *Store) VisitSource(ctx context.Context, id int64) (VisitSource, error) {
	var src VisitSource
	var state, perJSON, condJSON string
	v := &src.Visit
	err := s.r.QueryRowContext(ctx, `
		SELECT p.code, v.id, v.patient_id, v.visit_date, v.age_years, v.age_known, v.context, v.declared_state,
		       coalesce(c.periods_json, '[]'), coalesce(c.conditions_json, '{}')
		FROM visits v JOIN patients p ON p.id = v.patient_id LEFT JOIN conditions c ON c.visit_id = v.id
		WHERE v.id = ?`, id).Scan(&src.PatientCode, &v.ID, &v.PatientID, &v.Date, &v.AgeYears, &v.AgeKnown,
		&v.Context, &state, &perJSON, &condJSON)
	if errors.Is(err, sql.ErrNoRows) {
		return VisitSource{}, fmt.Errorf("%w: visit %d", ErrNotFound, id)
	}
	if err != nil {
		return VisitSource{}, fmt.Errorf("store: visit %d: %w", id, err)
	}
	src.DeclaredState = ingest.EyeState(state)
	if err := json.Unmarshal([]byte(perJSON), &src.Periods); err != nil {
		return VisitSource{}, fmt.Errorf("store: visit %d: periods: %w", id, err)
	}
	if err := json.Unmarshal([]byte(condJSON), &src.Conditions); err != nil {
		return VisitSource{}, fmt.Errorf("store: visit %d: conditions: %w", id, err)
	}
	rows, err := s.r.QueryContext(ctx, `SELECT id, visit_id, sha256, format, size, role FROM recordings
		WHERE visit_id = ? ORDER BY id`, id)
	if err != nil {
		return VisitSource{}, fmt.Errorf("store: visit %d: recordings: %w", id, err)
	}
	defer rows.Close()
	for rows.Next() {
		var r Recording
		if err := rows.Scan(&r.ID, &r.VisitID, &r.SHA256, &r.Format, &r.Size, &r.Role); err != nil {
			return VisitSource{}, fmt.Errorf("store: visit %d: recordings: %w", id, err)
		}
		src.Recordings = append(src.Recordings, r)
	}
	return src, rows.Err()
}

// loadVisits reads the visits matching where (a condition on visits v) with
// their recordings, conditions, markers and flags: four queries in all,
// assembled by visit ID. Visits are ordered by patient then date. With
// markerNames only markers of those names are read; without windows each
// quality's Windows are left out.
func (s *Store) loadVisits(ctx context.Context, where string, markerNames []string, windows bool, args ...any) ([]VisitRecord, error) {
	// One read transaction: the four queries see one snapshot (WAL), so a
	// reprocess committing between them cannot mix two analyses.
	tx, err := s.r.BeginTx(ctx, nil)
	if err != nil {
		return nil, fmt.Errorf("store: visits: %w", err)
	}
	defer tx.Rollback()
	quality := `c.quality_json`
	if !windows {
		quality = `json_remove(c.quality_json, '$.windows')`
	}
	rows, err := tx.QueryContext(ctx, `
		SELECT v.id, v.patient_id, v.visit_date, v.age_years, v.age_known, v.context,
		       coalesce(c.settings_version, ''), coalesce(c.settings_hash, ''),
		       coalesce(c.conditions_json, '{}'), coalesce(`+quality+`, '{}')
		FROM visits v LEFT JOIN conditions c ON c.visit_id = v.id
		WHERE `+where+` ORDER BY v.patient_id, v.visit_date`, args...)
	if err != nil {
		return nil, fmt.Errorf("store: visits: %w", err)
	}
	var out []VisitRecord
	index := map[int64]int{}
	for rows.Next() {
		var vr VisitRecord
		v := &vr.Visit
		var cj, qj string
		if err := rows.Scan(&v.ID, &v.PatientID, &v.Date, &v.AgeYears, &v.AgeKnown, &v.Context,
			&vr.SettingsVersion, &vr.SettingsHash, &cj, &qj); err != nil {
			rows.Close()
			return nil, fmt.Errorf("store: visits: %w", err)
		}
		if err := json.Unmarshal([]byte(cj), &vr.Conditions); err != nil {
			rows.Close()
			return nil, fmt.Errorf("store: visit %d: conditions: %w", v.ID, err)
		}
		if err := json.Unmarshal([]byte(qj), &vr.Quality); err != nil {
			rows.Close()
			return nil, fmt.Errorf("store: visit %d: quality: %w", v.ID, err)
		}
		index[v.ID] = len(out)
		out = append(out, vr)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("store: visits: %w", err)
	}
	if len(out) == 0 {
		return nil, nil
	}
	// The rows of the matching visits; for all visits no join is needed
	// (it would cost a visits lookup per marker row).
	join, and := ` JOIN visits v ON v.id = x.visit_id WHERE `+where, ` AND `
	if where == "1" {
		join, and = "", ` WHERE `
	}

	err = each(ctx, tx, `SELECT x.id, x.visit_id, x.sha256, x.format, x.size, x.role FROM recordings x`+join+
		` ORDER BY x.visit_id, x.id`, args, func(sc func(...any) error) error {
		var r Recording
		if err := sc(&r.ID, &r.VisitID, &r.SHA256, &r.Format, &r.Size, &r.Role); err != nil {
			return err
		}
		if i, ok := index[r.VisitID]; ok {
			out[i].Recordings = append(out[i].Recordings, r)
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("store: recordings: %w", err)
	}

	mq := `SELECT ` + markerRowColumns + ` FROM markers x` + join
	margs := args
	if len(markerNames) > 0 {
		mq += and + `x.name IN (?` + strings.Repeat(`, ?`, len(markerNames)-1) + `)`
		margs = append(append([]any{}, args...), anySlice(markerNames)...)
	}
	err = each(ctx, tx, mq+` ORDER BY x.visit_id, x.id`, margs, func(sc func(...any) error) error {
		id, m, err := scanMarkerRow(sc)
		if err != nil {
			return err
		}
		if i, ok := index[id]; ok {
			out[i].Markers = append(out[i].Markers, m)
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("store: markers: %w", err)
	}

	err = each(ctx, tx, `SELECT `+flagRowColumns+` FROM flags x`+join+
		` ORDER BY x.visit_id, x.id`, args, func(sc func(...any) error) error {
		id, f, err := scanFlagRow(sc)
		if err != nil {
			return err
		}
		if i, ok := index[id]; ok {
			out[i].Flags = append(out[i].Flags, f)
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("store: flags: %w", err)
	}
	return out, nil
}

// markerRowColumns are the columns of a markers row (alias x) that
// scanMarkerRow reads, the visit ID first.
const markerRowColumns = `x.visit_id, x.name, x.region, x.state, x.value, x.unit, x.computable, x.reason,
		x.interval_se, x.interval_low, x.interval_high, x.interval_level, x.interval_method, x.interval_resamples`

// scanMarkerRow reads one row of markerRowColumns.
func scanMarkerRow(sc func(...any) error) (int64, metrics.Marker, error) {
	var id int64
	var m metrics.Marker
	var state string
	var iv intervalScan
	if err := sc(append([]any{&id, &m.Name, &m.Region, &state, &m.Value, &m.Unit, &m.Computable, &m.Reason},
		iv.dest()...)...); err != nil {
		return 0, m, err
	}
	m.State = ingest.EyeState(state)
	m.Uncertainty = iv.uncertainty()
	return id, m, nil
}

// flagRowColumns are the columns of a flags row (alias x) that scanFlagRow
// reads, the visit ID first.
const flagRowColumns = `x.visit_id, x.rule, x.severity, x.markers_json, x.reason, x.source`

// scanFlagRow reads one row of flagRowColumns.
func scanFlagRow(sc func(...any) error) (int64, metrics.Flag, error) {
	var id int64
	var f metrics.Flag
	var sev, mj string
	if err := sc(&id, &f.Rule, &sev, &mj, &f.Reason, &f.Source); err != nil {
		return 0, f, err
	}
	f.Severity = metrics.Severity(sev)
	if err := json.Unmarshal([]byte(mj), &f.Markers); err != nil {
		return 0, f, err
	}
	return id, f, nil
}

func anySlice(ss []string) []any {
	out := make([]any, len(ss))
	for i, s := range ss {
		out[i] = s
	}
	return out
}

// each runs a query and calls f with a scanner per row.
func each(ctx context.Context, tx *sql.Tx, query string, args []any, f func(scan func(...any) error) error) error {
	rows, err := tx.QueryContext(ctx, query, args...)
	if err != nil {
		return err
	}
	defer rows.Close()
	for rows.Next() {
		if err := f(rows.Scan); err != nil {
			return err
		}
	}
	return rows.Err()
}
