// Package clinic holds the vocabulary of a clinic's records that the store
// keeps and package trends analyses: a pseudonymous patient, a visit, a
// stored recording, a visit with everything analysis made of it, a patient's
// whole course and a row of reference ranges. They are plain values without
// behaviour, so that the store (which fills them from SQLite) and trends
// (which judges them) can both use them without either importing the other:
// the pipe stays one way, ingest → metrics → store → trends → server.
package clinic

import (
	"strings"

	"longwave/ingest"
	"longwave/metrics"
)

// ControlGroup is the Patient.Group of a clinic's control participants
// (healthy people followed with the same equipment and settings), the group
// whose comparable visits make the clinic's own norms. The demo clinic marks
// its healthy agers so; a clinic marks its own with `longwave ingest --group
// control` (one visit, or a whole BIDS dataset whose participants all get
// the group). Any other group, or none, is not a control.
const ControlGroup = "control"

// Patient is a pseudonymous participant. Code is chosen by the clinic and
// unique; no name or identifier from a recording header is ever kept.
type Patient struct {
	ID   int64
	Code string
	// Sex is "F", "M", "O" or "" when not given.
	Sex string
	// BirthYear (0 when unknown) or, where the clinic wants it, BirthDate as
	// YYYY-MM-DD ("" when not given).
	BirthYear int
	BirthDate string
	// Group such as "control" or "patient" ("" when not given); Cohort the
	// study or clinic list the patient belongs to.
	Group  string
	Cohort string
	// FollowUpMonths is the follow-up interval (0: the default, 12 months).
	FollowUpMonths int
}

// IsControl reports whether the patient is one of the clinic's controls:
// Group is ControlGroup, ignoring case and surrounding spaces.
func (p Patient) IsControl() bool {
	return strings.EqualFold(strings.TrimSpace(p.Group), ControlGroup)
}

// Visit is one appointment with its resting EEG.
type Visit struct {
	ID        int64
	PatientID int64
	// Date as YYYY-MM-DD (the day of the recording, civil date).
	Date string
	// AgeYears at the visit, from the birth year or date (fractional years
	// with a birth date, mid-year estimate with a birth year); AgeKnown false
	// when the patient has neither.
	AgeYears float64
	AgeKnown bool
	// Context is free text such as medication or sleep the night before.
	Context string
}

// Recording roles within a visit.
const (
	RoleSingle = "single" // one file with eye-state periods (or none)
	RoleClosed = "closed" // the eyes-closed run of two
	RoleOpen   = "open"   // the eyes-open run of two
)

// Recording is a stored recording file of a visit.
type Recording struct {
	ID      int64
	VisitID int64
	SHA256  string // hex, lower case
	Format  string
	Size    int64
	Role    string
}

// VisitRecord is a visit with everything analysis made of it: the values
// package trends works on.
type VisitRecord struct {
	Visit           Visit
	Recordings      []Recording
	SettingsVersion string
	SettingsHash    string
	Conditions      ingest.Conditions
	Quality         metrics.Quality
	Markers         []metrics.Marker
	Flags           []metrics.Flag
}

// PatientCourse is a patient with all their visit records (the store hands
// them on ordered by date; trends sorts them again where order matters).
type PatientCourse struct {
	Patient Patient
	Visits  []VisitRecord
}

// ReferenceRange is one row of the reference_ranges table: a marker's range
// for one age band [AgeMin, AgeMax) from one source. Lower/Upper and
// Mean/SD are nil where the source gives none.
type ReferenceRange struct {
	ID     int64
	Set    string // "literature", or the name of a clinic's own set
	Marker string
	Region string
	State  string
	AgeMin float64
	AgeMax float64
	Lower  *float64
	Upper  *float64
	Mean   *float64
	SD     *float64
	// ExpectedChangePerYear for age, where the source gives one.
	ExpectedChangePerYear *float64
	Population            string
	Method                string
	Bands                 string
	Citation              string
	Status                string // "checked" or "from memory"
	Note                  string
}
