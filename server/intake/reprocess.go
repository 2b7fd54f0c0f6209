package intake

import (
	"context"
	"fmt"
	"math"
	"slices"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/server/store"
	"longwave/trends"
)

// MarkerChange is a marker whose value, computability or interval moved
// when a visit was processed again. An interval is nil where the analysis
// made none (settings v1, or not computable).
type MarkerChange struct {
	Key                          string // name/region/state
	Unit                         string
	Old, New                     float64
	OldComputable, NewComputable bool
	OldReason, NewReason         string
	OldInterval, NewInterval     *metrics.Uncertainty
}

// VisitChange is one reprocessed visit.
type VisitChange struct {
	VisitID     int64
	PatientCode string
	Date        string
	OldVersion  string
	OldHash     string
	Changes     []MarkerChange
	// Added and Removed list marker keys present in only one analysis.
	Added, Removed []string
}

// ReprocessReport says what Reprocess did.
type ReprocessReport struct {
	Version, Hash string // the settings now in force
	Visits        []VisitChange
	Failed        []Failure // visit "visit N" and reason
}

// sameValue is the tolerance under which a marker counts as unchanged: a
// rerun under identical settings reproduces values bit for bit, so anything
// above float64 rounding of the stored value is a change.
const sameValue = 1e-12

// Reprocess runs again, from the stored recording files, every visit whose
// analysis was made by other settings than p.Settings, and replaces its
// conditions, markers, flags and display products, one transaction per
// visit. A visit that fails (a missing file) is reported and keeps its old
// analysis; the others go on. progress, when not nil, is called after each
// visit.
//
// Only the recording files are kept, so what sidecars said at ingest (BIDS
// events, line frequency, reference, bad channels, equipment) is restored
// from the stored conditions and periods of the last analysis.
func (p *Pipeline) Reprocess(ctx context.Context, progress func(done, total int)) (ReprocessReport, error) {
	version, hash := p.Settings.Version, p.Settings.Hash()
	rep := ReprocessReport{Version: version, Hash: hash}
	ids, err := p.Store.VisitsWithOtherSettings(ctx, version, hash)
	if err != nil {
		return rep, err
	}
	for i, id := range ids {
		if err := ctx.Err(); err != nil {
			return rep, err
		}
		ch, err := p.reprocessVisit(ctx, id)
		if err != nil {
			rep.Failed = append(rep.Failed, Failure{Visit: fmt.Sprintf("visit %d", id), Err: err})
		} else {
			rep.Visits = append(rep.Visits, ch)
		}
		if progress != nil {
			progress(i+1, len(ids))
		}
	}
	return rep, nil
}

func (p *Pipeline) reprocessVisit(ctx context.Context, id int64) (VisitChange, error) {
	old, err := p.Store.Visit(ctx, id)
	if err != nil {
		return VisitChange{}, err
	}
	src, rec, err := p.decodeStored(ctx, id)
	if err != nil {
		return VisitChange{}, err
	}
	label := visitLabel(src)
	periods := append([]ingest.Period(nil), rec.Periods...)
	res, err := metrics.Compute(rec, p.Settings)
	if err != nil {
		return VisitChange{}, fmt.Errorf("intake: %s: %w", label, err)
	}
	flags := trends.CheckVisit(trends.VisitQuality{Conditions: res.Conditions, Quality: res.Quality, Markers: res.Markers})
	if err := p.Store.ReplaceAnalysis(ctx, id, store.Analysis{Result: res, Flags: flags, Periods: periods}); err != nil {
		return VisitChange{}, fmt.Errorf("intake: %s: %w", label, err)
	}
	ch := VisitChange{VisitID: id, PatientCode: src.PatientCode, Date: src.Visit.Date,
		OldVersion: old.SettingsVersion, OldHash: old.SettingsHash}
	ch.Changes, ch.Added, ch.Removed = diffMarkers(old.Markers, res.Markers)
	return ch, nil
}

// DecodeStored decodes a visit again from its stored recording files, with
// what sidecars said at ingest restored, exactly as Reprocess does: the
// recording the visit's markers were made from. It returns store.ErrNotFound
// (wrapped) for an unknown visit.
func (p *Pipeline) DecodeStored(ctx context.Context, id int64) (*ingest.Recording, error) {
	_, rec, err := p.decodeStored(ctx, id)
	return rec, err
}

func (p *Pipeline) decodeStored(ctx context.Context, id int64) (store.VisitSource, *ingest.Recording, error) {
	src, err := p.Store.VisitSource(ctx, id)
	if err != nil {
		return src, nil, err
	}
	label := visitLabel(src)
	parts := make([]part, 0, len(src.Recordings))
	for _, r := range src.Recordings {
		path, err := p.Store.StoredRecordingPath(ctx, r.SHA256)
		if err != nil {
			return src, nil, fmt.Errorf("intake: %s: %w", label, err)
		}
		parts = append(parts, part{file: &File{Path: path, Name: r.Role + " recording " + r.SHA256[:12]},
			role: r.Role, sha: r.SHA256, size: r.Size, format: r.Format})
	}
	slices.SortFunc(parts, func(a, b part) int { return roleRank(a.role) - roleRank(b.role) })
	rec, err := p.decodeParts(parts, src.DeclaredState)
	if err != nil {
		return src, nil, fmt.Errorf("intake: %s: %w", label, err)
	}
	restoreSidecarFacts(rec, src)
	return src, rec, nil
}

func visitLabel(src store.VisitSource) string {
	return fmt.Sprintf("%s %s (visit %d)", src.PatientCode, src.Visit.Date, src.Visit.ID)
}

func roleRank(role string) int {
	switch role {
	case store.RoleClosed:
		return 0
	case store.RoleOpen:
		return 1
	}
	return 2
}

// restoreSidecarFacts puts back into a recording decoded from its stored
// file what came from outside the file at ingest: periods from BIDS events
// or run names, hardware filters, a declared line frequency, reference and
// equipment, channels marked bad.
func restoreSidecarFacts(rec *ingest.Recording, src store.VisitSource) {
	c := src.Conditions
	// A single file whose periods came from BIDS events, or from its run's
	// name or sidecar (FromRuns on one file), gets them back; two runs are
	// joined again by Combine, and a declared state is passed to the decoder.
	single := len(src.Recordings) == 1
	if single && (c.PeriodSource == ingest.FromEvents || c.PeriodSource == ingest.FromRuns) && len(src.Periods) > 0 {
		rec.Periods = append([]ingest.Period(nil), src.Periods...)
		rec.Conditions.PeriodSource = c.PeriodSource
	}
	if len(c.BadChannels) > 0 {
		for i := range rec.Channels {
			if slices.Contains(c.BadChannels, rec.Channels[i].Label) {
				rec.Channels[i].Bad = true
			}
		}
		ingest.FinishConditions(rec)
	}
	if c.Filters.Text != rec.Conditions.Filters.Text || c.Filters.HighPass != rec.Conditions.Filters.HighPass ||
		c.Filters.LowPass != rec.Conditions.Filters.LowPass || c.Filters.Notch != rec.Conditions.Filters.Notch {
		rec.Conditions.Filters = c.Filters // a BIDS HardwareFilters sidecar
	}
	if c.LineFrequency > 0 {
		rec.Conditions.LineFrequency = c.LineFrequency
	}
	if c.Reference != "" {
		rec.Conditions.Reference = c.Reference
	}
	if c.Equipment != "" {
		rec.Conditions.Equipment = c.Equipment
	}
}

// diffMarkers lists the markers whose value or computability differ
// between two analyses, and the keys found in only one.
func diffMarkers(old, cur []metrics.Marker) (changes []MarkerChange, added, removed []string) {
	before := make(map[string]metrics.Marker, len(old))
	for _, m := range old {
		before[m.Key()] = m
	}
	seen := map[string]bool{}
	for _, m := range cur {
		k := m.Key()
		seen[k] = true
		o, ok := before[k]
		if !ok {
			added = append(added, k)
			continue
		}
		if o.Computable != m.Computable || !sameFloat(o.Value, m.Value) || !sameInterval(o.Uncertainty, m.Uncertainty) {
			changes = append(changes, MarkerChange{Key: k, Unit: m.Unit, Old: o.Value, New: m.Value, OldComputable: o.Computable,
				NewComputable: m.Computable, OldReason: o.Reason, NewReason: m.Reason,
				OldInterval: o.Uncertainty, NewInterval: m.Uncertainty})
		}
	}
	for _, m := range old {
		if !seen[m.Key()] {
			removed = append(removed, m.Key())
		}
	}
	return changes, added, removed
}

func sameFloat(a, b float64) bool { return math.Abs(a-b) <= sameValue*math.Max(1, math.Abs(a)) }

// sameInterval reports whether two intervals are both absent, or equal
// within sameValue.
func sameInterval(a, b *metrics.Uncertainty) bool {
	if a == nil || b == nil {
		return a == nil && b == nil
	}
	return sameFloat(a.SE, b.SE) && sameFloat(a.Low, b.Low) && sameFloat(a.High, b.High) &&
		a.Level == b.Level && a.Method == b.Method && a.Resamples == b.Resamples
}

// MarkerSummary is what reprocessing did to one marker series over every
// reprocessed visit, for a coordinator who cannot read forty lines per
// visit: in how many visits it moved, the median value before and after
// and the median and largest change (over visits where it was computable
// both times), the visits where it became computable or stopped being so,
// and the intervals it gained or lost with their median width.
type MarkerSummary struct {
	Key  string
	Unit string
	// Changed is the number of visits where the marker moved at all; Both
	// those where it was computable before and after.
	Changed, Both int
	// Medians over the Both visits; Largest is the change of largest size,
	// at LargestAt ("LW-0101 2023-03-06, visit 7").
	MedianOld, MedianNew, MedianChange, Largest float64
	LargestAt                                   string
	BecameComputable, LostComputable            int
	// GainedInterval and LostInterval count visits where the marker gained
	// or lost an interval; MedianWidth is the median width (high − low) of
	// the new intervals (0 when there are none).
	GainedInterval, LostInterval int
	MedianWidth                  float64
}

// Summary gathers the report's changes per marker series, in the order in
// which the series first appear.
func (r ReprocessReport) Summary() []MarkerSummary {
	type acc struct {
		MarkerSummary
		olds, news, diffs, widths []float64
	}
	var order []string
	by := map[string]*acc{}
	for _, v := range r.Visits {
		at := fmt.Sprintf("%s %s, visit %d", v.PatientCode, v.Date, v.VisitID)
		for _, c := range v.Changes {
			a := by[c.Key]
			if a == nil {
				a = &acc{MarkerSummary: MarkerSummary{Key: c.Key, Unit: c.Unit}}
				by[c.Key] = a
				order = append(order, c.Key)
			}
			a.Changed++
			switch {
			case c.OldComputable && c.NewComputable:
				a.Both++
				a.olds, a.news = append(a.olds, c.Old), append(a.news, c.New)
				d := c.New - c.Old
				a.diffs = append(a.diffs, d)
				if a.LargestAt == "" || math.Abs(d) > math.Abs(a.Largest) {
					a.Largest, a.LargestAt = d, at
				}
			case c.NewComputable:
				a.BecameComputable++
			case c.OldComputable:
				a.LostComputable++
			}
			switch {
			case c.OldInterval == nil && c.NewInterval != nil:
				a.GainedInterval++
			case c.OldInterval != nil && c.NewInterval == nil:
				a.LostInterval++
			}
			if c.NewInterval != nil {
				a.widths = append(a.widths, c.NewInterval.High-c.NewInterval.Low)
			}
		}
	}
	out := make([]MarkerSummary, 0, len(order))
	for _, k := range order {
		a := by[k]
		a.MedianOld, a.MedianNew, a.MedianChange = median(a.olds), median(a.news), median(a.diffs)
		a.MedianWidth = median(a.widths)
		out = append(out, a.MarkerSummary)
	}
	return out
}

// median of xs (the mean of the middle two for an even count; 0 for none).
func median(xs []float64) float64 {
	if len(xs) == 0 {
		return 0
	}
	s := slices.Clone(xs)
	slices.Sort(s)
	n := len(s)
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}
