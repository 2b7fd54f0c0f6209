package main

import (
	"flag"
	"fmt"
	"io"
	"strings"
	"time"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/server/intake"
	"longwave/server/store"
	"longwave/trends"
)

func init() {
	register(&command{
		name: "ingest",
		args: "[FILE]",
		summary: "Store one visit's recording for a patient, or every session of a BIDS-EEG dataset.\n" +
			"One visit: --patient and --date with a FILE, or --closed and/or --open runs.\n" +
			"A dataset: --bids DIR (participants become patients, sessions visits).",
		more: `Each visit is stored in one transaction: a bad file leaves nothing behind
and is reported with what is wrong; a file already stored (same SHA-256) is
skipped with a message. A dataset ingest goes on past a bad visit and ends
with a summary; its exit status is 1 when any visit failed. A patient has at
most one visit a day. BIDS gives the age at each session, not a birth date:
the age is stored with the visit and the birth year stays unknown. The
recording files are kept in the data folder beside the database so that
"longwave reprocess" can run them again; the file names are not kept.
`,
		setup: func(fs *flag.FlagSet, e *env) func([]string) error {
			db := dbFlag(fs)
			patient := fs.String("patient", "", "pseudonymous patient `CODE` chosen by the clinic (never a name)")
			date := fs.String("date", "", "visit `DATE` as YYYY-MM-DD")
			birthYear := fs.Int("birth-year", 0, "patient's birth `YEAR` (for the age at each visit)")
			birthDate := fs.String("birth-date", "", "patient's birth `DATE` YYYY-MM-DD, where the clinic keeps it instead of the year")
			sex := fs.String("sex", "", "patient's `SEX`: F, M or O")
			group := fs.String("group", "", "patient's `GROUP`, such as control or patient")
			cohort := fs.String("cohort", "", "the study or clinic list (`NAME`) the patient belongs to")
			context := fs.String("context", "", "free `TEXT` about the visit, such as medication or sleep")
			closed := fs.String("closed", "", "eyes-closed run `FILE` of the visit")
			open := fs.String("open", "", "eyes-open run `FILE` of the visit")
			state := fs.String("state", "", "eye `STATE` of the whole FILE when it has no annotations: closed or open")
			bidsDir := fs.String("bids", "", "ingest the BIDS-EEG dataset in `DIR` instead of one visit")
			workers := fs.Int("workers", 0, "visits analysed in parallel with --bids (`N`; 0: one per core)")
			prefix := fs.String("code-prefix", "", "with --bids, put `TEXT` before each participant_id to make the patient code")
			return func(args []string) error {
				if *bidsDir != "" {
					if len(args) > 0 || *patient != "" || *date != "" || *closed != "" || *open != "" {
						return usagef("--bids takes no FILE, --patient, --date, --closed or --open")
					}
					return ingestBIDS(e, *db, *bidsDir, intake.BIDSOptions{Workers: *workers, CodePrefix: *prefix, Cohort: *cohort, Group: *group})
				}
				if len(args) > 1 {
					return usagef("one recording FILE at most, got %d", len(args))
				}
				if *patient == "" || *date == "" {
					return usagef("--patient and --date are required (or --bids DIR)")
				}
				if _, err := time.Parse(time.DateOnly, *date); err != nil {
					return usagef("--date %q: want YYYY-MM-DD", *date)
				}
				declared, err := parseState(*state)
				if err != nil {
					return err
				}
				req := intake.Request{PatientCode: *patient, Date: *date, BirthYear: *birthYear, BirthDate: *birthDate,
					Sex: strings.ToUpper(*sex), Group: *group, Cohort: *cohort, Context: *context, DeclaredState: declared}
				if len(args) == 1 {
					req.Single = &intake.File{Path: args[0]}
				}
				if *closed != "" {
					req.Closed = &intake.File{Path: *closed}
				}
				if *open != "" {
					req.Open = &intake.File{Path: *open}
				}
				if req.Single == nil && req.Closed == nil && req.Open == nil {
					return usagef("give a recording FILE, or --closed and/or --open runs")
				}
				if req.Single != nil && (req.Closed != nil || req.Open != nil) {
					return usagef("give a FILE or --closed/--open runs, not both")
				}
				st, err := openStore(*db)
				if err != nil {
					return err
				}
				defer st.Close()
				out, err := intake.New(st).IngestVisit(e.ctx, req)
				if err != nil {
					return err
				}
				printOutcome(e.stdout, req, out)
				if !out.Skipped {
					printComparison(e, st, out)
				}
				return nil
			}
		},
	})
}

// mainMarkers are the markers printed after a single ingest.
var mainMarkers = []struct {
	name, region string
	state        ingest.EyeState
	label        string
}{
	{metrics.PDRFrequency, metrics.RegionPosterior, ingest.EyesClosed, "posterior dominant rhythm"},
	{metrics.AlphaReactivity, metrics.RegionPosterior, ingest.EyesOpen, "alpha attenuation on eye opening"},
	{metrics.ThetaAlphaRatio, metrics.RegionPosterior, ingest.EyesClosed, "theta/alpha ratio, posterior"},
	{metrics.AperiodicExponent, metrics.RegionGlobal, ingest.EyesClosed, "aperiodic exponent"},
	{metrics.SlowingRatio, metrics.RegionGlobal, ingest.EyesClosed, "(delta+theta)/(alpha+beta)"},
}

func printOutcome(w io.Writer, req intake.Request, out intake.Outcome) {
	if out.Skipped {
		fmt.Fprintln(w, out.Message)
		return
	}
	res := out.Result
	q := res.Quality
	fmt.Fprintf(w, "stored visit %d: patient %s, %s; settings version %s; clean eyes closed %.0f s, eyes open %.0f s\n",
		out.VisitID, req.PatientCode, req.Date, res.SettingsVersion, q.CleanSeconds[ingest.EyesClosed], q.CleanSeconds[ingest.EyesOpen])
	for _, mm := range mainMarkers {
		m, ok := res.Marker(mm.name, mm.region, mm.state)
		if !ok && mm.state == ingest.EyesClosed {
			m, ok = res.Marker(mm.name, mm.region, ingest.EyesUnknown)
		}
		switch {
		case !ok:
			continue
		case m.Computable && m.Uncertainty != nil:
			u := m.Uncertainty
			fmt.Fprintf(w, "  %-34s %8.3f%s  (%g %% interval %.3f to %.3f)\n", mm.label, m.Value, unitSuffix(m.Unit),
				100*u.Level, u.Low, u.High)
		case m.Computable:
			fmt.Fprintf(w, "  %-34s %8.3f%s\n", mm.label, m.Value, unitSuffix(m.Unit))
		default:
			fmt.Fprintf(w, "  %-34s not computable: %s\n", mm.label, m.Reason)
		}
	}
	if len(out.Flags) == 0 {
		fmt.Fprintln(w, "  no quality flags")
	}
	// The interval rule flags each marker on its own: one line names them all.
	var wide []string
	for _, f := range out.Flags {
		if f.Rule == trends.RuleIntervalWide {
			wide = append(wide, f.Markers...)
			continue
		}
		fmt.Fprintf(w, "  flag %s (%s): %s\n", f.Rule, strings.ReplaceAll(string(f.Severity), "_", " "), f.Reason)
	}
	if len(wide) > 0 {
		fmt.Fprintf(w, "  flag %s (not comparable): %d markers with an interval too wide to compare across visits: %s\n",
			trends.RuleIntervalWide, len(wide), strings.Join(wide, ", "))
	}
}

// printComparison prints the cautions between the patient's previous visit
// and the new one (a change of line frequency, reference, equipment, rate or
// filters).
func printComparison(e *env, st *store.Store, out intake.Outcome) {
	visits, err := st.PatientVisits(e.ctx, out.PatientID)
	if err != nil {
		return
	}
	for i, v := range visits {
		if v.Visit.ID == out.VisitID && i > 0 {
			for _, f := range trends.CompareVisits(visits[i-1], v) {
				fmt.Fprintf(e.stdout, "  against %s: %s (%s): %s\n", visits[i-1].Visit.Date, f.Rule,
					strings.ReplaceAll(string(f.Severity), "_", " "), f.Reason)
			}
		}
	}
}

// unitSuffix prints a physical unit after a value and nothing for the
// dimensionless ones.
func unitSuffix(unit string) string {
	switch unit {
	case "", "1", "ratio", "share":
		return ""
	}
	return " " + unit
}

func ingestBIDS(e *env, db, dir string, opt intake.BIDSOptions) error {
	st, err := openStore(db)
	if err != nil {
		return err
	}
	defer st.Close()
	bar := isTerminal(e.stderr)
	start := time.Now()
	if bar {
		opt.Progress = func(done, total int) { drawProgress(e.stderr, done, total, time.Since(start)) }
	}
	sum, err := intake.New(st).IngestBIDS(e.ctx, dir, opt)
	if bar {
		fmt.Fprintln(e.stderr)
	}
	if err != nil && sum.Visits == 0 {
		return err
	}
	fmt.Fprintf(e.stdout, "%d sessions in %s: %d ingested, %d already known, %d failed (%.1f s)\n",
		sum.Visits, dir, sum.Ingested, sum.Known, len(sum.Failed), sum.Elapsed.Seconds())
	for _, f := range sum.Failed {
		fmt.Fprintf(e.stdout, "  failed %s: %s\n", f.Visit, oneLine(f.Err.Error()))
	}
	if err != nil {
		return err
	}
	if len(sum.Failed) > 0 {
		return fmt.Errorf("%d of the dataset's visits or files failed (listed above)", len(sum.Failed))
	}
	return nil
}

// drawProgress redraws a one-line bar on a terminal.
func drawProgress(w io.Writer, done, total int, elapsed time.Duration) {
	const width = 30
	filled := 0
	if total > 0 {
		filled = done * width / total
	}
	fmt.Fprintf(w, "\r[%s%s] %d/%d visits  %s ", strings.Repeat("=", filled), strings.Repeat(" ", width-filled),
		done, total, elapsed.Round(time.Second))
}
