package trends

import (
	"bytes"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"longwave/metrics/clinic"
)

// loadMigrationRows reads the rows of migrations/0002_reference_ranges.sql
// from testdata/trends/literature_ranges.json, which the store's
// TestLiteratureRowsFile keeps equal to what SQLite gives back after the
// migration (and the schema's own refusals are tested there too), so that
// trends tests its lookups without opening a database.
func loadMigrationRows(t *testing.T) []clinic.ReferenceRange {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(moduleRoot(t), "testdata", "trends", "literature_ranges.json"))
	if err != nil {
		t.Fatal(err)
	}
	var out []clinic.ReferenceRange
	if err := json.Unmarshal(b, &out); err != nil {
		t.Fatalf("literature_ranges.json: %v", err)
	}
	return out
}

// The migration's rows are REFERENCES.md section 1, and NewRanges accepts them.
func TestMigrationRowsValidate(t *testing.T) {
	rows := loadMigrationRows(t)
	r, err := NewRanges(rows)
	if err != nil {
		t.Fatalf("NewRanges(migration rows): %v", err)
	}
	type want struct {
		set, marker    string
		lower, upper   *float64
		mean, sd       *float64
		citation, note string
	}
	// Values as REFERENCES.md section 1 states them.
	wants := []want{
		{"literature", "pdr_frequency", fp(8.5), fp(11.5), nil, nil, "Marcuse LV", "abstract"},
		{"literature", "pdr_asymmetry", fp(-0.5), fp(0.5), nil, nil, "Hirsch LJ", "secondary"},
		{"literature-common-practice", "pdr_frequency", fp(8), nil, nil, nil, "common practice", "secondary"},
		{"literature-elderly-1989", "pdr_frequency", fp(8.34), fp(10.62), fp(9.48), fp(0.57), "doi:10.1016/0013-4694(89)90092-8", "authors'' names are from memory"},
		{"literature-elderly-1986", "pdr_frequency", nil, nil, fp(9.46), nil, "doi:10.1016/0013-4694(86)90141-0", "abstract"},
	}
	if len(rows) != len(wants) {
		t.Fatalf("%d rows, want %d", len(rows), len(wants))
	}
	eq := func(a, b *float64) bool { return (a == nil) == (b == nil) && (a == nil || *a == *b) }
	for i, w := range wants {
		g := rows[i]
		w.note = strings.ReplaceAll(w.note, "''", "'")
		if g.Set != w.set || g.Marker != w.marker || !eq(g.Lower, w.lower) || !eq(g.Upper, w.upper) || !eq(g.Mean, w.mean) || !eq(g.SD, w.sd) ||
			!strings.Contains(g.Citation, w.citation) || !strings.Contains(g.Note, w.note) || g.Status != StatusChecked || g.ExpectedChangePerYear != nil {
			t.Errorf("row %d: %+v, want %+v", i+1, g, w)
		}
	}
	// mean ± 2 SD of the 1989 row is the band REFERENCES.md gives.
	if e := rows[3]; !near(*e.Mean-2**e.SD, *e.Lower, 1e-12) || !near(*e.Mean+2**e.SD, *e.Upper, 1e-12) {
		t.Errorf("1989 band %v–%v is not mean ± 2 SD", *e.Lower, *e.Upper)
	}
	for _, set := range LiteratureSets {
		found := false
		for _, row := range rows {
			found = found || row.Set == set
		}
		if !found {
			t.Errorf("set %q has no row", set)
		}
	}
	// A 72-year-old: all four PDR sources apply, literature first.
	l := r.Lookup("pdr_frequency", "posterior", "closed", 72).Place(8.2)
	if len(l.Matches) != 4 || l.Advisory != AdvisoryLiterature {
		t.Fatalf("lookup at 72 y: %d matches, advisory %q", len(l.Matches), l.Advisory)
	}
	if m := l.Matches[0]; m.Range.Set != "literature" || m.Position != PositionBelow || m.Kind != "literature" || m.Advisory != AdvisoryLiterature {
		t.Errorf("Marcuse at 8.2 Hz: %+v", m)
	}
	if m := l.Matches[2]; m.Range.Set != "literature-elderly-1989" || !m.HasZ || !near(m.Z, (8.2-9.48)/0.57, 1e-12) || m.Position != PositionBelow {
		t.Errorf("1989 at 8.2 Hz: %+v", m)
	}
	if m := l.Matches[3]; m.Position != "" || m.PositionNote == "" || m.HasZ {
		t.Errorf("1986 (mean only): %+v", m)
	}
	// A 16-year-old: Marcuse only.
	if l := r.Lookup("pdr_frequency", "posterior", "closed", 16); len(l.Matches) != 1 {
		t.Errorf("lookup at 16 y: %d matches, want 1", len(l.Matches))
	}
	// A 12-year-old: no source covers the age.
	if l := r.Lookup("pdr_frequency", "posterior", "closed", 12); len(l.Matches) != 0 || !strings.Contains(l.NoRange, "age 12") {
		t.Errorf("lookup at 12 y: %+v", l)
	}
	// Asymmetry, signed left − right.
	if l := r.Lookup("pdr_asymmetry", "posterior", "closed", 60).Place(-0.7); len(l.Matches) != 1 || l.Matches[0].Position != PositionBelow {
		t.Errorf("asymmetry -0.7 Hz: %+v", l)
	}
	if l := r.Lookup("pdr_asymmetry", "posterior", "closed", 60).Place(0.7); len(l.Matches) != 1 || l.Matches[0].Position != PositionAbove {
		t.Errorf("asymmetry 0.7 Hz: %+v", l)
	}
	// Markers without a trustworthy range say so with the reason.
	for _, m := range []string{"alpha_reactivity", "theta_alpha_ratio", "slowing_ratio", "aperiodic_exponent"} {
		l := r.Lookup(m, "posterior", "closed", 70)
		if len(l.Matches) != 0 || !strings.HasPrefix(l.NoRange, "no published range: course only") || len(l.NoRange) < 60 {
			t.Errorf("%s: %+v, want no range with a reason", m, l)
		}
	}
}

func TestPlacePositions(t *testing.T) {
	r, err := NewRanges([]clinic.ReferenceRange{{Set: "literature", Marker: "pdr_frequency", Region: "posterior", State: "closed",
		AgeMin: 15, AgeMax: 120, Lower: fp(8.5), Upper: fp(11.5), Population: "p", Method: "m", Bands: "b", Citation: "c", Status: StatusChecked}})
	if err != nil {
		t.Fatal(err)
	}
	for _, tt := range []struct {
		v    float64
		want Position
	}{{8.49, PositionBelow}, {8.5, PositionWithin}, {8.51, PositionWithin}, {11.49, PositionWithin}, {11.5, PositionWithin}, {11.51, PositionAbove}} {
		if got := r.Lookup("pdr_frequency", "posterior", "closed", 40).Place(tt.v).Matches[0].Position; got != tt.want {
			t.Errorf("%v Hz: %s, want %s", tt.v, got, tt.want)
		}
	}
	// Age bands are [min, max).
	for _, tt := range []struct {
		age  float64
		want int
	}{{14.99, 0}, {15, 1}, {119.99, 1}, {120, 0}} {
		if got := len(r.Lookup("pdr_frequency", "posterior", "closed", tt.age).Matches); got != tt.want {
			t.Errorf("age %v: %d matches, want %d", tt.age, got, tt.want)
		}
	}
	// A row for any region and state.
	anyRow, err := NewRanges([]clinic.ReferenceRange{{Set: "clinic-a", Marker: "rel_alpha", Region: AnyRegion, State: AnyState,
		AgeMin: 0, AgeMax: 120, Lower: fp(0.1), Upper: fp(0.6), Population: "p", Method: "m", Bands: "b", Citation: "c", Status: StatusChecked}})
	if err != nil {
		t.Fatal(err)
	}
	for _, region := range []string{"posterior", "frontal"} {
		if l := anyRow.Lookup("rel_alpha", region, "open", 50).Place(0.7); len(l.Matches) != 1 || l.Matches[0].Position != PositionAbove {
			t.Errorf("any-region row, %s: %+v", region, l)
		}
	}
	var none *Ranges
	if l := none.Lookup("pdr_frequency", "posterior", "closed", 40); l.NoRange == "" || l.Advisory == "" {
		t.Errorf("nil ranges: %+v", l)
	}
}

func TestNewRangesErrors(t *testing.T) {
	good := func() clinic.ReferenceRange {
		return clinic.ReferenceRange{ID: 7, Set: "clinic-a", Marker: "pdr_frequency", Region: "posterior", State: "closed",
			AgeMin: 50, AgeMax: 70, Lower: fp(8), Upper: fp(11), Mean: fp(9.5), SD: fp(0.6),
			Population: "p", Method: "m", Bands: "b", Citation: "Clinic A controls 2025", Status: StatusFromMemory}
	}
	tests := []struct {
		name string
		edit func(rows []clinic.ReferenceRange) []clinic.ReferenceRange
		want error
		text string
	}{
		{"unknown marker", func(r []clinic.ReferenceRange) []clinic.ReferenceRange { r[0].Marker = "alpha_power"; return r }, ErrUnknownMarker, "row 7"},
		{"missing citation", func(r []clinic.ReferenceRange) []clinic.ReferenceRange { r[0].Citation = "  "; return r }, ErrMissingCitation, "row 7"},
		{"bad status", func(r []clinic.ReferenceRange) []clinic.ReferenceRange { r[0].Status = "abstract"; return r }, ErrBadStatus, "row 7"},
		{"lower > upper", func(r []clinic.ReferenceRange) []clinic.ReferenceRange { r[0].Lower = fp(12); return r }, ErrBadRange, "lower 12 > upper 11"},
		{"sd 0", func(r []clinic.ReferenceRange) []clinic.ReferenceRange { r[0].SD = fp(0); return r }, ErrBadRange, "sd 0"},
		{"sd < 0", func(r []clinic.ReferenceRange) []clinic.ReferenceRange { r[0].SD = fp(-0.1); return r }, ErrBadRange, "sd -0.1"},
		{"sd without mean", func(r []clinic.ReferenceRange) []clinic.ReferenceRange { r[0].Mean = nil; return r }, ErrBadRange, "without a mean"},
		{"no values", func(r []clinic.ReferenceRange) []clinic.ReferenceRange {
			r[0].Lower, r[0].Upper, r[0].Mean, r[0].SD = nil, nil, nil, nil
			return r
		}, ErrBadRange, "neither"},
		{"ages reversed", func(r []clinic.ReferenceRange) []clinic.ReferenceRange { r[0].AgeMin = 80; return r }, ErrBadRange, "age band 80–70"},
		{"bad state", func(r []clinic.ReferenceRange) []clinic.ReferenceRange { r[0].State = "EC"; return r }, ErrBadRange, "state"},
		{"overlap", func(r []clinic.ReferenceRange) []clinic.ReferenceRange {
			n := good()
			n.ID, n.AgeMin, n.AgeMax = 8, 69, 90
			return append(r, n)
		}, ErrAgeOverlap, "row 8"},
		{"gap", func(r []clinic.ReferenceRange) []clinic.ReferenceRange {
			n := good()
			n.ID, n.AgeMin, n.AgeMax = 8, 71, 90
			return append(r, n)
		}, ErrAgeGap, "ages 70–71"},
	}
	for _, tt := range tests {
		_, err := NewRanges(tt.edit([]clinic.ReferenceRange{good()}))
		var re *RangeError
		if !errors.Is(err, tt.want) || !errors.As(err, &re) || !strings.Contains(err.Error(), tt.text) {
			t.Errorf("%s: error %v, want %v naming %q", tt.name, err, tt.want, tt.text)
		}
	}
	// Adjacent bands, other sets and other regions are fine.
	a, b, c := good(), good(), good()
	b.ID, b.AgeMin, b.AgeMax = 8, 70, 90
	c.ID, c.Set = 9, "clinic-b"
	if _, err := NewRanges([]clinic.ReferenceRange{a, b, c}); err != nil {
		t.Errorf("adjacent bands: %v", err)
	}
}

const clinicTSV = "# Clinic Lindenhof, own controls\n" +
	"marker\tregion\tstate\tage_min\tage_max\tlower\tupper\tmean\tsd\texpected_change_per_year\tpopulation\tmethod\tbands\tcitation\tstatus\tnote\n" +
	"pdr_frequency\tposterior\tclosed\t50\t70\t8.1\t11.0\t9.6\t0.6\t-0.02\t40 clinic controls\tlongwave v1\tPDR 5–14 Hz\tLindenhof memory clinic controls 2020–2025\tchecked\t\n" +
	"\n" +
	"pdr_frequency\tposterior\tclosed\t70\t95\t7.9\t10.8\t9.3\t0.6\t-0.03\t35 clinic controls\tlongwave v1\tPDR 5–14 Hz\tLindenhof memory clinic controls 2020–2025\tchecked\tolder band\r\n"

func TestParseRangesTSV(t *testing.T) {
	rows, err := ParseRangesTSV(strings.NewReader(clinicTSV), "lindenhof")
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 2 || rows[1].Note != "older band" || *rows[0].ExpectedChangePerYear != -0.02 || rows[0].Set != "lindenhof" {
		t.Fatalf("rows %+v", rows)
	}
	r, err := NewRanges(rows)
	if err != nil {
		t.Fatal(err)
	}
	l := r.Lookup("pdr_frequency", "posterior", "closed", 75)
	if len(l.Matches) != 1 || l.Matches[0].Kind != "clinic" || l.Advisory != AdvisoryClinic {
		t.Errorf("clinic lookup: %+v", l)
	}
	if rate, _, ok := l.expectedChange(); !ok || rate != -0.03 {
		t.Errorf("clinic expected change %v %v", rate, ok)
	}
	header := strings.SplitN(clinicTSV, "\n", 3)[1] + "\n"
	line := func(s string) string { return header + s + "\n" }
	row := "pdr_frequency\tposterior\tclosed\t50\t70\t8.1\t11.0\t9.6\t0.6\t\tp\tm\tb\tc\tchecked\t"
	tests := []struct {
		name, text, want string
	}{
		{"empty", "", "no header"},
		{"unknown column", "marker\tcolour\n", "line 1"},
		{"missing column", "marker\tregion\n", `no column "state"`},
		{"short row", line("pdr_frequency\tposterior"), "line 2: bad range file: 2 cells"},
		{"bad number", line(strings.Replace(row, "8.1", "8,1", 1)), `line 2: bad range file: column lower: "8,1"`},
		{"nan", line(strings.Replace(row, "8.1", "NaN", 1)), "line 2"},
		{"bad status", line(strings.Replace(row, "checked", "abstract", 1)), "line 2: bad status"},
		{"overlap", header + row + "\n" + strings.Replace(row, "\t50\t70", "\t60\t80", 1) + "\n", "line 3: age bands overlap"},
		{"long line", header + strings.Repeat("x", MaxRangeLineBytes+10) + "\n", "line 2: bad range file: longer than"},
	}
	for _, tt := range tests {
		_, err := ParseRangesTSV(strings.NewReader(tt.text), "lindenhof")
		if err == nil || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("%s: error %v, want one containing %q", tt.name, err, tt.want)
		}
	}
	if _, err := ParseRangesTSV(strings.NewReader(clinicTSV), ""); err == nil {
		t.Error("empty set name accepted")
	}
}

// FuzzParseRangesTSV: any input gives rows or an error, never a panic; rows
// it returns always pass NewRanges.
func FuzzParseRangesTSV(f *testing.F) {
	f.Add([]byte(clinicTSV))
	f.Add([]byte("marker\tregion\n"))
	f.Add([]byte(""))
	f.Fuzz(func(t *testing.T, b []byte) {
		rows, err := ParseRangesTSV(bytes.NewReader(b), "fuzz")
		if err != nil {
			return
		}
		if _, err := NewRanges(rows); err != nil {
			t.Errorf("parsed rows fail NewRanges: %v", err)
		}
	})
}
