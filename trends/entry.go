package trends

import (
	"errors"
	"fmt"
	"slices"
	"time"

	"longwave/metrics"
	"longwave/metrics/clinic"
)

// A cohort row has two parts. One depends only on the patient and the
// patient's own visits (counts, dates, the latest visit's flags and the
// comparable points of each main marker): that is a CohortEntry, which the
// store keeps beside the visits and rewrites in the transaction that changes
// any of them, so that the cohort screen never reads every visit again. The
// other depends on the clinic's control norms and on today (the direction,
// the reliable change, the verdict, the days overdue): CohortFromEntries
// works it out from the entries at every build, so that a change to a
// control's visits, which may move every verdict, can never leave a kept
// verdict behind. That second part is a few small regressions per patient
// (about 50 ms for 5,000 patients on the shared 2-core machine;
// BenchmarkCohortFromEntries5000).

// EntryOptions are what SummarisePatient needs beside the patient.
type EntryOptions struct {
	// SettingsVersion and SettingsHash of the current processing: visits
	// made by others are not comparable (CheckSettings).
	SettingsVersion string
	SettingsHash    string
	// Markers whose comparable points the entry keeps (nil:
	// DefaultMainMarkers()).
	Markers []SeriesRef
}

// CohortEntry is what the cohort keeps of one patient: everything of the
// patient's cohort row that does not depend on the control norms or on
// today's date.
type CohortEntry struct {
	PatientID int64
	Code      string
	Group     string
	Cohort    string
	// FollowUpMonths is the patient's own interval (0: the cohort's).
	FollowUpMonths   int
	Visits           int
	ComparableVisits int
	// FirstVisit and LastVisit are the first and last dated visits ("" and
	// day 0 without one); the days count from 1970-01-01.
	FirstVisit, LastVisit string
	FirstDay, LastDay     int
	// FollowDays are the days after FirstVisit of every dated visit, in
	// date order (the cohort's retention counts them).
	FollowDays []int
	// LatestFlags are all flags of the last visit as the course sees them
	// (stored, settings check, change from the visit before).
	LatestFlags []metrics.Flag
	// Series hold one entry per main marker, in the order of the markers.
	Series []EntrySeries
}

// EntrySeries is one main marker of an entry: which series of the
// patient's visits it is, and its comparable, dated points.
type EntrySeries struct {
	Ref SeriesRef
	// Found is false when no visit has the marker; Marker, Region and
	// State then repeat the Ref.
	Found                 bool
	Marker, Region, State string
	Points                []EntryPoint
}

// EntryPoint is one comparable, dated value of a main marker.
type EntryPoint struct {
	VisitID int64
	Date    string
	Day     int // days from 1970-01-01
	Value   float64
	// SE is the value's own standard error (0 without one).
	SE       float64
	AgeYears float64
	AgeKnown bool
}

// epochDay is the day number of d, counted from 1970-01-01.
func epochDay(d civilDate) int { return int(d.t.Unix() / 86400) }

// dayDate is the civil date of a day number.
func dayDate(day int) civilDate { return civilDate{time.Unix(int64(day)*86400, 0).UTC()} }

// SummarisePatient makes the patient's cohort entry from all the patient's
// visits (any order). The visits need their markers of the main markers
// only; their conditions need the fields CompareVisits reads.
func SummarisePatient(p clinic.Patient, visits []clinic.VisitRecord, opt EntryOptions) CohortEntry {
	refs := opt.Markers
	if refs == nil {
		refs = DefaultMainMarkers()
	}
	as := assess(visits, opt.SettingsVersion, opt.SettingsHash)
	e := CohortEntry{PatientID: p.ID, Code: p.Code, Group: p.Group, Cohort: p.Cohort, FollowUpMonths: p.FollowUpMonths,
		Visits: len(as)}
	var base civilDate
	for _, a := range as {
		if a.comparable {
			e.ComparableVisits++
		}
		if !a.dateOK {
			continue
		}
		if e.FirstVisit == "" {
			base = a.date
			e.FirstVisit, e.FirstDay = a.rec.Visit.Date, epochDay(a.date)
		}
		e.FollowDays = append(e.FollowDays, a.date.daysSince(base))
		e.LastVisit, e.LastDay = a.rec.Visit.Date, epochDay(a.date)
	}
	if n := len(as); n > 0 && len(as[n-1].flags) > 0 {
		e.LatestFlags = slices.Clone(as[n-1].flags)
	}
	for _, ref := range refs {
		es := EntrySeries{Ref: ref, Marker: ref.Marker, Region: ref.Region, State: ref.State}
		if id, ok := findSeries(as, ref); ok {
			es.Found, es.Marker, es.Region, es.State = true, id.name, id.region, id.state
			for i := range as {
				v, se, ok := comparableValue(&as[i], id)
				if !ok || !as[i].dateOK {
					continue
				}
				vis := as[i].rec.Visit
				es.Points = append(es.Points, EntryPoint{VisitID: vis.ID, Date: vis.Date, Day: epochDay(as[i].date),
					Value: v, SE: se, AgeYears: vis.AgeYears, AgeKnown: vis.AgeKnown})
			}
		}
		e.Series = append(e.Series, es)
	}
	return e
}

// ErrEntryMarkers is returned by CohortFromEntries for an entry that does
// not keep the cohort's main markers (an entry made for other markers).
var ErrEntryMarkers = errors.New("trends: cohort entry keeps other markers")

// CohortFromEntries makes one row per entry (in the given order) and the
// cohort's retention and share of non-comparable visits, judging each main
// marker against opt.Norms and counting days overdue at opt.Today. The
// entries must keep opt.Markers (nil: DefaultMainMarkers()) in that order.
func CohortFromEntries(entries []CohortEntry, opt CohortOptions) (Cohort, error) {
	table := opt.Reliability
	if table == nil {
		table = DefaultReliability()
	}
	refs := opt.Markers
	if refs == nil {
		refs = DefaultMainMarkers()
	}
	def := opt.FollowUpMonths
	if def <= 0 {
		def = DefaultFollowUpMonths
	}
	today := dateOf(opt.Today)
	c := Cohort{Today: today.String(), FollowUpMonths: def, Markers: refs, Patients: len(entries),
		Rows: make([]CohortRow, 0, len(entries)), Retention: []RetentionYear{}, Advisory: AdvisoryCourse}
	// Norms looked up once per series, not once per patient.
	type judged struct {
		id   seriesID
		rel  Reliability
		ok   bool
		norm seriesNorm
	}
	var cache []judged
	lookup := func(id seriesID) *judged {
		for i := range cache {
			if cache[i].id == id {
				return &cache[i]
			}
		}
		rel, ok := findReliability(table, id.name, id.region, id.state)
		cache = append(cache, judged{id, rel, ok, opt.Norms.find(id.name, id.region, id.state)})
		return &cache[len(cache)-1]
	}
	var bufs directionBufs
	for k := range entries {
		e := &entries[k]
		if len(e.Series) != len(refs) {
			return Cohort{}, fmt.Errorf("%w: %s keeps %d main markers, the cohort shows %d", ErrEntryMarkers, e.Code, len(e.Series), len(refs))
		}
		months := e.FollowUpMonths
		if months <= 0 {
			months = def
		}
		row := CohortRow{PatientID: e.PatientID, Code: e.Code, Group: e.Group, Cohort: e.Cohort, FollowUpMonths: months,
			Visits: e.Visits, ComparableVisits: e.ComparableVisits, FirstVisit: e.FirstVisit, LastVisit: e.LastVisit,
			LatestFlags: nonNil(slices.Clone(e.LatestFlags)), Markers: make([]MarkerDirection, 0, len(refs))}
		if e.LastVisit != "" {
			due := dayDate(e.LastDay).addMonths(months)
			row.NextDue, row.DaysOverdue = due.String(), max(0, today.daysSince(due))
		}
		row.Overdue = row.DaysOverdue > 0
		row.Flagged = len(row.LatestFlags) > 0
		c.Visits += e.Visits
		c.NonComparable += e.Visits - e.ComparableVisits
		for i, ref := range refs {
			es := &e.Series[i]
			if es.Ref != ref {
				return Cohort{}, fmt.Errorf("%w: %s keeps %v where the cohort shows %v", ErrEntryMarkers, e.Code, es.Ref, ref)
			}
			var md MarkerDirection
			if !es.Found {
				md = MarkerDirection{Marker: ref.Marker, Region: ref.Region, State: ref.State,
					Direction: DirectionUnknown, DirectionBasis: "marker not found in any visit"}
			} else {
				j := lookup(seriesID{es.Marker, es.Region, es.State})
				md = judgeSeries(es, j.rel, j.ok, j.norm, &bufs)
			}
			row.Markers = append(row.Markers, md)
			if md.ReliableChange {
				row.ReliableChange = true
			}
		}
		c.Rows = append(c.Rows, row)
	}
	if c.Visits > 0 {
		c.NonComparableShare = float64(c.NonComparable) / float64(c.Visits)
	}
	// Retention by follow-up year: the visit of year k lies in
	// [k − ½, k + ½) years after baseline.
	for k := 1; ; k++ {
		ry := RetentionYear{Year: k}
		for i := range entries {
			e := &entries[i]
			if e.FirstVisit == "" || today.before(dayDate(e.FirstDay).addYears(k)) {
				continue
			}
			ry.Eligible++
			lo, hi := float64(k)-RetentionWindowYears, float64(k)+RetentionWindowYears
			for _, d := range e.FollowDays {
				if y := float64(d) / DaysPerYear; y >= lo && y < hi {
					ry.Retained++
					break
				}
			}
		}
		if ry.Eligible == 0 {
			break
		}
		ry.Share = float64(ry.Retained) / float64(ry.Eligible)
		c.Retention = append(c.Retention, ry)
	}
	return c, nil
}

// directionBufs are scratch slices reused across the series of a build.
type directionBufs struct {
	years, values []float64
	pv            []PatientVisit
}

// judgeSeries is the norm-dependent half of a main marker's summary: the
// change over its kept points (slope, reliable change, direction) and the
// verdict against the control norm of the series.
func judgeSeries(es *EntrySeries, rel Reliability, relOK bool, norm seriesNorm, b *directionBufs) MarkerDirection {
	md := MarkerDirection{Marker: es.Marker, Region: es.Region, State: es.State}
	cps := make([]ChangePoint, 0, len(es.Points))
	b.years, b.values, b.pv = b.years[:0], b.values[:0], b.pv[:0]
	var age float64
	for _, p := range es.Points {
		if p.AgeKnown {
			b.pv = append(b.pv, PatientVisit{AgeYears: p.AgeYears, Value: p.Value, SE: p.SE})
			age += p.AgeYears
		}
		cps = append(cps, ChangePoint{VisitID: p.VisitID, Date: p.Date, Value: p.Value})
		b.years = append(b.years, float64(p.Day-es.Points[0].Day)/DaysPerYear)
		b.values = append(b.values, p.Value)
	}
	if len(b.pv) > 0 {
		age /= float64(len(b.pv))
	}
	ch := changeFrom(cps, b.years, b.values, rel, relOK, ExpectedRate{}, norm)
	md.Values = cps
	md.Verdict = compareSlope(FitPatientSlope(b.pv, norm.ControlNorm), norm.ControlNorm, norm.basis, age)
	md.Points, md.Direction, md.DirectionBasis = ch.Points, ch.Direction, ch.DirectionBasis
	md.HasSlope, md.SlopePerYear = ch.Slope.Known, ch.Slope.PerYear
	md.RCIKnown, md.RC, md.ReliableChange = ch.Reliable.Known, ch.Reliable.RC, ch.Reliable.Reliable
	return md
}
