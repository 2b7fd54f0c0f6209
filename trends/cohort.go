package trends

import (
	"cmp"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"slices"
	"strconv"
	"strings"
	"time"

	"longwave/metrics"
	"longwave/metrics/clinic"
)

// DefaultFollowUpMonths is the follow-up interval when neither the patient
// nor the cohort sets one (one EEG a year; DESIGN.md, "Who it is for").
const DefaultFollowUpMonths = 12

// RetentionWindowYears is the half-width of a follow-up year's window: the
// visit of follow-up year k is one in [k − ½, k + ½) years after baseline, so
// that an annual visit a few weeks early or late counts for its year.
// Source: longwave design.
const RetentionWindowYears = 0.5

// SeriesRef names a marker series; an empty Region or State matches any (the
// first such series in course order).
type SeriesRef struct {
	Marker string `json:"marker"`
	Region string `json:"region"`
	State  string `json:"state"`
}

// DefaultMainMarkers are the markers whose direction the cohort shows.
func DefaultMainMarkers() []SeriesRef {
	return []SeriesRef{
		{Marker: metrics.PDRFrequency, Region: metrics.RegionPosterior, State: "closed"},
		{Marker: metrics.AlphaReactivity, Region: metrics.RegionPosterior, State: "open"},
		{Marker: metrics.ThetaAlphaRatio, Region: metrics.RegionPosterior, State: "closed"},
		{Marker: metrics.AperiodicExponent, Region: metrics.RegionGlobal, State: "closed"},
	}
}

// CohortOptions are what BuildCohort needs beside the patients.
type CohortOptions struct {
	Today time.Time
	// FollowUpMonths of the cohort, used for patients that set none (0: 12).
	FollowUpMonths  int
	SettingsVersion string
	SettingsHash    string
	// Reliability table (nil: DefaultReliability()).
	Reliability []Reliability
	// Markers whose direction each row shows (nil: DefaultMainMarkers()).
	Markers []SeriesRef
	// Norms are the clinic's control models (nil: none); where a main
	// marker has one, its reliable change index takes the noise from it.
	Norms *ControlNorms
}

// MarkerDirection is a row's summary of one main marker.
type MarkerDirection struct {
	Marker         string    `json:"marker"`
	Region         string    `json:"region"`
	State          string    `json:"state"`
	Points         int       `json:"points"` // comparable points
	Direction      Direction `json:"direction"`
	DirectionBasis string    `json:"direction_basis"`
	HasSlope       bool      `json:"has_slope"`
	SlopePerYear   float64   `json:"slope_per_year"`
	RCIKnown       bool      `json:"rci_known"`
	RC             float64   `json:"rc"`
	ReliableChange bool      `json:"reliable_change"`
	// Values are the comparable, dated values in date order (the cohort
	// screen draws them as a small line).
	Values []ChangePoint `json:"values"`
	// Verdict is the patient's slope against the clinic's control model
	// (CompareSlope over the comparable visits of known age), or why there
	// is none.
	Verdict SlopeVerdict `json:"verdict"`
}

// CohortRow is one patient's follow-up.
type CohortRow struct {
	PatientID      int64  `json:"patient_id"`
	Code           string `json:"code"`
	Group          string `json:"group"`
	Cohort         string `json:"cohort"`
	FollowUpMonths int    `json:"follow_up_months"`
	Visits         int    `json:"visits"`
	// ComparableVisits have no not_comparable flag at all.
	ComparableVisits int    `json:"comparable_visits"`
	FirstVisit       string `json:"first_visit"` // "" without dated visits
	LastVisit        string `json:"last_visit"`
	NextDue          string `json:"next_due"`
	Overdue          bool   `json:"overdue"`
	DaysOverdue      int    `json:"days_overdue"` // 0 when not overdue
	// LatestFlags are all flags of the last visit; Flagged is true when
	// there are any.
	LatestFlags []metrics.Flag    `json:"latest_flags"`
	Flagged     bool              `json:"flagged"`
	Markers     []MarkerDirection `json:"markers"`
	// ReliableChange is true when any main marker shows a reliable change.
	ReliableChange bool `json:"reliable_change"`
}

// RetentionYear is the share of patients with a visit in follow-up year
// Year among those whose baseline is at least Year years before today.
type RetentionYear struct {
	Year     int     `json:"year"`
	Eligible int     `json:"eligible"`
	Retained int     `json:"retained"`
	Share    float64 `json:"share"`
}

// Cohort is the follow-up of a list of patients.
type Cohort struct {
	Today          string      `json:"today"`
	FollowUpMonths int         `json:"follow_up_months"`
	Markers        []SeriesRef `json:"markers"`
	Rows           []CohortRow `json:"rows"`
	Patients       int         `json:"patients"`
	Visits         int         `json:"visits"`
	NonComparable  int         `json:"non_comparable_visits"`
	// NonComparableShare is NonComparable/Visits (0 without visits).
	NonComparableShare float64         `json:"non_comparable_share"`
	Retention          []RetentionYear `json:"retention"`
	Advisory           string          `json:"advisory"`
}

// BuildCohort makes one row per patient (in the given order) and the
// cohort's retention and share of non-comparable visits. Retention counts
// every visit, comparable or not. It is SummarisePatient over every patient
// and CohortFromEntries over the entries, as the store's kept entries are.
func BuildCohort(patients []clinic.PatientCourse, opt CohortOptions) Cohort {
	eo := EntryOptions{SettingsVersion: opt.SettingsVersion, SettingsHash: opt.SettingsHash, Markers: opt.Markers}
	entries := make([]CohortEntry, len(patients))
	for i, cp := range patients {
		entries[i] = SummarisePatient(cp.Patient, cp.Visits, eo)
	}
	c, err := CohortFromEntries(entries, opt)
	if err != nil {
		panic("trends: entries made for the cohort's own markers: " + err.Error())
	}
	return c
}

// comparableValue is pointOf without the reasons: the marker's value, its
// own standard error (0 without one) and whether it is comparable at this
// visit.
func comparableValue(a *assessed, id seriesID) (float64, float64, bool) {
	for _, m := range a.rec.Markers {
		if m.Name != id.name || m.Region != id.region || string(m.State) != id.state {
			continue
		}
		if !m.Computable {
			return 0, 0, false
		}
		for _, f := range a.flags {
			if f.Severity == metrics.NotComparable && affects(f.Markers, id.name, id.region, id.state) {
				return 0, 0, false
			}
		}
		se := 0.0
		if u := m.Uncertainty; u != nil && u.SE > 0 {
			se = u.SE
		}
		return m.Value, se, true
	}
	return 0, 0, false
}

func findSeries(as []assessed, ref SeriesRef) (seriesID, bool) {
	var found []seriesID
	for _, a := range as {
		for _, m := range a.rec.Markers {
			if m.Name == ref.Marker && (ref.Region == "" || m.Region == ref.Region) && (ref.State == "" || string(m.State) == ref.State) {
				id := seriesID{m.Name, m.Region, string(m.State)}
				if ref.Region != "" && ref.State != "" {
					return id, true
				}
				if !slices.Contains(found, id) {
					found = append(found, id)
				}
			}
		}
	}
	if len(found) == 0 {
		return seriesID{}, false
	}
	sortSeriesIDs(found)
	return found[0], true
}

// Sort keys of SortRows.
const (
	SortByCode       = "code"
	SortByOverdue    = "overdue"    // days overdue
	SortByLastVisit  = "last_visit" // date of the last visit
	SortByNextDue    = "next_due"
	SortByVisits     = "visits"
	SortByComparable = "comparable_visits"
	// SortByVerdict orders by the verdict of the first main marker (the
	// posterior dominant rhythm by default): declines faster than the
	// controls, rises faster, within the controls' range, no verdict.
	SortByVerdict = "verdict"
)

// rowDirection is the direction of a row's verdict, DirectionUnknown
// without one.
func rowDirection(r CohortRow) Direction {
	if v := RowVerdict(r); v.Known {
		return v.Direction
	}
	return DirectionUnknown
}

// RowVerdict is the verdict a row is sorted and filtered by: that of its
// first main marker (DirectionUnknown without one).
func RowVerdict(r CohortRow) SlopeVerdict {
	if len(r.Markers) == 0 {
		return SlopeVerdict{Direction: DirectionUnknown}
	}
	return r.Markers[0].Verdict
}

// verdictRank orders verdicts for SortByVerdict, declines faster first.
func verdictRank(r CohortRow) int {
	v := RowVerdict(r)
	if !v.Known {
		return 3
	}
	switch v.Direction {
	case DirectionDown:
		return 0
	case DirectionUp:
		return 1
	case DirectionSteady:
		return 2
	}
	return 3
}

// ErrSortKey is returned by SortRows for an unknown key.
var ErrSortKey = errors.New("trends: unknown sort key")

// SortRows sorts rows in place by key, ascending or descending, ties broken
// by code ascending. Empty dates sort before every date.
func SortRows(rows []CohortRow, key string, descending bool) error {
	var by func(a, b CohortRow) int
	switch key {
	case SortByCode:
		by = func(a, b CohortRow) int { return strings.Compare(a.Code, b.Code) }
	case SortByOverdue:
		by = func(a, b CohortRow) int { return cmp.Compare(a.DaysOverdue, b.DaysOverdue) }
	case SortByLastVisit:
		by = func(a, b CohortRow) int { return strings.Compare(a.LastVisit, b.LastVisit) }
	case SortByNextDue:
		by = func(a, b CohortRow) int { return strings.Compare(a.NextDue, b.NextDue) }
	case SortByVisits:
		by = func(a, b CohortRow) int { return cmp.Compare(a.Visits, b.Visits) }
	case SortByComparable:
		by = func(a, b CohortRow) int { return cmp.Compare(a.ComparableVisits, b.ComparableVisits) }
	case SortByVerdict:
		by = func(a, b CohortRow) int { return cmp.Compare(verdictRank(a), verdictRank(b)) }
	default:
		return fmt.Errorf("%w %q: want code, overdue, last_visit, next_due, visits, comparable_visits or verdict", ErrSortKey, key)
	}
	slices.SortStableFunc(rows, func(a, b CohortRow) int {
		c := by(a, b)
		if descending {
			c = -c
		}
		return cmp.Or(c, strings.Compare(a.Code, b.Code))
	})
	return nil
}

// RowFilter keeps the rows that meet every filter set.
type RowFilter struct {
	Overdue        bool `json:"overdue"`
	Flagged        bool `json:"flagged"`
	ReliableChange bool `json:"reliable_change"`
	// Verdict keeps the rows whose RowVerdict has this direction
	// (DirectionDown: declines faster than the controls, DirectionUp,
	// DirectionSteady: within, DirectionUnknown: no verdict); "" keeps all.
	Verdict Direction `json:"verdict,omitempty"`
}

// FilterRows returns the rows that meet f, in order (a new slice).
func FilterRows(rows []CohortRow, f RowFilter) []CohortRow {
	out := []CohortRow{}
	for _, r := range rows {
		if (f.Overdue && !r.Overdue) || (f.Flagged && !r.Flagged) || (f.ReliableChange && !r.ReliableChange) {
			continue
		}
		if f.Verdict != "" && rowDirection(r) != f.Verdict {
			continue
		}
		out = append(out, r)
	}
	return out
}

// WriteCohortCSV writes rows as CSV (RFC 4180, comma, header line first):
// code, group, cohort, follow_up_months, visits, comparable_visits,
// first_visit, last_visit, next_due, days_overdue, latest_flags (rule names
// joined by ";"), then per main marker of the first row
// <marker>/<region>/<state>_direction, _slope_per_year (empty when none),
// _rc (empty when none), _reliable, and reliable_change. Text cells that a
// spreadsheet would read as a formula (starting with = + - @) get a leading
// apostrophe.
func WriteCohortCSV(w io.Writer, rows []CohortRow) error {
	cw := csv.NewWriter(w)
	head := []string{"code", "group", "cohort", "follow_up_months", "visits", "comparable_visits",
		"first_visit", "last_visit", "next_due", "days_overdue", "latest_flags"}
	var markers []MarkerDirection
	if len(rows) > 0 {
		markers = rows[0].Markers
	}
	for _, m := range markers {
		k := seriesKey(m.Marker, m.Region, m.State)
		head = append(head, k+"_direction", k+"_slope_per_year", k+"_rc", k+"_reliable")
	}
	head = append(head, "reliable_change")
	if err := cw.Write(head); err != nil {
		return fmt.Errorf("trends: cohort csv: %w", err)
	}
	for i, r := range rows {
		var rules []string
		for _, f := range r.LatestFlags {
			if !slices.Contains(rules, f.Rule) {
				rules = append(rules, f.Rule)
			}
		}
		rec := []string{cell(r.Code), cell(r.Group), cell(r.Cohort), strconv.Itoa(r.FollowUpMonths),
			strconv.Itoa(r.Visits), strconv.Itoa(r.ComparableVisits), r.FirstVisit, r.LastVisit, r.NextDue,
			strconv.Itoa(r.DaysOverdue), strings.Join(rules, ";")}
		if len(r.Markers) != len(markers) {
			return fmt.Errorf("trends: cohort csv: row %d (%s): %d main markers, the first row has %d", i+1, r.Code, len(r.Markers), len(markers))
		}
		for _, m := range r.Markers {
			slope, rc := "", ""
			if m.HasSlope {
				slope = strconv.FormatFloat(m.SlopePerYear, 'g', 6, 64)
			}
			if m.RCIKnown {
				rc = strconv.FormatFloat(m.RC, 'g', 6, 64)
			}
			rec = append(rec, string(m.Direction), slope, rc, strconv.FormatBool(m.ReliableChange))
		}
		rec = append(rec, strconv.FormatBool(r.ReliableChange))
		if err := cw.Write(rec); err != nil {
			return fmt.Errorf("trends: cohort csv: row %d: %w", i+1, err)
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("trends: cohort csv: %w", err)
	}
	return nil
}

// cell guards a text cell against spreadsheet formula injection.
func cell(s string) string {
	if s != "" && strings.ContainsAny(s[:1], "=+-@\t\r") {
		return "'" + s
	}
	return s
}
