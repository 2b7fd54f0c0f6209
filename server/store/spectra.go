package store

import (
	"context"
	"database/sql"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"math"

	"longwave/ingest"
	"longwave/metrics"
)

// The course overlays the posterior eyes-closed spectrum of every visit.
// Read out of display_json, each one costs a parse of the whole display
// document (the other spectra and the trace excerpts); read as JSON from a
// table of its own it still costs a decimal parse of every number (40
// visits: about 10 ms). overlay_spectra (migration 0006) keeps them in a
// small binary form instead, written with the display products and filled
// in for older visits the first time they are read.

// spectraFormat is the version of the binary form of overlay spectra.
const spectraFormat = 1

// errSpectra: bytes that are not overlay spectra of spectraFormat.
var errSpectra = errors.New("store: overlay spectra are corrupt")

// overlaySpectra are the spectra of d that overlay_spectra keeps: the
// posterior eyes-closed ones, in order.
func overlaySpectra(d metrics.Display) []metrics.Spectrum {
	var out []metrics.Spectrum
	for _, sp := range d.Spectra {
		if sp.State == ingest.EyesClosed && sp.Region == metrics.RegionPosterior {
			out = append(out, sp)
		}
	}
	return out
}

// appendSpectra appends the binary form of list: the count, then per
// spectrum its state and region (uvarint length and bytes), its three
// series (a uvarint length plus one, 0 for nil, then each value's 8
// little-endian IEEE 754 bytes) and its peak frequency and power.
func appendSpectra(dst []byte, list []metrics.Spectrum) []byte {
	dst = binary.AppendUvarint(dst, uint64(len(list)))
	str := func(s string) {
		dst = binary.AppendUvarint(dst, uint64(len(s)))
		dst = append(dst, s...)
	}
	floats := func(v []float64) {
		if v == nil {
			dst = binary.AppendUvarint(dst, 0)
			return
		}
		dst = binary.AppendUvarint(dst, uint64(len(v))+1)
		for _, x := range v {
			dst = binary.LittleEndian.AppendUint64(dst, math.Float64bits(x))
		}
	}
	for _, sp := range list {
		str(string(sp.State))
		str(sp.Region)
		floats(sp.Freqs)
		floats(sp.Power)
		floats(sp.Aperiodic)
		dst = binary.LittleEndian.AppendUint64(dst, math.Float64bits(sp.PeakHz))
		dst = binary.LittleEndian.AppendUint64(dst, math.Float64bits(sp.PeakPower))
	}
	return dst
}

// decodeSpectra reads what appendSpectra wrote. No list is allocated longer
// than the bytes left could hold.
func decodeSpectra(b []byte) ([]metrics.Spectrum, error) {
	off := 0
	var bad error
	uv := func(what string) uint64 {
		if bad != nil {
			return 0
		}
		v, n := binary.Uvarint(b[off:])
		if n <= 0 {
			bad = fmt.Errorf("%w: %s at offset %d", errSpectra, what, off)
			return 0
		}
		off += n
		return v
	}
	str := func(what string) string {
		n := uv(what)
		if bad != nil {
			return ""
		}
		if n > uint64(len(b)-off) {
			bad = fmt.Errorf("%w: %s of %d bytes past the end (offset %d)", errSpectra, what, n, off)
			return ""
		}
		s := string(b[off : off+int(n)])
		off += int(n)
		return s
	}
	float := func(what string) float64 {
		if bad != nil {
			return 0
		}
		if len(b)-off < 8 {
			bad = fmt.Errorf("%w: %s past the end (offset %d)", errSpectra, what, off)
			return 0
		}
		v := math.Float64frombits(binary.LittleEndian.Uint64(b[off:]))
		off += 8
		return v
	}
	floats := func(what string) []float64 {
		n := uv(what)
		if bad != nil || n == 0 {
			return nil
		}
		if n-1 > uint64((len(b)-off)/8) {
			bad = fmt.Errorf("%w: %s of %d values past the end (offset %d)", errSpectra, what, n-1, off)
			return nil
		}
		v := make([]float64, n-1)
		for i := range v {
			v[i] = math.Float64frombits(binary.LittleEndian.Uint64(b[off:]))
			off += 8
		}
		return v
	}
	n := uv("count")
	// A spectrum takes at least 21 bytes (five lengths and two numbers).
	if bad == nil && n > uint64(len(b)/21) {
		return nil, fmt.Errorf("%w: %d spectra in %d bytes", errSpectra, n, len(b))
	}
	var out []metrics.Spectrum
	for i := uint64(0); i < n && bad == nil; i++ {
		sp := metrics.Spectrum{State: ingest.EyeState(str("state")), Region: str("region")}
		sp.Freqs, sp.Power, sp.Aperiodic = floats("frequencies"), floats("power"), floats("aperiodic fit")
		sp.PeakHz, sp.PeakPower = float("peak frequency"), float("peak power")
		out = append(out, sp)
	}
	if bad != nil {
		return nil, bad
	}
	if off != len(b) {
		return nil, fmt.Errorf("%w: %d bytes after the end (offset %d)", errSpectra, len(b)-off, off)
	}
	return out, nil
}

// writeOverlay keeps the overlay spectra of a visit's display products
// (an empty list too: it says the visit has none).
func writeOverlay(ctx context.Context, tx *sql.Tx, visitID int64, d metrics.Display) error {
	_, err := tx.ExecContext(ctx, `INSERT OR REPLACE INTO overlay_spectra (visit_id, format, spectra) VALUES (?, ?, ?)`,
		visitID, spectraFormat, appendSpectra(nil, overlaySpectra(d)))
	return err
}

// OverlaySpectra returns the stored posterior eyes-closed spectra of the
// visits (normally one each, in display order), by visit ID; a visit
// without one is left out. One query over overlay_spectra; visits stored
// before migration 0006 (no row yet, or a row of another format) get
// theirs from their display products, kept for the next time.
func (s *Store) OverlaySpectra(ctx context.Context, ids []int64) (map[int64][]metrics.Spectrum, error) {
	out := make(map[int64][]metrics.Spectrum, len(ids))
	if len(ids) == 0 {
		return out, nil
	}
	list, err := json.Marshal(ids)
	if err != nil {
		return nil, fmt.Errorf("store: spectra: %w", err)
	}
	rows, err := s.r.QueryContext(ctx, `SELECT d.visit_id, o.format, o.spectra FROM display_products d
		LEFT JOIN overlay_spectra o ON o.visit_id = d.visit_id
		WHERE d.visit_id IN (SELECT value FROM json_each(?))`, string(list))
	if err != nil {
		return nil, fmt.Errorf("store: spectra: %w", err)
	}
	var missing []int64
	for rows.Next() {
		var id int64
		var format sql.NullInt64
		var blob []byte
		if err := rows.Scan(&id, &format, &blob); err != nil {
			rows.Close()
			return nil, fmt.Errorf("store: spectra: %w", err)
		}
		sp, err := decodeSpectra(blob)
		if format.Int64 != spectraFormat || err != nil {
			missing = append(missing, id)
			continue
		}
		if len(sp) > 0 {
			out[id] = sp
		}
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("store: spectra: %w", err)
	}
	if len(missing) == 0 {
		return out, nil
	}
	err = s.inTx(ctx, func(tx *sql.Tx) error {
		for _, id := range missing {
			var js string
			err := tx.QueryRowContext(ctx, `SELECT display_json FROM display_products WHERE visit_id = ?`, id).Scan(&js)
			if errors.Is(err, sql.ErrNoRows) {
				continue // deleted since the read
			}
			if err != nil {
				return err
			}
			var d metrics.Display
			if err := json.Unmarshal([]byte(js), &d); err != nil {
				return fmt.Errorf("display of visit %d: %w", id, err)
			}
			if err := writeOverlay(ctx, tx, id, d); err != nil {
				return err
			}
			if sp := overlaySpectra(d); len(sp) > 0 {
				out[id] = sp
			}
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("store: spectra: fill in %d visits: %w", len(missing), err)
	}
	return out, nil
}
