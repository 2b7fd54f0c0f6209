package bids

import (
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"longwave/ingest"
)

// maxSidecarBytes bounds every text sidecar read into memory (a
// participants.tsv of 100 000 rows is a few MB).
const maxSidecarBytes = 16 << 20

// table is a parsed BIDS tabular file: tab-separated, a header row of
// column names, one row per line (BIDS common principles, "Tabular files").
type table struct {
	name   string // base name, for errors
	header []string
	rows   []row
}

type row struct {
	line   int // 1-based line in the file
	fields []string
}

// col returns the index of the first column whose name equals one of names,
// ignoring case, or −1.
func (t *table) col(names ...string) int {
	for _, n := range names {
		for i, h := range t.header {
			if strings.EqualFold(h, n) {
				return i
			}
		}
	}
	return -1
}

func (t *table) errAt(line int, field, format string, args ...any) *ingest.FormatError {
	return &ingest.FormatError{File: t.name, Field: field, Signal: -1, Offset: -1, Line: line,
		Msg: fmt.Sprintf(format, args...), Err: ingest.ErrInvalid}
}

// readTable reads a TSV file. A row whose field count differs from the
// header's is an error naming its line; blank lines are skipped; a trailing
// CR is cut (files written on Windows).
func readTable(path string) (*table, error) {
	data, err := readLimited(path)
	if err != nil {
		return nil, err
	}
	return parseTable(filepath.Base(path), data)
}

// parseTable parses the bytes of a TSV file called name.
func parseTable(name string, data []byte) (*table, error) {
	t := &table{name: name}
	lines := strings.Split(string(data), "\n")
	for i, l := range lines {
		l = strings.TrimSuffix(l, "\r")
		if strings.TrimSpace(l) == "" {
			continue
		}
		fields := strings.Split(l, "\t")
		if t.header == nil {
			for j := range fields {
				fields[j] = strings.TrimSpace(fields[j])
			}
			t.header = fields
			continue
		}
		if len(fields) != len(t.header) {
			return nil, t.errAt(i+1, "", "%d fields, the header has %d", len(fields), len(t.header))
		}
		for j := range fields {
			fields[j] = strings.TrimSpace(fields[j])
		}
		t.rows = append(t.rows, row{line: i + 1, fields: fields})
	}
	if t.header == nil {
		return nil, t.errAt(1, "", "empty file: no header row")
	}
	return t, nil
}

// readLimited reads a sidecar whole, refusing files over maxSidecarBytes.
func readLimited(path string) ([]byte, error) {
	name := filepath.Base(path)
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("bids: open %s: %w", name, unwrapPath(err))
	}
	defer f.Close()
	data, err := io.ReadAll(io.LimitReader(f, maxSidecarBytes+1))
	if err != nil {
		return nil, fmt.Errorf("bids: read %s: %w", name, unwrapPath(err))
	}
	if len(data) > maxSidecarBytes {
		return nil, &ingest.FormatError{File: name, Signal: -1, Offset: maxSidecarBytes,
			Msg: fmt.Sprintf("larger than %d bytes", maxSidecarBytes), Err: ingest.ErrInvalid}
	}
	return data, nil
}

// unwrapPath drops the directory part of an *os.PathError (folder names may
// carry identifying text); the cause stays available to errors.Is.
func unwrapPath(err error) error {
	if pe, ok := err.(*os.PathError); ok {
		return pe.Err
	}
	return err
}

// isNA reports a BIDS missing value: "n/a" (or an empty cell).
func isNA(s string) bool { return s == "" || strings.EqualFold(s, "n/a") }
