// Package trends turns a patient's stored visits into a course: which visits
// (and which markers of a visit) can be compared, where each value lies
// against age-adjusted reference ranges with their sources, and how each
// marker changed over the comparable visits. It also builds the cohort
// follow-up and local reference ranges from a clinic's control participants.
// It knows nothing of HTTP or SQL: plain values in, plain values out, every
// exported value a struct with JSON tags (no maps). Its inputs are the
// vocabulary of package metrics/clinic (Patient, VisitRecord, PatientCourse,
// ReferenceRange), which the store fills; trends imports no longwave/server
// package (TestNoServerImports).
//
// # Comparability (rules.go, thresholds.go)
//
//	CheckVisit(VisitQuality{Conditions, Quality, Markers}) []metrics.Flag   // single-visit gates, run at intake
//	CheckSettings(v clinic.VisitRecord, version, hash string) []metrics.Flag // other processing settings
//	CompareVisits(prev, cur clinic.VisitRecord) []metrics.Flag              // cautions between two visits
//	Rules() []Rule                                                         // the rule catalogue for people
//	IntervalLimits() []IntervalLimit                                       // widest interval compared, per marker
//	FlagAffects(f metrics.Flag, m metrics.Marker) bool
//
// A flag's Markers are marker names, "name/region" or "name/region/state";
// empty means every marker. A point is comparable for a marker when the
// marker is computable and no not_comparable flag concerns it; cautions are
// shown but never exclude a point. All thresholds and their sources are in
// thresholds.go. "Too little data" is judged by each marker's own interval
// where markers carry one (settings v2: interval_too_wide, per marker; short
// clean data a caution), and by the clean eyes-closed seconds where they do
// not (settings v1: little_clean_closed, every marker).
//
// # Reference ranges (ranges.go, rangefile.go)
//
//	NewRanges(rows []clinic.ReferenceRange) (*Ranges, error)        // validates; errors name the row
//	ParseRangesTSV(r io.Reader, set string) ([]clinic.ReferenceRange, error) // a clinic's own file; errors name the line
//	(*Ranges).Lookup(marker, region, state string, age float64) RangeLookup
//	(RangeLookup).Place(value float64) RangeLookup                  // below/within/above, z where mean and SD exist
//	NoRangeReason(marker string) string
//
// The literature rows of migrations/0002_reference_ranges.sql sit in the sets
// LiteratureSets (one source per set, so that overlapping populations do not
// overlap within a set); load the rows of all of them into one NewRanges.
// Every RangeLookup carries Advisory ("advisory, literature reference, not a
// diagnosis", or the clinic equivalent) and each match its Citation and
// Status.
//
// # Change over time (change.go)
//
//	FitSlope(years, values []float64) Slope              // OLS slope per year, 95 % CI from Student's t (gonum distuv)
//	ReliableChangeIndex(x1, x2 float64, rel Reliability) ReliableChange // Jacobson & Truax (1991)
//	ComputeChange(points []ChangePoint, rel Reliability, relOK bool, exp ExpectedRate) Change
//	TQuantile975(df int) float64
//	DefaultReliability() []Reliability                   // provisional PDR row only
//
// # Course (course.go) — for the patient screen and the API
//
//	BuildCourse(p clinic.Patient, visits []clinic.VisitRecord, opt CourseOptions) Course
//
//	CourseOptions{Ranges *Ranges; LocalRanges *LocalRanges; SettingsVersion, SettingsHash string;
//	              Reliability []Reliability (nil: default); Today time.Time; FollowUpMonths int}
//	Course{Patient PatientInfo; SettingsVersion, SettingsHash, Today string; Visits []VisitVerdict;
//	       Series []Series; NextDue string; DaysOverdue int; Advisory string}
//	VisitVerdict{VisitID; Date; AgeYears; AgeKnown; Context; Verdict ("comparable",
//	       "comparable_with_cautions", "partly_comparable", "not_comparable"); Comparable bool;
//	       Flags []metrics.Flag; SettingsVersion; SettingsHash; Conditions ingest.Conditions; Quality QualitySummary}
//	Series{Key, Marker, Region, State, Unit string; Points []SeriesPoint; Change Change}
//	SeriesPoint{VisitID; Date; AgeYears; AgeKnown; Value; Unit; Uncertainty *metrics.Uncertainty; Computable; Comparable;
//	       Reasons, Cautions []string; Literature RangeLookup; Local LocalCheck}
//	Change{Points; Baseline…/Latest… (VisitID, Date, Value); HasFromBaseline; FromBaseline; Years;
//	       Slope Slope; Reliable ReliableChange; Expected ExpectedForAge; Verdict SlopeVerdict;
//	       Direction; DirectionBasis}
//	Series.LiteratureNotes []LiteratureNote                     // published ageing notes, advisory
//
// # Control norms (controls.go; the model in norm.go and verdict.go)
//
//	BuildControlNorms(patients []clinic.PatientCourse, opt ControlNormOptions) *ControlNorms
//	(*ControlNorms).Find(marker, region, state string) ControlNorm // not Known, with a Reason, when none
//
// With CourseOptions.Norms, a series whose control model is Known takes from
// it the expected change for age (Expected.Basis "clinic controls"), the
// standard error of measurement of the reliable change index (the model's
// residual SD; Reliable.SEBasis says so, the literature r is the fallback)
// and the verdict on the patient's own slope (CompareSlope). CohortOptions.Norms
// does the same for the cohort's reliable change.
//
// Visits are in date order; every series has one point per visit (a visit
// without the marker gives a point that is not computable), so charts share
// an x axis.
//
// # Cohort (cohort.go) — for the cohort screen and `longwave export`
//
//	BuildCohort(patients []clinic.PatientCourse, opt CohortOptions) Cohort
//	SortRows(rows []CohortRow, key string, descending bool) error // code, overdue, last_visit, next_due, visits, comparable_visits
//	FilterRows(rows []CohortRow, f RowFilter) []CohortRow        // RowFilter{Overdue, Flagged, ReliableChange}
//	WriteCohortCSV(w io.Writer, rows []CohortRow) error
//
//	CohortOptions{Today time.Time; FollowUpMonths int (0: 12); SettingsVersion, SettingsHash string;
//	              Reliability []Reliability; Markers []SeriesRef (nil: DefaultMainMarkers())}
//	Cohort{Today; FollowUpMonths; Markers; Rows []CohortRow; Patients; Visits; NonComparable;
//	       NonComparableShare; Retention []RetentionYear; Advisory}
//	CohortRow{PatientID; Code; Group; Cohort; FollowUpMonths; Visits; ComparableVisits; FirstVisit;
//	       LastVisit; NextDue; Overdue; DaysOverdue; LatestFlags; Flagged; Markers []MarkerDirection; ReliableChange}
//
// BuildCohort is the two halves below; the store keeps the first per patient
// (entry.go, entrycodec.go) so that the cohort screen never reads every visit:
//
//	SummarisePatient(p clinic.Patient, visits []clinic.VisitRecord, opt EntryOptions) CohortEntry // no norms, no today
//	CohortFromEntries(entries []CohortEntry, opt CohortOptions) (Cohort, error)                 // norms and today
//	AppendEntry(dst []byte, e *CohortEntry) []byte; DecodeEntry(b []byte) (CohortEntry, error) // EntryFormat
//
// # Local ranges (local.go)
//
//	BuildLocalRanges(patients []clinic.PatientCourse, opt LocalOptions) *LocalRanges
//	(*LocalRanges).Check(marker, region, state string, age float64, ageKnown bool, value float64, computable bool) LocalCheck
//	FitPrediction(ages, values []float64) (Prediction, error); (Prediction).At(x0) (yhat, lower, upper)
//
// Dates are civil dates "YYYY-MM-DD"; years between dates are days/365.25.
package trends
