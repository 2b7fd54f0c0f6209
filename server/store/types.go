// Package store keeps longwave's patients, visits, recordings, conditions,
// markers, flags, display products, reference ranges, users and audit log in
// one SQLite file (modernc.org/sqlite, pure Go), with recordings kept by
// SHA-256 in a data folder beside it.
//
// This file holds the plain values the store hands on to package trends and
// package server; the SQL lives in the other files.
package store

import (
	"longwave/ingest"
	"longwave/metrics"
)

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
