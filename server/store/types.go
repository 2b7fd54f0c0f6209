// Package store keeps longwave's patients, visits, recordings, conditions,
// markers, flags, display products, reference ranges, users and audit log in
// one SQLite file (modernc.org/sqlite, pure Go), with recordings kept by
// SHA-256 in a data folder beside it.
//
// The plain values it hands on to package trends and package server are
// those of package metrics/clinic, named here by aliases (the same types,
// not copies), so that trends need not import the store; the SQL lives in
// the other files.
package store

import "longwave/metrics/clinic"

// The stored vocabulary, defined in package clinic.
type (
	Patient        = clinic.Patient
	Visit          = clinic.Visit
	Recording      = clinic.Recording
	VisitRecord    = clinic.VisitRecord
	PatientCourse  = clinic.PatientCourse
	ReferenceRange = clinic.ReferenceRange
)

// Recording roles within a visit.
const (
	RoleSingle = clinic.RoleSingle
	RoleClosed = clinic.RoleClosed
	RoleOpen   = clinic.RoleOpen
)
