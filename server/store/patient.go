package store

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"strings"
	"time"
)

// MaxCodeLength bounds a patient code (the schema holds it to the same).
const MaxCodeLength = 64

// CheckPatient reports the first field of p that breaks a rule of the
// patients table, before any SQL runs, so that the message names the field.
func CheckPatient(p Patient) error {
	switch {
	case p.Code == "" || len(p.Code) > MaxCodeLength || strings.TrimSpace(p.Code) != p.Code:
		return fmt.Errorf("%w: patient code %q: want 1 to %d characters without surrounding spaces", ErrInvalid, p.Code, MaxCodeLength)
	case p.Sex != "" && p.Sex != "F" && p.Sex != "M" && p.Sex != "O":
		return fmt.Errorf("%w: patient %s: sex %q: want F, M, O or empty", ErrInvalid, p.Code, p.Sex)
	case p.BirthYear != 0 && (p.BirthYear < 1880 || p.BirthYear > 2200):
		return fmt.Errorf("%w: patient %s: birth year %d: want a four-digit year from 1880", ErrInvalid, p.Code, p.BirthYear)
	case p.FollowUpMonths < 0 || p.FollowUpMonths > 240:
		return fmt.Errorf("%w: patient %s: follow-up %d months: want 0 to 240", ErrInvalid, p.Code, p.FollowUpMonths)
	}
	if p.BirthDate != "" {
		if _, err := time.Parse(time.DateOnly, p.BirthDate); err != nil {
			return fmt.Errorf("%w: patient %s: birth date %q: want YYYY-MM-DD", ErrInvalid, p.Code, p.BirthDate)
		}
	}
	return nil
}

// UpsertPatient adds the patient with p.Code, or updates the one that has
// it, and returns its ID. Fields left empty in p (sex "", birth year 0,
// birth date "", group "", cohort "", follow-up 0) keep the stored value, so
// that an ingest that names only the code never erases what is known.
func (s *Store) UpsertPatient(ctx context.Context, p Patient) (int64, error) {
	var id int64
	err := s.inTx(ctx, func(tx *sql.Tx) error {
		var err error
		id, err = s.upsertPatient(ctx, tx, p)
		return err
	})
	return id, err
}

func (s *Store) upsertPatient(ctx context.Context, tx *sql.Tx, p Patient) (int64, error) {
	if err := CheckPatient(p); err != nil {
		return 0, err
	}
	now := s.stamp()
	var id int64
	err := tx.QueryRowContext(ctx, `
		INSERT INTO patients (code, sex, birth_year, birth_date, group_name, cohort, follow_up_months, created_at, updated_at)
		VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)
		ON CONFLICT (code) DO UPDATE SET
			sex              = CASE WHEN excluded.sex <> '' THEN excluded.sex ELSE sex END,
			birth_year       = CASE WHEN excluded.birth_year <> 0 THEN excluded.birth_year ELSE birth_year END,
			birth_date       = CASE WHEN excluded.birth_date <> '' THEN excluded.birth_date ELSE birth_date END,
			group_name       = CASE WHEN excluded.group_name <> '' THEN excluded.group_name ELSE group_name END,
			cohort           = CASE WHEN excluded.cohort <> '' THEN excluded.cohort ELSE cohort END,
			follow_up_months = CASE WHEN excluded.follow_up_months <> 0 THEN excluded.follow_up_months ELSE follow_up_months END,
			updated_at       = excluded.updated_at
		RETURNING id`,
		p.Code, p.Sex, p.BirthYear, p.BirthDate, p.Group, p.Cohort, p.FollowUpMonths, now, now).Scan(&id)
	if err != nil {
		return 0, fmt.Errorf("store: patient %s: %w", p.Code, err)
	}
	return id, nil
}

const patientColumns = `id, code, sex, birth_year, birth_date, group_name, cohort, follow_up_months`

func scanPatient(row interface{ Scan(...any) error }) (Patient, error) {
	var p Patient
	err := row.Scan(&p.ID, &p.Code, &p.Sex, &p.BirthYear, &p.BirthDate, &p.Group, &p.Cohort, &p.FollowUpMonths)
	return p, err
}

// PatientByCode returns the patient with the code, or ErrNotFound.
func (s *Store) PatientByCode(ctx context.Context, code string) (Patient, error) {
	p, err := scanPatient(s.r.QueryRowContext(ctx, `SELECT `+patientColumns+` FROM patients WHERE code = ?`, code))
	if errors.Is(err, sql.ErrNoRows) {
		return Patient{}, fmt.Errorf("%w: patient %q", ErrNotFound, code)
	}
	return p, err
}

// PatientByID returns the patient with the ID, or ErrNotFound.
func (s *Store) PatientByID(ctx context.Context, id int64) (Patient, error) {
	p, err := scanPatient(s.r.QueryRowContext(ctx, `SELECT `+patientColumns+` FROM patients WHERE id = ?`, id))
	if errors.Is(err, sql.ErrNoRows) {
		return Patient{}, fmt.Errorf("%w: patient %d", ErrNotFound, id)
	}
	return p, err
}

// PatientSummary is a patient with the count and span of its visits.
type PatientSummary struct {
	Patient
	Visits     int
	FirstVisit string // YYYY-MM-DD, "" with no visit
	LastVisit  string
}

// Patients lists every patient ordered by code, with its visit count and
// first and last visit dates, in one query.
func (s *Store) Patients(ctx context.Context) ([]PatientSummary, error) {
	rows, err := s.r.QueryContext(ctx, `
		SELECT p.id, p.code, p.sex, p.birth_year, p.birth_date, p.group_name, p.cohort, p.follow_up_months,
		       count(v.id), coalesce(min(v.visit_date), ''), coalesce(max(v.visit_date), '')
		FROM patients p LEFT JOIN visits v ON v.patient_id = p.id
		GROUP BY p.id ORDER BY p.code`)
	if err != nil {
		return nil, fmt.Errorf("store: patients: %w", err)
	}
	defer rows.Close()
	var out []PatientSummary
	for rows.Next() {
		var ps PatientSummary
		p := &ps.Patient
		if err := rows.Scan(&p.ID, &p.Code, &p.Sex, &p.BirthYear, &p.BirthDate, &p.Group, &p.Cohort, &p.FollowUpMonths,
			&ps.Visits, &ps.FirstVisit, &ps.LastVisit); err != nil {
			return nil, fmt.Errorf("store: patients: %w", err)
		}
		out = append(out, ps)
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("store: patients: %w", err)
	}
	return out, nil
}
