package main

import (
	"errors"
	"flag"
	"fmt"
	"os"
	"time"

	"longwave/metrics"
	"longwave/server/store"
)

func init() {
	register(&command{
		name: "merge",
		args: "PART.db...",
		summary: "Fold other longwave databases (the shards of a sharded ingest) and their recording files into --db.\n" +
			"All or nothing: a conflict between them is reported and nothing is merged.",
		more: `Patients are matched by code: sex, birth year, birth date, group, cohort and
follow-up interval must agree where both databases give them (an empty one is
filled). Visits are matched by patient code and date: a visit --db holds with
the same recording files is already merged and skipped, so merging the same
parts twice adds nothing; one with other files is a conflict. Visits that
hold the same recording file keep the rule of "longwave ingest --bids": the
earliest by date, then by patient code, is kept and the others are listed as
duplicates (a visit already in --db is never removed). Every visit of a part
must have been analysed with this longwave's settings version (run
"longwave reprocess --db PART.db" first otherwise): a course never mixes
versions.

The recording files of the new visits are copied from each part's data folder
(PART.db.data/) and checked against their SHA-256 before the one transaction
that writes the rows; when it fails, the files it copied are removed again.
The parts are brought to this program's schema when opened and otherwise
left as they are. Users, sign-in sessions and the audit log of the parts are
not merged.
`,
		setup: func(fs *flag.FlagSet, e *env) func([]string) error {
			db := dbFlag(fs)
			return func(args []string) error {
				if len(args) == 0 {
					return usagef("name the databases to merge into --db")
				}
				for _, p := range args {
					st, err := os.Stat(p)
					if err != nil || !st.Mode().IsRegular() {
						return fmt.Errorf("%s: no such database file", p)
					}
				}
				start := time.Now()
				into, err := openStore(*db)
				if err != nil {
					return err
				}
				defer into.Close()
				var parts []*store.Store
				defer func() {
					for _, p := range parts {
						p.Close()
					}
				}()
				for _, p := range args {
					st, err := openStore(p)
					if err != nil {
						return err
					}
					parts = append(parts, st)
				}
				settings := metrics.Current()
				rep, err := into.Merge(e.ctx, parts, store.MergeOptions{SettingsVersion: settings.Version, SettingsHash: settings.Hash()})
				var mc *store.MergeConflictError
				if errors.As(err, &mc) {
					for _, p := range mc.Problems {
						fmt.Fprintf(e.stdout, "  refused: %s\n", p)
					}
					return fmt.Errorf("%d problem(s) between the databases (listed above); nothing was merged", len(mc.Problems))
				}
				if err != nil {
					return err
				}
				fmt.Fprintf(e.stdout, "merged %d database(s) into %s: %d visits added, %d already there, %d duplicates; "+
					"%d patients added or completed; %d recording files copied (%.1f s)\n",
					rep.Parts, *db, rep.Visits, rep.Already, len(rep.Duplicates), rep.Patients, rep.Files, time.Since(start).Seconds())
				for _, d := range rep.Duplicates {
					fmt.Fprintf(e.stdout, "  duplicate %s in %s: holds the same file as the visit %s (SHA-256 %s…), which is the one kept\n",
						d.Visit, d.Part, d.Of, d.SHA256[:12])
				}
				return nil
			}
		},
	})
}
