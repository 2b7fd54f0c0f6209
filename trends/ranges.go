package trends

import (
	"cmp"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"

	"longwave/metrics"
	"longwave/metrics/clinic"
)

// Advisory texts shown beside every range (DESIGN.md, "Reference ranges").
const (
	AdvisoryLiterature = "advisory, literature reference, not a diagnosis"
	AdvisoryClinic     = "advisory, reference range loaded by this clinic, not a diagnosis"
	AdvisoryLocal      = "advisory, local reference from this clinic's control participants, not a diagnosis"
)

// LiteratureSet is the set name prefix of the ranges taken from the
// literature (migrations/0002_reference_ranges.sql); every other set name is
// a clinic's own file.
const LiteratureSet = "literature"

// LiteratureSets are the set names migration 0002 inserts. One source per set:
// a 70-year-old has both the adult limits and the older-adult reports, whose
// age bands would otherwise overlap.
var LiteratureSets = []string{"literature", "literature-common-practice", "literature-elderly-1989", "literature-elderly-1986"}

// AnyRegion and AnyState in a row match every region or state.
const (
	AnyRegion = "any"
	AnyState  = "any"
)

// Range statuses (REFERENCES.md: checked in the source's text or abstract,
// or recalled and waiting for checking).
const (
	StatusChecked    = "checked"
	StatusFromMemory = "from memory"
)

// Position of a value against a range.
type Position string

// Positions.
const (
	PositionBelow  Position = "below"
	PositionWithin Position = "within"
	PositionAbove  Position = "above"
)

// Errors of range validation; a *RangeError wraps one of them.
var (
	ErrUnknownMarker   = errors.New("unknown marker")
	ErrMissingCitation = errors.New("missing citation")
	ErrBadStatus       = errors.New("bad status")
	ErrBadRange        = errors.New("bad range")
	ErrAgeOverlap      = errors.New("age bands overlap")
	ErrAgeGap          = errors.New("gap between age bands")
)

// RangeError names the row (or file line) of a bad reference range.
type RangeError struct {
	Row string // "row 3 (set "literature", pdr_frequency/posterior/closed, ages 15–120)" or "line 4"
	Err error
}

func (e *RangeError) Error() string {
	return "trends: reference ranges: " + e.Row + ": " + e.Err.Error()
}
func (e *RangeError) Unwrap() error { return e.Err }

// Range is one reference range as package trends hands it on: a copy of a
// clinic.ReferenceRange with JSON tags. Limits, mean and SD are nil where the
// source gives none.
type Range struct {
	Set                   string   `json:"set"`
	Marker                string   `json:"marker"`
	Region                string   `json:"region"`
	State                 string   `json:"state"`
	AgeMin                float64  `json:"age_min"`
	AgeMax                float64  `json:"age_max"`
	Lower                 *float64 `json:"lower"`
	Upper                 *float64 `json:"upper"`
	Mean                  *float64 `json:"mean"`
	SD                    *float64 `json:"sd"`
	ExpectedChangePerYear *float64 `json:"expected_change_per_year"`
	Population            string   `json:"population"`
	Method                string   `json:"method"`
	Bands                 string   `json:"bands"`
	Citation              string   `json:"citation"`
	Status                string   `json:"status"`
	Note                  string   `json:"note"`
}

// Ranges is a validated collection of reference ranges, from the literature
// and from clinics' files.
type Ranges struct {
	rows []Range
}

// NewRanges validates rows and returns them ready for lookup. Errors name the
// row: unknown marker, missing citation, status other than "checked" or
// "from memory", lower > upper, SD ≤ 0, SD without a mean, no limit and no
// mean, a bad age band, and age bands that overlap or leave a gap within one
// set, marker, region and state.
func NewRanges(rows []clinic.ReferenceRange) (*Ranges, error) {
	names := make([]string, len(rows))
	for i, r := range rows {
		id := r.ID
		if id == 0 {
			id = int64(i + 1)
		}
		names[i] = fmt.Sprintf("row %d (set %q, %s/%s/%s, ages %s–%s)", id, r.Set, r.Marker, r.Region, r.State, num(r.AgeMin), num(r.AgeMax))
	}
	return newRanges(rows, names)
}

func newRanges(rows []clinic.ReferenceRange, names []string) (*Ranges, error) {
	out := &Ranges{rows: make([]Range, len(rows))}
	for i, r := range rows {
		if err := validRow(r); err != nil {
			return nil, &RangeError{Row: names[i], Err: err}
		}
		out.rows[i] = Range{
			Set: r.Set, Marker: r.Marker, Region: r.Region, State: r.State,
			AgeMin: r.AgeMin, AgeMax: r.AgeMax,
			Lower: r.Lower, Upper: r.Upper, Mean: r.Mean, SD: r.SD,
			ExpectedChangePerYear: r.ExpectedChangePerYear,
			Population:            r.Population, Method: r.Method, Bands: r.Bands,
			Citation: r.Citation, Status: r.Status, Note: r.Note,
		}
	}
	// Age bands within one set, marker, region and state: sorted by AgeMin,
	// each must start where the one before ends.
	idx := make([]int, len(rows))
	for i := range idx {
		idx[i] = i
	}
	group := func(r Range) string { return r.Set + "\x00" + seriesKey(r.Marker, r.Region, r.State) }
	slices.SortStableFunc(idx, func(a, b int) int {
		ra, rb := out.rows[a], out.rows[b]
		return cmp.Or(strings.Compare(group(ra), group(rb)), cmp.Compare(ra.AgeMin, rb.AgeMin))
	})
	for k := 1; k < len(idx); k++ {
		p, c := out.rows[idx[k-1]], out.rows[idx[k]]
		if group(p) != group(c) {
			continue
		}
		switch {
		case c.AgeMin < p.AgeMax:
			return nil, &RangeError{Row: names[idx[k]], Err: fmt.Errorf("%w: ages %s–%s overlap %s", ErrAgeOverlap, num(c.AgeMin), num(c.AgeMax), names[idx[k-1]])}
		case c.AgeMin > p.AgeMax:
			return nil, &RangeError{Row: names[idx[k]], Err: fmt.Errorf("%w: nothing covers ages %s–%s after %s", ErrAgeGap, num(p.AgeMax), num(c.AgeMin), names[idx[k-1]])}
		}
	}
	slices.SortStableFunc(out.rows, func(a, b Range) int {
		return cmp.Or(cmp.Compare(setRank(a.Set), setRank(b.Set)), strings.Compare(a.Set, b.Set),
			strings.Compare(group(a), group(b)), cmp.Compare(a.AgeMin, b.AgeMin))
	})
	return out, nil
}

// setRank orders literature sets first, in the order of LiteratureSets.
func setRank(set string) int {
	if i := slices.Index(LiteratureSets, set); i >= 0 {
		return i
	}
	if strings.HasPrefix(set, LiteratureSet) {
		return len(LiteratureSets)
	}
	return len(LiteratureSets) + 1
}

func finite(p *float64) bool { return p == nil || (!math.IsNaN(*p) && !math.IsInf(*p, 0)) }

func validRow(r clinic.ReferenceRange) error {
	switch {
	case strings.TrimSpace(r.Set) == "":
		return fmt.Errorf("%w: set name empty", ErrBadRange)
	case !knownMarker(r.Marker):
		return fmt.Errorf("%w %q", ErrUnknownMarker, r.Marker)
	case strings.TrimSpace(r.Region) == "":
		return fmt.Errorf("%w: region empty (use %q for every region)", ErrBadRange, AnyRegion)
	case !slices.Contains([]string{"closed", "open", "unknown", AnyState}, r.State):
		return fmt.Errorf("%w: state %q is not closed, open, unknown or %s", ErrBadRange, r.State, AnyState)
	case strings.TrimSpace(r.Citation) == "":
		return ErrMissingCitation
	case r.Status != StatusChecked && r.Status != StatusFromMemory:
		return fmt.Errorf("%w %q: want %q or %q", ErrBadStatus, r.Status, StatusChecked, StatusFromMemory)
	case math.IsNaN(r.AgeMin) || math.IsNaN(r.AgeMax) || math.IsInf(r.AgeMin, 0) || math.IsInf(r.AgeMax, 0):
		return fmt.Errorf("%w: age band not a number", ErrBadRange)
	case r.AgeMin < 0 || r.AgeMin >= r.AgeMax:
		return fmt.Errorf("%w: age band %s–%s (want 0 ≤ age_min < age_max)", ErrBadRange, num(r.AgeMin), num(r.AgeMax))
	case !finite(r.Lower) || !finite(r.Upper) || !finite(r.Mean) || !finite(r.SD) || !finite(r.ExpectedChangePerYear):
		return fmt.Errorf("%w: a value is not a finite number", ErrBadRange)
	case r.Lower != nil && r.Upper != nil && *r.Lower > *r.Upper:
		return fmt.Errorf("%w: lower %s > upper %s", ErrBadRange, num(*r.Lower), num(*r.Upper))
	case r.SD != nil && *r.SD <= 0:
		return fmt.Errorf("%w: sd %s ≤ 0", ErrBadRange, num(*r.SD))
	case r.SD != nil && r.Mean == nil:
		return fmt.Errorf("%w: sd without a mean", ErrBadRange)
	case r.Lower == nil && r.Upper == nil && r.Mean == nil:
		return fmt.Errorf("%w: neither limits nor a mean", ErrBadRange)
	}
	return nil
}

// Rows returns a copy of the validated ranges, literature first.
func (r *Ranges) Rows() []Range {
	if r == nil {
		return nil
	}
	return slices.Clone(r.rows)
}

// RangeMatch is one range that applies to a marker at an age, and, after
// Place, where a value lies against it.
type RangeMatch struct {
	Range Range `json:"range"`
	// Kind is "literature" or "clinic" (a clinic's own file).
	Kind     string `json:"kind"`
	Advisory string `json:"advisory"`
	// Placed is true after Place; Position is empty when the range has
	// no limits (a reported mean only), with PositionNote saying so.
	Placed       bool     `json:"placed"`
	Value        float64  `json:"value"`
	Position     Position `json:"position,omitempty"`
	PositionNote string   `json:"position_note,omitempty"`
	// Z = (value − mean)/SD where the source gives both.
	HasZ bool    `json:"has_z"`
	Z    float64 `json:"z"`
}

// RangeLookup is what Lookup finds for a marker at an age: every applying
// range (literature first), or the reason there is none.
type RangeLookup struct {
	Marker   string       `json:"marker"`
	Region   string       `json:"region"`
	State    string       `json:"state"`
	Age      float64      `json:"age"`
	AgeKnown bool         `json:"age_known"`
	Matches  []RangeMatch `json:"matches"`
	NoRange  string       `json:"no_range,omitempty"`
	Advisory string       `json:"advisory"`
}

// noRangeReasons say why a marker has no published range (REFERENCES.md
// section 1).
var noRangeReasons = map[string]string{
	metrics.AlphaReactivity:   "no published normal limit; background only: reactivity is high in normal elderly, intermediate in amnestic MCI and low in mild AD (Babiloni C et al. 2010, J Alzheimers Dis 22(4):1047–1064)",
	metrics.AlphaRatio:        "no published normal limit; background only: reactivity is high in normal elderly, intermediate in amnestic MCI and low in mild AD (Babiloni C et al. 2010, J Alzheimers Dis 22(4):1047–1064)",
	metrics.ThetaAlphaRatio:   "no transferable cut-off: band definitions differ between studies (longwave: theta 4–8 Hz, alpha 8–13 Hz)",
	metrics.SlowingRatio:      "no transferable cut-off: band definitions differ between studies (longwave: (delta 1–4 + theta 4–8)/(alpha 8–13 + beta 13–30 Hz))",
	metrics.AperiodicExponent: "direction only: the exponent flattens with age (Voytek B et al. 2015, J Neurosci 35(38):13257–13265); no numeric range found",
}

// NoRangeReason says why a marker has no published range.
func NoRangeReason(marker string) string {
	if r, ok := noRangeReasons[marker]; ok {
		return "no published range: course only (" + r + ")"
	}
	return "no published range: course only (longwave's sources give none for this marker)"
}

// Lookup returns the ranges for a marker, region and state at an age in
// years (age bands are [AgeMin, AgeMax)). A nil *Ranges finds nothing.
func (r *Ranges) Lookup(marker, region, state string, age float64) RangeLookup {
	out := RangeLookup{Marker: marker, Region: region, State: state, Age: age, AgeKnown: true, Advisory: AdvisoryLiterature}
	if r == nil {
		out.NoRange = "no reference ranges loaded"
		return out
	}
	seen := false
	for _, row := range r.rows {
		if row.Marker != marker || (row.Region != region && row.Region != AnyRegion) || (row.State != state && row.State != AnyState) {
			continue
		}
		seen = true
		if age < row.AgeMin || age >= row.AgeMax {
			continue
		}
		m := RangeMatch{Range: row, Kind: "literature", Advisory: AdvisoryLiterature}
		if !strings.HasPrefix(row.Set, LiteratureSet) {
			m.Kind, m.Advisory = "clinic", AdvisoryClinic
		}
		out.Matches = append(out.Matches, m)
	}
	switch {
	case len(out.Matches) > 0:
		if out.Matches[0].Kind == "clinic" {
			out.Advisory = AdvisoryClinic
		}
	case seen:
		out.NoRange = fmt.Sprintf("no range for age %s y: the sources cover other ages", num(age))
	default:
		out.NoRange = NoRangeReason(marker)
	}
	return out
}

// unknownAge is the lookup for a visit without a known age.
func unknownAge(marker, region, state string) RangeLookup {
	return RangeLookup{Marker: marker, Region: region, State: state, Advisory: AdvisoryLiterature,
		NoRange: "age unknown: no age-adjusted range"}
}

// Place returns a copy of l with each range's position of value: below the
// lower limit, above the upper, else within; and z = (value − mean)/SD where
// both exist.
func (l RangeLookup) Place(value float64) RangeLookup {
	l.Matches = slices.Clone(l.Matches)
	for i := range l.Matches {
		m := &l.Matches[i]
		m.Placed, m.Value = true, value
		lo, hi := m.Range.Lower, m.Range.Upper
		switch {
		case lo != nil && value < *lo:
			m.Position = PositionBelow
		case hi != nil && value > *hi:
			m.Position = PositionAbove
		case lo != nil || hi != nil:
			m.Position = PositionWithin
		default:
			m.PositionNote = "the source reports a mean only: no limits to place the value against"
		}
		if m.Range.Mean != nil && m.Range.SD != nil {
			m.HasZ, m.Z = true, (value-*m.Range.Mean) / *m.Range.SD
		}
	}
	return l
}

// expectedChange returns the first expected yearly change for age of the
// ranges found, with its citation.
func (l RangeLookup) expectedChange() (float64, string, bool) {
	for _, m := range l.Matches {
		if m.Range.ExpectedChangePerYear != nil {
			return *m.Range.ExpectedChangePerYear, m.Range.Citation, true
		}
	}
	return 0, "", false
}
