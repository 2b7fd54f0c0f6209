package main

import (
	"flag"
	"fmt"
	"io"
	"strconv"
	"text/tabwriter"
	"time"

	"longwave/metrics"
	"longwave/server/intake"
)

func init() {
	register(&command{
		name: "reprocess",
		summary: "Run again, from the stored recordings, every visit whose markers were made by other processing settings.\n" +
			"Each visit is replaced in its own transaction; the report gives one line per visit and, per marker, old → new.",
		more: `The report has one line per reprocessed visit (old → new settings, how many
markers moved, became or stopped being computable, gained an interval), then
one line per marker series that moved anywhere: in how many visits it moved,
the median value before → after and the median change (over visits where it
was computable both times), the largest change and its visit, visits where it
became (+) or stopped being (-) computable, and the intervals it gained with
their median width. --per-visit adds every moved marker under its visit.
Courses that still mix settings versions keep flagging the visits made by
other settings as not comparable.
`,
		setup: func(fs *flag.FlagSet, e *env) func([]string) error {
			db := dbFlag(fs)
			to := fs.String("to", metrics.Current().Version, "settings `VERSION` to process with (default: the current one)")
			perVisit := fs.Bool("per-visit", false, "list every moved marker under its visit as well")
			return func(args []string) error {
				if len(args) > 0 {
					return usagef("reprocess takes no arguments")
				}
				settings, ok := metrics.ByVersion(*to)
				if !ok {
					return usagef("--to %q: no such settings version", *to)
				}
				st, err := openStore(*db)
				if err != nil {
					return err
				}
				defer st.Close()
				p := intake.New(st)
				p.Settings = settings
				start := time.Now()
				rep, err := p.Reprocess(e.ctx, nil)
				if err != nil {
					return err
				}
				writeReprocessReport(e.stdout, rep, *perVisit)
				fmt.Fprintf(e.stdout, "%d visits reprocessed, %d failed (%.1f s)\n", len(rep.Visits), len(rep.Failed), time.Since(start).Seconds())
				if len(rep.Failed) > 0 {
					return fmt.Errorf("%d visits failed and keep their old markers", len(rep.Failed))
				}
				return nil
			}
		},
	})
}

// writeReprocessReport prints one line per visit, then the per-marker
// summary (intake.ReprocessReport.Summary) as a table.
func writeReprocessReport(w io.Writer, rep intake.ReprocessReport, perVisit bool) {
	fmt.Fprintf(w, "settings now %s (hash %s)\n", rep.Version, short(rep.Hash))
	for _, v := range rep.Visits {
		var became, lost, gained int
		for _, c := range v.Changes {
			switch {
			case c.NewComputable && !c.OldComputable:
				became++
			case c.OldComputable && !c.NewComputable:
				lost++
			}
			if c.OldInterval == nil && c.NewInterval != nil {
				gained++
			}
		}
		fmt.Fprintf(w, "visit %d, %s %s: %s → %s, %d markers moved (%d became computable, %d no longer computable, %d gained an interval)\n",
			v.VisitID, v.PatientCode, v.Date, v.OldVersion, rep.Version, len(v.Changes), became, lost, gained)
		if perVisit {
			for _, c := range v.Changes {
				fmt.Fprintf(w, "  %-40s %s → %s\n", c.Key, markerText(c.Old, c.OldComputable, c.OldReason, c.OldInterval),
					markerText(c.New, c.NewComputable, c.NewReason, c.NewInterval))
			}
		}
		for _, k := range v.Added {
			fmt.Fprintf(w, "  %-40s new\n", k)
		}
		for _, k := range v.Removed {
			fmt.Fprintf(w, "  %-40s no longer made\n", k)
		}
	}
	for _, f := range rep.Failed {
		fmt.Fprintf(w, "failed %s: %s\n", f.Visit, oneLine(f.Err.Error()))
	}
	sum := rep.Summary()
	if len(rep.Visits) == 0 {
		return
	}
	if len(sum) == 0 {
		fmt.Fprintf(w, "no marker moved in any of the %d visits\n", len(rep.Visits))
		return
	}
	fmt.Fprintf(w, "per marker, old → new over the %d visits (medians over visits computable both times; change = new - old):\n", len(rep.Visits))
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "  marker\tunit\tmoved\told → new\tchange\tlargest change\tcomputable\tintervals")
	for _, s := range sum {
		oldNew, change, largest := "-", "-", "-"
		if s.Both > 0 {
			oldNew = g4(s.MedianOld) + " → " + g4(s.MedianNew)
			change = signed(s.MedianChange)
			largest = signed(s.Largest) + " (" + s.LargestAt + ")"
		}
		intervals := "-"
		if s.GainedInterval > 0 || s.LostInterval > 0 {
			intervals = "+" + strconv.Itoa(s.GainedInterval) + " -" + strconv.Itoa(s.LostInterval)
			if s.MedianWidth > 0 {
				intervals += ", median width " + g4(s.MedianWidth)
				if u := unitText(s.Unit); u != "-" {
					intervals += " " + u
				}
			}
		}
		fmt.Fprintf(tw, "  %s\t%s\t%d/%d\t%s\t%s\t%s\t+%d -%d\t%s\n", s.Key, unitText(s.Unit), s.Changed, len(rep.Visits),
			oldNew, change, largest, s.BecameComputable, s.LostComputable, intervals)
	}
	tw.Flush()
}

func markerText(v float64, computable bool, reason string, u *metrics.Uncertainty) string {
	if !computable {
		return "not computable (" + reason + ")"
	}
	if u == nil {
		return g4(v)
	}
	return g4(v) + " [" + g4(u.Low) + ", " + g4(u.High) + "]"
}

func g4(v float64) string { return strconv.FormatFloat(v, 'g', 4, 64) }

// signed writes a change with its sign (+0.05, -0.31). The report keeps
// ASCII signs throughout so that its figures paste into a spreadsheet.
func signed(v float64) string {
	if v > 0 {
		return "+" + g4(v)
	}
	return g4(v)
}

func unitText(u string) string {
	if u == "" || u == metrics.UnitOne || u == metrics.UnitRatio || u == metrics.UnitShare {
		return "-"
	}
	return u
}

func short(h string) string {
	if len(h) > 12 {
		return h[:12]
	}
	return h
}
