package main

import (
	"encoding/csv"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"
	"time"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/server/store"
	"longwave/trends"
)

// safeHarborAgeCap: HIPAA Safe Harbor (45 CFR 164.514(b)(2)(i)(C)) removes
// ages over 89, which must be aggregated into a single category of 90 or
// older; an exported age of 90 means "90 or older".
const safeHarborAgeCap = 90

// exportRow is one visit and marker, the unit a statistician works on.
type exportRow struct {
	Patient        string   `json:"patient"`
	Sex            string   `json:"sex"`
	Group          string   `json:"group"`
	Cohort         string   `json:"cohort"`
	VisitDate      string   `json:"visit_date,omitempty"`
	DaysSinceFirst *int     `json:"days_since_first_visit,omitempty"`
	AgeYears       *float64 `json:"age_years"`
	Marker         string   `json:"marker"`
	Region         string   `json:"region"`
	State          string   `json:"state"`
	Value          *float64 `json:"value"`
	Unit           string   `json:"unit"`
	// Uncertainty is the value's own interval (settings v2 onward; absent
	// for v1 visits and values not computable).
	Uncertainty     *metrics.Uncertainty `json:"uncertainty,omitempty"`
	Computable      bool                 `json:"computable"`
	Reason          string               `json:"reason"`
	SettingsVersion string               `json:"settings_version"`
	SettingsHash    string               `json:"settings_hash"`
	SampleRate      float64              `json:"sample_rate_hz"`
	UVPerStep       float64              `json:"uv_per_step"`
	HighPass        string               `json:"high_pass_hz"`
	LowPass         string               `json:"low_pass_hz"`
	LineFrequency   float64              `json:"line_frequency_hz"`
	Reference       string               `json:"reference"`
	Equipment       string               `json:"equipment,omitempty"`
	PeriodSource    string               `json:"period_source"`
	CleanClosed     float64              `json:"clean_closed_s"`
	CleanOpen       float64              `json:"clean_open_s"`
	RejectedShare   float64              `json:"rejected_share"`
	Flags           string               `json:"flags"`
	Comparable      string               `json:"comparable"`
}

func init() {
	register(&command{
		name: "export",
		summary: "Write one row per visit and marker, with conditions and flags, as CSV or JSON for R or pandas.\n" +
			"--deidentify replaces dates by days since the patient's first visit, caps ages at 90 and leaves out the equipment text.",
		more: `Columns: patient, sex, group, cohort, visit_date (or days_since_first_visit),
age_years, marker, region, state, value, unit, interval_se, interval_low,
interval_high, interval_level, interval_method, interval_resamples (the
value's own interval from settings v2 on, empty where a visit has none),
computable, reason,
settings_version, settings_hash, sample_rate_hz, uv_per_step, high_pass_hz,
low_pass_hz, line_frequency_hz, reference, equipment, period_source,
clean_closed_s, clean_open_s, rejected_share, flags (rule:severity joined by
"; "), comparable (yes when no not-comparable flag concerns the marker, it
was computable, and it was made by the current settings). A value that is
not computable is empty, never a number. Free-text visit context is never
exported. The age cap follows the HIPAA Safe Harbor rule: ages over 89 are
aggregated into 90 or older. The patient code is the clinic's pseudonym and
is kept.
`,
		setup: func(fs *flag.FlagSet, e *env) func([]string) error {
			db := dbFlag(fs)
			format := fs.String("format", "csv", "output `FORMAT`: csv or json")
			deid := fs.Bool("deidentify", false, "replace dates by days since the first visit, cap ages at 90, leave out equipment")
			outPath := fs.String("out", "", "write to `FILE` instead of standard output")
			return func(args []string) error {
				if len(args) > 0 {
					return usagef("export takes no arguments")
				}
				if *format != "csv" && *format != "json" {
					return usagef("--format %q: want csv or json", *format)
				}
				st, err := openStore(*db)
				if err != nil {
					return err
				}
				defer st.Close()
				courses, err := st.AllVisitRecords(e.ctx)
				if err != nil {
					return err
				}
				settings := metrics.Current()
				rows, err := exportRows(courses, settings.Version, settings.Hash(), *deid)
				if err != nil {
					return err
				}
				w := e.stdout
				var f *os.File
				if *outPath != "" {
					if f, err = os.Create(*outPath); err != nil {
						return err
					}
					w = f
				}
				if *format == "csv" {
					err = writeCSV(w, rows, *deid)
				} else {
					enc := json.NewEncoder(w)
					enc.SetIndent("", " ")
					err = enc.Encode(rows)
				}
				if f != nil {
					if cerr := f.Close(); err == nil {
						err = cerr
					}
					if err != nil {
						os.Remove(*outPath)
					}
				}
				return err
			}
		},
	})
}

func exportRows(courses []store.PatientCourse, version, hash string, deid bool) ([]exportRow, error) {
	rows := []exportRow{}
	for _, pc := range courses {
		var first time.Time
		for i, v := range pc.Visits {
			d, err := time.Parse(time.DateOnly, v.Visit.Date)
			if err != nil {
				return nil, fmt.Errorf("visit %d: date %q: %w", v.Visit.ID, v.Visit.Date, err)
			}
			if i == 0 {
				first = d // visits come ordered by date
			}
			flags := append([]metrics.Flag(nil), v.Flags...)
			flags = append(flags, trends.CheckSettings(v, version, hash)...)
			if i > 0 {
				flags = append(flags, trends.CompareVisits(pc.Visits[i-1], v)...)
			}
			c, q := v.Conditions, v.Quality
			base := exportRow{
				Patient: pc.Patient.Code, Sex: pc.Patient.Sex, Group: pc.Patient.Group, Cohort: pc.Patient.Cohort,
				SettingsVersion: v.SettingsVersion, SettingsHash: v.SettingsHash,
				SampleRate: c.SampleRate, UVPerStep: c.UVPerStep,
				HighPass: edge(c.Filters.HighPass), LowPass: edge(c.Filters.LowPass),
				LineFrequency: lineFrequency(c, q), Reference: c.Reference, PeriodSource: string(c.PeriodSource),
				CleanClosed: q.CleanSeconds[ingest.EyesClosed], CleanOpen: q.CleanSeconds[ingest.EyesOpen],
				RejectedShare: q.RejectedShare,
			}
			if deid {
				days := int(d.Sub(first).Hours()/24 + 0.5)
				base.DaysSinceFirst = &days
			} else {
				base.VisitDate = v.Visit.Date
				base.Equipment = c.Equipment
			}
			if v.Visit.AgeKnown {
				age := v.Visit.AgeYears
				if deid && age >= safeHarborAgeCap {
					age = safeHarborAgeCap
				}
				base.AgeYears = &age
			}
			for _, m := range v.Markers {
				r := base
				r.Marker, r.Region, r.State, r.Unit = m.Name, m.Region, string(m.State), m.Unit
				r.Computable, r.Reason = m.Computable, m.Reason
				if m.Computable {
					val := m.Value
					r.Value = &val
					r.Uncertainty = m.Uncertainty
				}
				var names []string
				comparable := m.Computable
				for _, f := range flags {
					if !trends.FlagAffects(f, m) {
						continue
					}
					names = append(names, f.Rule+":"+string(f.Severity))
					if f.Severity == metrics.NotComparable {
						comparable = false
					}
				}
				r.Flags = strings.Join(names, "; ")
				r.Comparable = "no"
				if comparable {
					r.Comparable = "yes"
				}
				rows = append(rows, r)
			}
		}
	}
	return rows, nil
}

func lineFrequency(c ingest.Conditions, q metrics.Quality) float64 {
	if q.LineFrequency > 0 {
		return q.LineFrequency
	}
	return c.LineFrequency
}

func edge(f ingest.Frequency) string {
	if !f.Known {
		return ""
	}
	return num(f.Hz)
}

func num(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// csvColumns are the CSV export's columns in order; deidentified ones are
// left out of a --deidentify export, and when is the visit date or, in a
// --deidentify export, the days since the first visit.
var csvColumns = []struct {
	name, deidName string
	identifying    bool
	text           func(r exportRow, deid bool) string
}{
	{"patient", "", false, func(r exportRow, _ bool) string { return r.Patient }},
	{"sex", "", false, func(r exportRow, _ bool) string { return r.Sex }},
	{"group", "", false, func(r exportRow, _ bool) string { return r.Group }},
	{"cohort", "", false, func(r exportRow, _ bool) string { return r.Cohort }},
	{"visit_date", "days_since_first_visit", false, func(r exportRow, deid bool) string {
		if deid {
			return strconv.Itoa(*r.DaysSinceFirst)
		}
		return r.VisitDate
	}},
	{"age_years", "", false, func(r exportRow, _ bool) string { return optNum(r.AgeYears) }},
	{"marker", "", false, func(r exportRow, _ bool) string { return r.Marker }},
	{"region", "", false, func(r exportRow, _ bool) string { return r.Region }},
	{"state", "", false, func(r exportRow, _ bool) string { return r.State }},
	{"value", "", false, func(r exportRow, _ bool) string { return optNum(r.Value) }},
	{"unit", "", false, func(r exportRow, _ bool) string { return r.Unit }},
	{"interval_se", "", false, interval(func(u *metrics.Uncertainty) string { return num(u.SE) })},
	{"interval_low", "", false, interval(func(u *metrics.Uncertainty) string { return num(u.Low) })},
	{"interval_high", "", false, interval(func(u *metrics.Uncertainty) string { return num(u.High) })},
	{"interval_level", "", false, interval(func(u *metrics.Uncertainty) string { return num(u.Level) })},
	{"interval_method", "", false, interval(func(u *metrics.Uncertainty) string { return u.Method })},
	{"interval_resamples", "", false, interval(func(u *metrics.Uncertainty) string { return strconv.Itoa(u.Resamples) })},
	{"computable", "", false, func(r exportRow, _ bool) string { return strconv.FormatBool(r.Computable) }},
	{"reason", "", false, func(r exportRow, _ bool) string { return r.Reason }},
	{"settings_version", "", false, func(r exportRow, _ bool) string { return r.SettingsVersion }},
	{"settings_hash", "", false, func(r exportRow, _ bool) string { return r.SettingsHash }},
	{"sample_rate_hz", "", false, func(r exportRow, _ bool) string { return num(r.SampleRate) }},
	{"uv_per_step", "", false, func(r exportRow, _ bool) string { return num(r.UVPerStep) }},
	{"high_pass_hz", "", false, func(r exportRow, _ bool) string { return r.HighPass }},
	{"low_pass_hz", "", false, func(r exportRow, _ bool) string { return r.LowPass }},
	{"line_frequency_hz", "", false, func(r exportRow, _ bool) string { return num(r.LineFrequency) }},
	{"reference", "", false, func(r exportRow, _ bool) string { return r.Reference }},
	{"equipment", "", true, func(r exportRow, _ bool) string { return r.Equipment }},
	{"period_source", "", false, func(r exportRow, _ bool) string { return r.PeriodSource }},
	{"clean_closed_s", "", false, func(r exportRow, _ bool) string { return num(r.CleanClosed) }},
	{"clean_open_s", "", false, func(r exportRow, _ bool) string { return num(r.CleanOpen) }},
	{"rejected_share", "", false, func(r exportRow, _ bool) string { return num(r.RejectedShare) }},
	{"flags", "", false, func(r exportRow, _ bool) string { return r.Flags }},
	{"comparable", "", false, func(r exportRow, _ bool) string { return r.Comparable }},
}

// interval is a column of the value's interval, empty where it has none.
func interval(f func(*metrics.Uncertainty) string) func(exportRow, bool) string {
	return func(r exportRow, _ bool) string {
		if r.Uncertainty == nil {
			return ""
		}
		return f(r.Uncertainty)
	}
}

func optNum(p *float64) string {
	if p == nil {
		return ""
	}
	return num(*p)
}

func writeCSV(w io.Writer, rows []exportRow, deid bool) error {
	cw := csv.NewWriter(w)
	var head []string
	for _, c := range csvColumns {
		switch {
		case deid && c.identifying:
		case deid && c.deidName != "":
			head = append(head, c.deidName)
		default:
			head = append(head, c.name)
		}
	}
	if err := cw.Write(head); err != nil {
		return err
	}
	rec := make([]string, 0, len(head))
	for _, r := range rows {
		rec = rec[:0]
		for _, c := range csvColumns {
			if !(deid && c.identifying) {
				rec = append(rec, c.text(r, deid))
			}
		}
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}
