package server

import (
	"net/http"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/server/store"
	"longwave/trends"
)

// The JSON API under /api/v1/ (README.md, "JSON API"). Errors are {"error": "..."}
// through the one error exit; everything else is a plain value marshalled
// by encoding/json.

// apiPatient is one patient of GET /api/v1/patients.
type apiPatient struct {
	Code       string `json:"code"`
	Sex        string `json:"sex"`
	BirthYear  int    `json:"birth_year,omitempty"`
	BirthDate  string `json:"birth_date,omitempty"`
	Group      string `json:"group"`
	Cohort     string `json:"cohort"`
	Visits     int    `json:"visits"`
	FirstVisit string `json:"first_visit"`
	LastVisit  string `json:"last_visit"`
	CourseURL  string `json:"course_url"`
}

func (s *Server) apiPatients(w http.ResponseWriter, r *http.Request) {
	list, err := s.st.Patients(r.Context())
	if err != nil {
		s.fail(w, r, err)
		return
	}
	out := make([]apiPatient, 0, len(list))
	for _, p := range list {
		out = append(out, apiPatient{Code: p.Code, Sex: p.Sex, BirthYear: p.BirthYear, BirthDate: p.BirthDate,
			Group: p.Group, Cohort: p.Cohort, Visits: p.Visits, FirstVisit: p.FirstVisit, LastVisit: p.LastVisit,
			CourseURL: "/api/v1" + courseURL(p.Code) + "/course"})
	}
	writeJSON(w, http.StatusOK, struct {
		Patients []apiPatient `json:"patients"`
	}{out})
}

// apiCourse answers GET /api/v1/patients/{code}/course with trends.Course.
func (s *Server) apiCourse(w http.ResponseWriter, r *http.Request) {
	c, err := s.auditedCourse(r, "api")
	if err != nil {
		s.fail(w, r, err)
		return
	}
	writeJSON(w, http.StatusOK, c)
}

// apiVisitBody is GET /api/v1/visits/{id}.
type apiVisitBody struct {
	ID              int64             `json:"id"`
	Patient         string            `json:"patient"`
	Date            string            `json:"date"`
	AgeYears        float64           `json:"age_years"`
	AgeKnown        bool              `json:"age_known"`
	Context         string            `json:"context"`
	Comparable      bool              `json:"comparable"`
	Flags           []metrics.Flag    `json:"flags"`
	SettingsVersion string            `json:"settings_version"`
	SettingsHash    string            `json:"settings_hash"`
	Conditions      ingest.Conditions `json:"conditions"`
	Quality         metrics.Quality   `json:"quality"`
	Markers         []metrics.Marker  `json:"markers"`
	Recordings      []apiRecording    `json:"recordings"`
	Display         *metrics.Display  `json:"display"`
}

type apiRecording struct {
	SHA256 string `json:"sha256"`
	Format string `json:"format"`
	Size   int64  `json:"size"`
	Role   string `json:"role"`
}

func (s *Server) apiVisit(w http.ResponseWriter, r *http.Request) {
	v, p, d, err := s.loadVisit(r)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	flags, err := s.visitFlags(r, p, v)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	if err := s.audit(r, store.AuditVisitView, p.Code+" "+v.Visit.Date+" (api)"); err != nil {
		s.fail(w, r, err)
		return
	}
	body := apiVisitBody{ID: v.Visit.ID, Patient: p.Code, Date: v.Visit.Date, AgeYears: v.Visit.AgeYears, AgeKnown: v.Visit.AgeKnown,
		Context: v.Visit.Context, Comparable: comparable(flags), Flags: nonNilFlags(flags),
		SettingsVersion: v.SettingsVersion, SettingsHash: v.SettingsHash, Conditions: v.Conditions, Quality: v.Quality,
		Markers: v.Markers, Display: d, Recordings: []apiRecording{}}
	for _, rec := range v.Recordings {
		body.Recordings = append(body.Recordings, apiRecording{SHA256: rec.SHA256, Format: rec.Format, Size: rec.Size, Role: rec.Role})
	}
	writeJSON(w, http.StatusOK, body)
}

func nonNilFlags(f []metrics.Flag) []metrics.Flag {
	if f == nil {
		return []metrics.Flag{}
	}
	return f
}

// apiCohortBody is GET /api/v1/cohort: the cohort's summary and its rows
// after the query's filters and sort (no paging: the API gives every row).
type apiCohortBody struct {
	Today              string                 `json:"today"`
	Patients           int                    `json:"patients"`
	Visits             int                    `json:"visits"`
	NonComparableShare float64                `json:"non_comparable_share"`
	Retention          []trends.RetentionYear `json:"retention"`
	Markers            []trends.SeriesRef     `json:"markers"`
	Filter             trends.RowFilter       `json:"filter"`
	Sort               string                 `json:"sort"`
	Rows               []trends.CohortRow     `json:"rows"`
	Advisory           string                 `json:"advisory"`
}

func (s *Server) apiCohort(w http.ResponseWriter, r *http.Request) {
	c, cq, rows, err := s.queriedCohort(r)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	writeJSON(w, http.StatusOK, apiCohortBody{Today: c.Today, Patients: c.Patients, Visits: c.Visits,
		NonComparableShare: c.NonComparableShare, Retention: c.Retention, Markers: c.Markers,
		Filter: cq.filter, Sort: cq.sortValue(), Rows: rows, Advisory: c.Advisory})
}
