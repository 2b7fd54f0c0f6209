package main

import (
	"flag"
	"fmt"
	"time"

	"longwave/server/intake"
)

func init() {
	register(&command{
		name: "reprocess",
		summary: "Run again, from the stored recordings, every visit whose markers were made by other processing settings.\n" +
			"Each visit is replaced in its own transaction; the report lists every marker that moved (old → new).",
		setup: func(fs *flag.FlagSet, e *env) func([]string) error {
			db := dbFlag(fs)
			return func(args []string) error {
				if len(args) > 0 {
					return usagef("reprocess takes no arguments")
				}
				st, err := openStore(*db)
				if err != nil {
					return err
				}
				defer st.Close()
				p := intake.New(st)
				start := time.Now()
				rep, err := p.Reprocess(e.ctx, nil)
				if err != nil {
					return err
				}
				fmt.Fprintf(e.stdout, "settings now %s (hash %s)\n", rep.Version, short(rep.Hash))
				for _, v := range rep.Visits {
					fmt.Fprintf(e.stdout, "visit %d, %s %s: %s → %s, %d markers changed\n",
						v.VisitID, v.PatientCode, v.Date, v.OldVersion, rep.Version, len(v.Changes))
					for _, c := range v.Changes {
						fmt.Fprintf(e.stdout, "  %-40s %s → %s\n", c.Key, markerText(c.Old, c.OldComputable, c.OldReason),
							markerText(c.New, c.NewComputable, c.NewReason))
					}
					for _, k := range v.Added {
						fmt.Fprintf(e.stdout, "  %-40s new\n", k)
					}
					for _, k := range v.Removed {
						fmt.Fprintf(e.stdout, "  %-40s no longer made\n", k)
					}
				}
				for _, f := range rep.Failed {
					fmt.Fprintf(e.stdout, "failed %s: %s\n", f.Visit, oneLine(f.Err.Error()))
				}
				fmt.Fprintf(e.stdout, "%d visits reprocessed, %d failed (%.1f s)\n", len(rep.Visits), len(rep.Failed), time.Since(start).Seconds())
				if len(rep.Failed) > 0 {
					return fmt.Errorf("%d visits failed and keep their old markers", len(rep.Failed))
				}
				return nil
			}
		},
	})
}

func markerText(v float64, computable bool, reason string) string {
	if !computable {
		return "not computable (" + reason + ")"
	}
	return fmt.Sprintf("%.4g", v)
}

func short(h string) string {
	if len(h) > 12 {
		return h[:12]
	}
	return h
}
