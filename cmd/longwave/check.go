package main

import (
	"flag"
	"fmt"
	"io"
	"sort"
	"strings"
	"time"

	"longwave/server/store"
)

// errProblems is check's failure when it ran to the end and found problems
// (the lines are on standard output already).
type errProblems struct {
	n    int
	path string
}

func (e errProblems) Error() string {
	if e.n == 1 {
		return fmt.Sprintf("1 problem in %s", e.path)
	}
	return fmt.Sprintf("%d problems in %s", e.n, e.path)
}

func init() {
	register(&command{
		name: "check",
		summary: "Check the database and its recordings, reading only; safe while the server runs.\n" +
			"It opens the database as it is (no migration applied, nothing written) and checks: SQLite's integrity\n" +
			"and foreign keys; that every migration of this longwave is applied and no unknown one; that every stored\n" +
			"recording file is in the data folder with its size and SHA-256 (each file is read again); and that every\n" +
			"visit has its recording and its analysis, made by a settings version this longwave knows.",
		more: "With every check holding it prints what it looked at, with counts, and exits 0. Otherwise it prints\n" +
			"one line per problem, \"check: where: what\" (a visit by its number and patient code, a recording file\n" +
			"by its path, a row by its table and rowid, a migration by its file name), and exits 1.\n",
		setup: func(fs *flag.FlagSet, e *env) func([]string) error {
			db := fs.String("db", defaultDB, "database `FILE` to check (never created; its recordings are in FILE.data/)")
			return func(args []string) error {
				if len(args) > 0 {
					return usagef("check takes no arguments")
				}
				start := time.Now()
				st, err := store.OpenReadOnly(*db)
				if err != nil {
					return err
				}
				defer st.Close()
				r, err := st.Check(e.ctx)
				if err != nil {
					return err
				}
				if !r.OK() {
					for _, p := range r.Problems {
						fmt.Fprintln(e.stdout, lineBreaks.Replace(p.String()))
					}
					return errProblems{n: len(r.Problems), path: *db}
				}
				printCheckSummary(e.stdout, *db, st.DataDir(), r, time.Since(start))
				return nil
			}
		},
	})
}

// lineBreaks keeps a problem on its line whatever a code or path holds.
var lineBreaks = strings.NewReplacer("\r", " ", "\n", " ")

// printCheckSummary says what a clean check looked at.
func printCheckSummary(w io.Writer, db, data string, r *store.Report, took time.Duration) {
	fmt.Fprintf(w, "%s: every check holds (%.1f s)\n", db, took.Seconds())
	fmt.Fprintf(w, "  database:   integrity and foreign keys of %d tables\n", r.Tables)
	fmt.Fprintf(w, "  migrations: %d of %d applied, none unknown\n", r.MigrationsApplied, r.MigrationsKnown)
	versions := make([]string, 0, len(r.SettingsVisits))
	for v := range r.SettingsVisits {
		versions = append(versions, v)
	}
	sort.Strings(versions)
	var per []string
	for _, v := range versions {
		per = append(per, fmt.Sprintf("%d under settings %s", r.SettingsVisits[v], v))
	}
	by := ""
	if len(per) > 0 {
		by = " (" + strings.Join(per, ", ") + ")"
	}
	fmt.Fprintf(w, "  visits:     %d of %d patients, %d markers, each from a known settings version%s\n",
		r.Visits, r.Patients, r.Markers, by)
	fmt.Fprintf(w, "  recordings: %d rows, %d files in %s read again (%s), each with its stored size and SHA-256\n",
		r.Recordings, r.Files, data, byteSize(r.Bytes))
}

// byteSize writes n in the largest unit that keeps it at or above 1.
func byteSize(n int64) string {
	switch {
	case n >= 1<<30:
		return fmt.Sprintf("%.2f GiB", float64(n)/(1<<30))
	case n >= 1<<20:
		return fmt.Sprintf("%.1f MiB", float64(n)/(1<<20))
	case n >= 1<<10:
		return fmt.Sprintf("%.1f KiB", float64(n)/(1<<10))
	}
	return fmt.Sprintf("%d bytes", n)
}
