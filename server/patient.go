package server

import (
	"errors"
	"html/template"
	"net/http"
	"strconv"
	"strings"

	"longwave/metrics"
	"longwave/server/store"
	"longwave/trends"
	"longwave/web"
)

// patientsPage lists every patient.
func (s *Server) patientsPage(w http.ResponseWriter, r *http.Request) {
	list, err := s.st.Patients(r.Context())
	if err != nil {
		s.fail(w, r, err)
		return
	}
	page := &web.PatientsPage{Frame: s.frame(r, "Patients", "/patients")}
	if can(r, permAdd) {
		page.AddURL = addURL("")
	}
	for _, p := range list {
		born := bornText(p.BirthDate, p.BirthYear, "")
		last := p.LastVisit
		if last == "" {
			last = "none"
		}
		page.Rows = append(page.Rows, web.PatientRow{Code: p.Code, URL: courseURL(p.Code), Sex: sexText(p.Sex),
			BirthYear: born, Cohort: p.Cohort, Visits: web.Cell{Text: strconv.Itoa(p.Visits)}, LastVisit: last})
	}
	s.render(w, r, http.StatusOK, page)
}

// patientCode reads the {code} path variable.
func patientCode(r *http.Request) (string, error) {
	code := pathVar(r, "code")
	if code == "" || len(code) > store.MaxCodeLength {
		return "", problem(http.StatusNotFound, "no such patient")
	}
	return code, nil
}

// ranges loads the literature sets and the configured set, validated.
func (s *Server) ranges(r *http.Request) (*trends.Ranges, error) {
	sets := append([]string(nil), trends.LiteratureSets...)
	if !strings.HasPrefix(s.cfg.RangeSet, trends.LiteratureSet) {
		sets = append(sets, s.cfg.RangeSet)
	}
	var rows []store.ReferenceRange
	for _, set := range sets {
		got, err := s.st.ReferenceRanges(r.Context(), set)
		if err != nil {
			return nil, err
		}
		rows = append(rows, got...)
	}
	if len(rows) == 0 {
		return nil, nil
	}
	return trends.NewRanges(rows)
}

// course builds a patient's course from the store.
func (s *Server) course(r *http.Request, code string) (trends.Course, error) {
	ctx := r.Context()
	p, err := s.st.PatientByCode(ctx, code)
	if errors.Is(err, store.ErrNotFound) {
		return trends.Course{}, problem(http.StatusNotFound, "no such patient")
	}
	if err != nil {
		return trends.Course{}, err
	}
	visits, err := s.st.CourseVisits(ctx, p.ID)
	if err != nil {
		return trends.Course{}, err
	}
	rg, err := s.ranges(r)
	if err != nil {
		return trends.Course{}, err
	}
	norms, err := s.controlNorms(r)
	if err != nil {
		return trends.Course{}, err
	}
	return trends.BuildCourse(p, visits, trends.CourseOptions{
		Ranges:          rg,
		Norms:           norms,
		SettingsVersion: s.settingsVersion,
		SettingsHash:    s.settingsHash,
		Today:           s.now(),
	}), nil
}

// auditedCourse reads the {code} of the path, builds that patient's
// course and audits the view, naming how it was read ("api", "summary").
func (s *Server) auditedCourse(r *http.Request, how string) (trends.Course, error) {
	code, err := patientCode(r)
	if err != nil {
		return trends.Course{}, err
	}
	c, err := s.course(r, code)
	if err != nil {
		return c, err
	}
	return c, s.audit(r, store.AuditPatientView, code+" ("+how+")")
}

// visitFlags returns a visit's flags as its patient's course sees them:
// stored flags, the settings check and the comparison with the previous
// visit.
func (s *Server) visitFlags(r *http.Request, p store.Patient, v store.VisitRecord) ([]metrics.Flag, error) {
	c, err := s.course(r, p.Code)
	if err != nil {
		return nil, err
	}
	for _, vv := range c.Visits {
		if vv.VisitID == v.Visit.ID {
			return vv.Flags, nil
		}
	}
	return v.Flags, nil
}

// courseSpectra reads the stored posterior eyes-closed spectra of a
// course's visits, the only ones its overlay draws (a visit without one is
// left out), in one query.
func (s *Server) courseSpectra(r *http.Request, c trends.Course) (map[int64][]metrics.Spectrum, error) {
	ids := make([]int64, 0, len(c.Visits))
	for _, v := range c.Visits {
		ids = append(ids, v.VisitID)
	}
	return s.st.OverlaySpectra(r.Context(), ids)
}

// coursePage shows a patient's course. The body is cached (cache.go); the
// view is audited on every request.
func (s *Server) coursePage(w http.ResponseWriter, r *http.Request) {
	code, err := patientCode(r)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	canAdd := can(r, permAdd)
	key := "course|" + code + "|" + strconv.FormatBool(canAdd)
	body, err := s.cachedBody(key, func() (template.HTML, error) {
		c, err := s.course(r, code)
		if err != nil {
			return "", err
		}
		spectra, err := s.courseSpectra(r, c)
		if err != nil {
			return "", err
		}
		return s.tpl.RenderCourseBody(courseBody(c, spectra, canAdd))
	})
	if err != nil {
		s.fail(w, r, err)
		return
	}
	if err := s.audit(r, store.AuditPatientView, code); err != nil {
		s.fail(w, r, err)
		return
	}
	s.render(w, r, http.StatusOK, &web.CoursePage{Frame: s.frame(r, "Course "+code, ""), Body: body})
}

func coursefacts(c trends.Course) []web.Pair {
	p := c.Patient
	born := bornText(p.BirthDate, p.BirthYear, "not given")
	due := c.NextDue
	if due == "" {
		due = "no visit yet"
	} else if c.DaysOverdue > 0 {
		due += " (" + strconv.Itoa(c.DaysOverdue) + " days overdue)"
	}
	return []web.Pair{
		{Label: "Sex", Value: sexText(p.Sex)},
		{Label: "Born", Value: born},
		{Label: "Group", Value: orNone(p.Group)},
		{Label: "Cohort", Value: orNone(p.Cohort)},
		{Label: "Visits", Value: strconv.Itoa(len(c.Visits))},
		{Label: "Follow-up", Value: "every " + strconv.Itoa(p.FollowUpMonths) + " months"},
		{Label: "Next due", Value: due},
		{Label: "Processing settings", Value: "version " + c.SettingsVersion},
	}
}

func verdictAge(v trends.VisitVerdict) string {
	if !v.AgeKnown {
		return "–"
	}
	return decimals(v.AgeYears, 1) + " y"
}

func verdictWords(v string) string {
	switch v {
	case trends.VerdictComparable:
		return "comparable"
	case trends.VerdictCautions:
		return "comparable, with cautions"
	case trends.VerdictPartly:
		return "not comparable for some markers"
	case trends.VerdictNotComparable:
		return "not comparable"
	default:
		return keyWords(v)
	}
}

func courseConditions(v trends.VisitVerdict) []web.Pair {
	c, q := v.Conditions, v.Quality
	return []web.Pair{
		{Label: "rate", Value: decimals(c.SampleRate, 2) + " Hz"},
		{Label: "resolution", Value: sig(c.UVPerStep) + " µV/step"},
		{Label: "high-pass", Value: frequencyText(c.Filters.HighPass)},
		{Label: "low-pass", Value: frequencyText(c.Filters.LowPass)},
		{Label: "line", Value: lineWords(q.LineFrequency, c.LineFrequency)},
		{Label: "channels", Value: strconv.Itoa(len(c.ChannelsFound)) + " of 19" + missingText(c.ChannelsMissing)},
		{Label: "clean closed", Value: decimals(q.CleanClosedSeconds, 0) + " s"},
		{Label: "clean open", Value: decimals(q.CleanOpenSeconds, 0) + " s"},
		{Label: "eye states", Value: periodSourceText(c.PeriodSource)},
		{Label: "settings", Value: v.SettingsVersion},
	}
}

func lineWords(fromSpectrum, declared float64) string {
	switch {
	case fromSpectrum > 0:
		return decimals(fromSpectrum, 0) + " Hz"
	case declared > 0:
		return decimals(declared, 0) + " Hz"
	default:
		return "not known"
	}
}

// chartedRegions gives, per marker, the region and state charted on the
// course (the one DESIGN.md defines the marker on); other series of the
// marker are in the API.
var chartedRegions = map[string][2]string{
	metrics.PDRFrequency:          {metrics.RegionPosterior, "closed"},
	metrics.PDRCentroid:           {metrics.RegionPosterior, "closed"},
	metrics.AlphaReactivity:       {metrics.RegionPosterior, ""},
	metrics.AlphaRatio:            {metrics.RegionPosterior, ""},
	metrics.ThetaAlphaRatio:       {metrics.RegionPosterior, "closed"},
	metrics.AperiodicExponent:     {metrics.RegionGlobal, "closed"},
	metrics.SlowingRatio:          {metrics.RegionGlobal, "closed"},
	metrics.RelAlpha:              {metrics.RegionPosterior, "closed"},
	metrics.RelTheta:              {metrics.RegionPosterior, "closed"},
	metrics.RelDelta:              {metrics.RegionPosterior, "closed"},
	metrics.RelBeta:               {metrics.RegionPosterior, "closed"},
	metrics.FrontalPosteriorAlpha: {"", "closed"},
	metrics.DrowsinessIndex:       {"", ""},
	metrics.PDRAsymmetry:          {"", ""},
}

// chartSeries picks one series per marker name, in the course's order: the
// region and state of chartedRegions when present, else the first.
func chartSeries(all []trends.Series) []trends.Series {
	var out []trends.Series
	seen := map[string]int{}
	for _, sr := range all {
		if sr.Marker == metrics.AperiodicOffset || sr.Marker == metrics.AperiodicR2 ||
			sr.Marker == metrics.PDRLeft || sr.Marker == metrics.PDRRight {
			continue // fit details and one-sided peaks: on the visit screen and in the API
		}
		want, has := chartedRegions[sr.Marker]
		fits := has && (want[0] == "" || want[0] == sr.Region) && (want[1] == "" || want[1] == sr.State)
		i, dup := seen[sr.Marker]
		switch {
		case !dup:
			seen[sr.Marker] = len(out)
			out = append(out, sr)
		case fits && !seriesFits(out[i], want, has):
			out[i] = sr
		}
	}
	return out
}

func seriesFits(sr trends.Series, want [2]string, has bool) bool {
	return has && (want[0] == "" || want[0] == sr.Region) && (want[1] == "" || want[1] == sr.State)
}
