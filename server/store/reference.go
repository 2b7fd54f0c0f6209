package store

import (
	"context"
	"database/sql"
	"fmt"
)

// ReferenceRanges returns the rows of one set of reference ranges
// ("literature", or a clinic's own set) ordered by marker, region, state and
// age band. The table is made by migration 0002 (package trends).
func (s *Store) ReferenceRanges(ctx context.Context, set string) ([]ReferenceRange, error) {
	rows, err := s.r.QueryContext(ctx, `
		SELECT id, set_name, marker, region, state, age_min, age_max, lower, upper, mean, sd,
		       expected_change_per_year, population, method, bands, citation, status, note
		FROM reference_ranges WHERE set_name = ? ORDER BY marker, region, state, age_min, id`, set)
	if err != nil {
		return nil, fmt.Errorf("store: reference ranges %q: %w", set, err)
	}
	defer rows.Close()
	var out []ReferenceRange
	for rows.Next() {
		var r ReferenceRange
		var lower, upper, mean, sd, change sql.NullFloat64
		if err := rows.Scan(&r.ID, &r.Set, &r.Marker, &r.Region, &r.State, &r.AgeMin, &r.AgeMax,
			&lower, &upper, &mean, &sd, &change, &r.Population, &r.Method, &r.Bands, &r.Citation,
			&r.Status, &r.Note); err != nil {
			return nil, fmt.Errorf("store: reference ranges %q: %w", set, err)
		}
		r.Lower, r.Upper, r.Mean, r.SD = ptr(lower), ptr(upper), ptr(mean), ptr(sd)
		r.ExpectedChangePerYear = ptr(change)
		out = append(out, r)
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("store: reference ranges %q: %w", set, err)
	}
	return out, nil
}

// ReplaceReferenceRanges replaces every row of the set with rows, in one
// transaction (a clinic loading its own ranges, or the literature set being
// refreshed). The rows' Set and ID fields are ignored.
func (s *Store) ReplaceReferenceRanges(ctx context.Context, set string, rows []ReferenceRange) error {
	if set == "" {
		return fmt.Errorf("%w: reference range set has no name", ErrInvalid)
	}
	err := s.inTx(ctx, func(tx *sql.Tx) error {
		if _, err := tx.ExecContext(ctx, `DELETE FROM reference_ranges WHERE set_name = ?`, set); err != nil {
			return err
		}
		st, err := tx.PrepareContext(ctx, `
			INSERT INTO reference_ranges (set_name, marker, region, state, age_min, age_max, lower, upper, mean, sd,
				expected_change_per_year, population, method, bands, citation, status, note)
			VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`)
		if err != nil {
			return err
		}
		defer st.Close()
		for i, r := range rows {
			if _, err := st.ExecContext(ctx, set, r.Marker, r.Region, r.State, r.AgeMin, r.AgeMax,
				r.Lower, r.Upper, r.Mean, r.SD, r.ExpectedChangePerYear, r.Population, r.Method, r.Bands,
				r.Citation, r.Status, r.Note); err != nil {
				return fmt.Errorf("row %d (%s %s %s): %w", i+1, r.Marker, r.Region, r.State, err)
			}
		}
		return nil
	})
	if err != nil {
		return fmt.Errorf("store: replace reference ranges %q: %w", set, err)
	}
	return nil
}

func ptr(n sql.NullFloat64) *float64 {
	if !n.Valid {
		return nil
	}
	v := n.Float64
	return &v
}
