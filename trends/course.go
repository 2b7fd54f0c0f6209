package trends

import (
	"cmp"
	"slices"
	"strings"
	"time"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/metrics/clinic"
)

// RuleBadDate flags a visit whose date is not a civil date: it cannot be
// placed on the time axis.
const RuleBadDate = "visit_date_invalid"

// Visit verdicts.
const (
	VerdictComparable    = "comparable"               // no flag
	VerdictCautions      = "comparable_with_cautions" // cautions only
	VerdictPartly        = "partly_comparable"        // not comparable for some markers
	VerdictNotComparable = "not_comparable"           // not comparable for every marker
)

// AdvisoryCourse is shown with every course.
const AdvisoryCourse = "advisory: supports clinical judgement, does not replace it; ranges are literature or local references, not diagnoses; local practice and licensed clinicians decide"

// CourseOptions are what BuildCourse needs beside the visits.
type CourseOptions struct {
	// Ranges: literature and clinic ranges (nil: none loaded).
	Ranges *Ranges
	// LocalRanges from the clinic's controls (nil: none).
	LocalRanges *LocalRanges
	// SettingsVersion and SettingsHash of the current processing settings;
	// visits made with others are not comparable (CheckSettings).
	SettingsVersion string
	SettingsHash    string
	// Reliability table for the reliable change index; nil means
	// DefaultReliability(), an empty non-nil slice means none.
	Reliability []Reliability
	// Today, for the next due date; its civil date in its own location.
	Today time.Time
	// FollowUpMonths when the patient sets none (0: 12).
	FollowUpMonths int
	// Norms are the clinic's control models (BuildControlNorms; nil:
	// none). A series with a Known model takes from it the expected change
	// for age, the reliable change index's noise and the verdict on the
	// patient's slope.
	Norms *ControlNorms
}

// PatientInfo is the patient as a course shows it.
type PatientInfo struct {
	ID             int64  `json:"id"`
	Code           string `json:"code"`
	Sex            string `json:"sex"`
	BirthYear      int    `json:"birth_year"`
	BirthDate      string `json:"birth_date"`
	Group          string `json:"group"`
	Cohort         string `json:"cohort"`
	FollowUpMonths int    `json:"follow_up_months"` // in force: the patient's, else the default
}

// QualitySummary is a visit's analysis quality without maps.
type QualitySummary struct {
	LineFrequency       float64  `json:"line_frequency_hz"`
	LineFrequencySource string   `json:"line_frequency_source"`
	BadChannels         []string `json:"bad_channels"`
	UsedChannels        []string `json:"used_channels"`
	CleanClosedSeconds  float64  `json:"clean_closed_s"`
	CleanOpenSeconds    float64  `json:"clean_open_s"`
	CleanUnknownSeconds float64  `json:"clean_unknown_s"`
	RejectedShare       float64  `json:"rejected_share"`
	Drowsiness          float64  `json:"drowsiness_index"`
	DrowsinessKnown     bool     `json:"drowsiness_known"`
}

func summarise(q metrics.Quality) QualitySummary {
	return QualitySummary{
		LineFrequency: q.LineFrequency, LineFrequencySource: q.LineFrequencySource,
		BadChannels: q.BadChannels, UsedChannels: q.UsedChannels,
		CleanClosedSeconds:  q.CleanSeconds[ingest.EyesClosed],
		CleanOpenSeconds:    q.CleanSeconds[ingest.EyesOpen],
		CleanUnknownSeconds: q.CleanSeconds[ingest.EyesUnknown],
		RejectedShare:       q.RejectedShare, Drowsiness: q.Drowsiness, DrowsinessKnown: q.DrowsinessKnown,
	}
}

// VisitVerdict is one visit of a course with all its flags: those stored
// with the visit (CheckVisit at intake), the settings check, and the
// cautions against the previous visit (CompareVisits).
type VisitVerdict struct {
	VisitID  int64   `json:"visit_id"`
	Date     string  `json:"date"`
	AgeYears float64 `json:"age_years"`
	AgeKnown bool    `json:"age_known"`
	Context  string  `json:"context"`
	// Verdict is one of the Verdict… constants; Comparable is true when no
	// flag is not_comparable (cautions allowed).
	Verdict         string            `json:"verdict"`
	Comparable      bool              `json:"comparable"`
	Flags           []metrics.Flag    `json:"flags"`
	SettingsVersion string            `json:"settings_version"`
	SettingsHash    string            `json:"settings_hash"`
	Conditions      ingest.Conditions `json:"conditions"`
	Quality         QualitySummary    `json:"quality"`
}

// SeriesPoint is one visit's value of a marker.
type SeriesPoint struct {
	VisitID  int64   `json:"visit_id"`
	Date     string  `json:"date"`
	AgeYears float64 `json:"age_years"`
	AgeKnown bool    `json:"age_known"`
	Value    float64 `json:"value"`
	Unit     string  `json:"unit"`
	// Uncertainty is the value's own interval from the visit's data (settings
	// v2 onward; absent for v1 visits and values not computable).
	Uncertainty *metrics.Uncertainty `json:"uncertainty,omitempty"`
	// Computable is the marker's own verdict; Comparable is true when it is
	// computable and no not_comparable flag concerns this marker.
	Computable bool `json:"computable"`
	Comparable bool `json:"comparable"`
	// Reasons why the point is not computable or not comparable; Cautions
	// the caution flags that concern this marker.
	Reasons  []string `json:"reasons"`
	Cautions []string `json:"cautions"`
	// Literature (and clinic) ranges at the visit's age, the value placed.
	Literature RangeLookup `json:"literature"`
	// Local range from the clinic's controls at the visit's age.
	Local LocalCheck `json:"local"`
}

// Series is one marker (name, region, state) over every visit of a course,
// with the change figures over its comparable points.
type Series struct {
	Key    string        `json:"key"`
	Marker string        `json:"marker"`
	Region string        `json:"region"`
	State  string        `json:"state"`
	Unit   string        `json:"unit"`
	Points []SeriesPoint `json:"points"`
	Change Change        `json:"change"`
	// LiteratureNotes are the published ageing figures that may be shown
	// beside the clinic norm (LiteratureNotes), advisory, each with its
	// source; empty for markers the literature says nothing usable of.
	LiteratureNotes []LiteratureNote `json:"literature_notes"`
}

// Course is a patient's course: every visit with its verdict, and every
// marker series with ranges and change figures.
type Course struct {
	Patient         PatientInfo    `json:"patient"`
	SettingsVersion string         `json:"settings_version"`
	SettingsHash    string         `json:"settings_hash"`
	Today           string         `json:"today"`
	Visits          []VisitVerdict `json:"visits"`
	Series          []Series       `json:"series"`
	// Follow-up from the last visit: NextDue (YYYY-MM-DD, "" without
	// visits) and DaysOverdue (0 when not overdue).
	NextDue     string `json:"next_due"`
	DaysOverdue int    `json:"days_overdue"`
	Advisory    string `json:"advisory"`
}

// assessed is a visit in date order with its parsed date and all flags.
type assessed struct {
	rec        *clinic.VisitRecord
	date       civilDate
	dateOK     bool
	flags      []metrics.Flag
	comparable bool
}

// assess sorts a patient's visits by date (then ID; unparseable dates last)
// and gathers each visit's flags: stored, settings, and against the visit
// before it.
func assess(visits []clinic.VisitRecord, version, hash string) []assessed {
	out := make([]assessed, len(visits))
	for i := range visits {
		a := &out[i]
		a.rec = &visits[i]
		d, err := parseDate(visits[i].Visit.Date)
		a.date, a.dateOK = d, err == nil
	}
	slices.SortStableFunc(out, func(a, b assessed) int {
		if a.dateOK != b.dateOK {
			if a.dateOK {
				return -1
			}
			return 1
		}
		return cmp.Or(a.date.t.Compare(b.date.t), cmp.Compare(a.rec.Visit.ID, b.rec.Visit.ID))
	})
	for i := range out {
		a := &out[i]
		a.flags = append(a.flags, a.rec.Flags...)
		if !a.dateOK {
			a.flags = append(a.flags, metrics.Flag{Rule: RuleBadDate, Severity: metrics.NotComparable,
				Reason: "visit date " + quote(a.rec.Visit.Date) + " is not a date YYYY-MM-DD: it cannot be placed in time", Source: sourceDesign})
		}
		a.flags = append(a.flags, CheckSettings(*a.rec, version, hash)...)
		if i > 0 {
			a.flags = append(a.flags, CompareVisits(*out[i-1].rec, *a.rec)...)
		}
		a.comparable = true
		for _, f := range a.flags {
			if f.Severity == metrics.NotComparable {
				a.comparable = false
			}
		}
	}
	return out
}

func quote(s string) string { return "\"" + s + "\"" }

func verdictOf(flags []metrics.Flag) string {
	v := VerdictComparable
	for _, f := range flags {
		switch {
		case f.Severity == metrics.NotComparable && len(f.Markers) == 0:
			return VerdictNotComparable
		case f.Severity == metrics.NotComparable:
			v = VerdictPartly
		case v == VerdictComparable:
			v = VerdictCautions
		}
	}
	return v
}

// pointOf evaluates one visit's value of one marker series.
func pointOf(a *assessed, name, region, state string) (SeriesPoint, metrics.Marker) {
	v := a.rec.Visit
	p := SeriesPoint{VisitID: v.ID, Date: v.Date, AgeYears: v.AgeYears, AgeKnown: v.AgeKnown}
	var m metrics.Marker
	found := false
	for _, x := range a.rec.Markers {
		if x.Name == name && x.Region == region && string(x.State) == state {
			m, found = x, true
			break
		}
	}
	if !found {
		p.Reasons = append(p.Reasons, "not among this visit's markers")
		return p, m
	}
	p.Value, p.Unit, p.Computable, p.Uncertainty = m.Value, m.Unit, m.Computable, m.Uncertainty
	if !m.Computable {
		r := m.Reason
		if r == "" {
			r = "not computable"
		}
		p.Reasons = append(p.Reasons, r)
	}
	p.Comparable = m.Computable
	for _, f := range a.flags {
		if !affects(f.Markers, name, region, state) {
			continue
		}
		if f.Severity == metrics.NotComparable {
			p.Comparable = false
			p.Reasons = append(p.Reasons, f.Reason)
		} else {
			p.Cautions = append(p.Cautions, f.Reason)
		}
	}
	return p, m
}

type seriesID struct{ name, region, state string }

// seriesIDs lists the marker series found in the visits, in the order of
// MarkerNames, then region, then state.
func seriesIDs(visits []assessed) []seriesID {
	var out []seriesID
	for _, a := range visits {
		for _, m := range a.rec.Markers {
			id := seriesID{m.Name, m.Region, string(m.State)}
			if !slices.Contains(out, id) {
				out = append(out, id)
			}
		}
	}
	sortSeriesIDs(out)
	return out
}

// sortSeriesIDs orders series by MarkerNames, then name, region and state.
func sortSeriesIDs(ids []seriesID) {
	rank := func(name string) int {
		for i, s := range markerSpans {
			if s.name == name {
				return i
			}
		}
		return len(markerSpans)
	}
	slices.SortFunc(ids, func(a, b seriesID) int {
		return cmp.Or(cmp.Compare(rank(a.name), rank(b.name)), strings.Compare(a.name, b.name),
			strings.Compare(a.region, b.region), strings.Compare(a.state, b.state))
	})
}

// changeOf computes the change figures of one series from its points.
func changeOf(points []SeriesPoint, id seriesID, table []Reliability, exp ExpectedRate, norm seriesNorm) Change {
	var cps []ChangePoint
	for _, p := range points {
		if p.Comparable {
			cps = append(cps, ChangePoint{VisitID: p.VisitID, Date: p.Date, Value: p.Value})
		}
	}
	rel, ok := findReliability(table, id.name, id.region, id.state)
	return computeChange(cps, rel, ok, exp, norm)
}

func followUpMonths(p clinic.Patient, def int) int {
	switch {
	case p.FollowUpMonths > 0:
		return p.FollowUpMonths
	case def > 0:
		return def
	}
	return DefaultFollowUpMonths
}

// nextDue returns the next due date after the last dated visit and the
// days overdue at today (0 when not overdue).
func nextDue(visits []assessed, months int, today civilDate) (string, int) {
	for i := len(visits) - 1; i >= 0; i-- {
		if visits[i].dateOK {
			due := visits[i].date.addMonths(months)
			return due.String(), max(0, today.daysSince(due))
		}
	}
	return "", 0
}

// BuildCourse gathers a patient's course: every visit with its verdict and
// flags, and every marker series with per-visit values, comparability for
// that marker (a flag concerns only its markers), the ranges at the visit's
// age and the change figures over the comparable points. The expected
// yearly change for age is taken from the ranges at the baseline age.
func BuildCourse(p clinic.Patient, visits []clinic.VisitRecord, opt CourseOptions) Course {
	table := opt.Reliability
	if table == nil {
		table = DefaultReliability()
	}
	months := followUpMonths(p, opt.FollowUpMonths)
	today := dateOf(opt.Today)
	c := Course{
		Patient: PatientInfo{ID: p.ID, Code: p.Code, Sex: p.Sex, BirthYear: p.BirthYear, BirthDate: p.BirthDate,
			Group: p.Group, Cohort: p.Cohort, FollowUpMonths: months},
		SettingsVersion: opt.SettingsVersion, SettingsHash: opt.SettingsHash,
		Today: today.String(), Advisory: AdvisoryCourse,
		Visits: []VisitVerdict{}, Series: []Series{},
	}
	as := assess(visits, opt.SettingsVersion, opt.SettingsHash)
	for _, a := range as {
		v := a.rec
		c.Visits = append(c.Visits, VisitVerdict{
			VisitID: v.Visit.ID, Date: v.Visit.Date, AgeYears: v.Visit.AgeYears, AgeKnown: v.Visit.AgeKnown,
			Context: v.Visit.Context, Verdict: verdictOf(a.flags), Comparable: a.comparable,
			Flags: nonNil(a.flags), SettingsVersion: v.SettingsVersion, SettingsHash: v.SettingsHash,
			Conditions: v.Conditions, Quality: summarise(v.Quality),
		})
	}
	c.NextDue, c.DaysOverdue = nextDue(as, months, today)
	for _, id := range seriesIDs(as) {
		s := Series{Key: seriesKey(id.name, id.region, id.state), Marker: id.name, Region: id.region, State: id.state,
			LiteratureNotes: nonNil(LiteratureNotes(id.name))}
		ses := make([]float64, 0, len(as)) // each point's own standard error, 0 without one
		for i := range as {
			pt, m := pointOf(&as[i], id.name, id.region, id.state)
			if s.Unit == "" {
				s.Unit = m.Unit
			}
			se := 0.0
			if u := m.Uncertainty; u != nil && u.SE > 0 {
				se = u.SE
			}
			ses = append(ses, se)
			pt.Reasons, pt.Cautions = nonNil(pt.Reasons), nonNil(pt.Cautions)
			if pt.AgeKnown {
				pt.Literature = opt.Ranges.Lookup(id.name, id.region, id.state, pt.AgeYears)
				if pt.Computable {
					pt.Literature = pt.Literature.Place(pt.Value)
				}
			} else {
				pt.Literature = unknownAge(id.name, id.region, id.state)
			}
			pt.Literature.Matches = nonNil(pt.Literature.Matches)
			pt.Local = opt.LocalRanges.Check(id.name, id.region, id.state, pt.AgeYears, pt.AgeKnown, pt.Value, pt.Computable)
			s.Points = append(s.Points, pt)
		}
		exp := ExpectedRate{}
		for _, pt := range s.Points {
			if pt.Comparable {
				if pt.AgeKnown {
					if r, src, ok := pt.Literature.expectedChange(); ok {
						exp = ExpectedRate{Known: true, PerYear: r, Source: src}
					}
				}
				break
			}
		}
		norm := opt.Norms.find(id.name, id.region, id.state)
		s.Change = changeOf(s.Points, id, table, exp, norm)
		s.Change.Verdict = patientVerdict(s.Points, ses, norm.ControlNorm)
		c.Series = append(c.Series, s)
	}
	return c
}

// nonNil turns a nil slice into an empty one so that JSON shows [].
func nonNil[T any](s []T) []T {
	if s == nil {
		return []T{}
	}
	return s
}
