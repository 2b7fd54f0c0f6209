package trends

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"

	"longwave/metrics/clinic"
)

// Limits of a clinic's range file, so that a malformed file cannot force a
// huge allocation.
const (
	MaxRangeLineBytes = 64 << 10
	MaxRangeRows      = 10000
)

// ErrRangeFile is wrapped by every ParseRangesTSV error that is not a
// *RangeError of row validation.
var ErrRangeFile = errors.New("bad range file")

// rangeColumns are the columns of a range file: those of the
// reference_ranges table without id and set_name (the set is given by the
// caller). Required columns are marked.
type rangeColumn struct {
	name     string
	required bool
}

var rangeColumns = []rangeColumn{
	{"marker", true}, {"region", true}, {"state", true}, {"age_min", true}, {"age_max", true},
	{"lower", false}, {"upper", false}, {"mean", false}, {"sd", false}, {"expected_change_per_year", false},
	{"population", true}, {"method", true}, {"bands", true}, {"citation", true}, {"status", true}, {"note", false},
}

// ParseRangesTSV reads a clinic's own reference ranges: UTF-8 text, tab
// separated, a header line naming the columns (any order; those of the
// reference_ranges table: marker region state age_min age_max lower upper
// mean sd expected_change_per_year population method bands citation status
// note, of which lower … expected_change_per_year and note are optional; a
// set_name column is allowed, its cells empty or equal to set). Empty cells of
// numeric columns mean "not given". Blank lines and lines starting with "#"
// are skipped. The rows are validated as NewRanges does; every error names
// the line.
func ParseRangesTSV(r io.Reader, set string) ([]clinic.ReferenceRange, error) {
	if strings.TrimSpace(set) == "" {
		return nil, fmt.Errorf("trends: range file: %w: empty set name", ErrRangeFile)
	}
	br := bufio.NewReaderSize(r, 4096)
	var (
		col   map[string]int
		rows  []clinic.ReferenceRange
		names []string
		line  int
	)
	fail := func(format string, a ...any) error {
		return fmt.Errorf("trends: range file line %d: %w: %s", line, ErrRangeFile, fmt.Sprintf(format, a...))
	}
	for {
		text, err := readLine(br)
		if err == io.EOF {
			break
		}
		line++
		if errors.Is(err, errLongLine) {
			return nil, fail("longer than %d bytes", MaxRangeLineBytes)
		}
		if err != nil {
			return nil, fmt.Errorf("trends: range file line %d: %w", line, err)
		}
		if line == 1 {
			text = strings.TrimPrefix(text, "\uFEFF")
		}
		if strings.TrimSpace(text) == "" || strings.HasPrefix(text, "#") {
			continue
		}
		cells := strings.Split(text, "\t")
		if col == nil {
			col = map[string]int{}
			for i, h := range cells {
				h = strings.ToLower(strings.TrimSpace(h))
				known := h == "set_name" || slices.ContainsFunc(rangeColumns, func(c rangeColumn) bool { return c.name == h })
				if !known {
					return nil, fail("unknown column %q", h)
				}
				if _, dup := col[h]; dup {
					return nil, fail("column %q twice", h)
				}
				col[h] = i
			}
			for _, c := range rangeColumns {
				if _, ok := col[c.name]; c.required && !ok {
					return nil, fail("no column %q", c.name)
				}
			}
			continue
		}
		if len(cells) != len(col) {
			return nil, fail("%d cells, the header has %d", len(cells), len(col))
		}
		if len(rows) == MaxRangeRows {
			return nil, fail("more than %d rows", MaxRangeRows)
		}
		get := func(name string) string {
			if i, ok := col[name]; ok {
				return strings.TrimSpace(cells[i])
			}
			return ""
		}
		if s := get("set_name"); s != "" && s != set {
			return nil, fail("set_name %q, the file is loaded as set %q", s, set)
		}
		row := clinic.ReferenceRange{Set: set, Marker: get("marker"), Region: get("region"), State: get("state"),
			Population: get("population"), Method: get("method"), Bands: get("bands"),
			Citation: get("citation"), Status: get("status"), Note: get("note")}
		var perr error
		number := func(name string) *float64 {
			s := get(name)
			if s == "" || perr != nil {
				return nil
			}
			v, err := strconv.ParseFloat(s, 64)
			if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
				perr = fail("column %s: %q is not a number", name, s)
				return nil
			}
			return &v
		}
		ageMin, ageMax := number("age_min"), number("age_max")
		row.Lower, row.Upper = number("lower"), number("upper")
		row.Mean, row.SD = number("mean"), number("sd")
		row.ExpectedChangePerYear = number("expected_change_per_year")
		if perr == nil && (ageMin == nil || ageMax == nil) {
			perr = fail("age_min and age_max are required")
		}
		if perr != nil {
			return nil, perr
		}
		row.AgeMin, row.AgeMax = *ageMin, *ageMax
		rows = append(rows, row)
		names = append(names, fmt.Sprintf("line %d", line))
	}
	if col == nil {
		line = 1
		return nil, fail("no header line")
	}
	if _, err := newRanges(rows, names); err != nil {
		return nil, err
	}
	return rows, nil
}

var errLongLine = errors.New("line too long")

// readLine returns the next line without its line ending, refusing lines
// longer than MaxRangeLineBytes; io.EOF when nothing is left.
func readLine(br *bufio.Reader) (string, error) {
	var b []byte
	for {
		chunk, err := br.ReadSlice('\n')
		if len(b)+len(chunk) > MaxRangeLineBytes+2 {
			return "", errLongLine
		}
		b = append(b, chunk...)
		switch {
		case err == bufio.ErrBufferFull:
			continue
		case err == io.EOF && len(b) > 0:
			return strings.TrimRight(string(b), "\r\n"), nil
		case err != nil:
			return "", err
		}
		return strings.TrimRight(string(b), "\r\n"), nil
	}
}
