package main

import (
	"flag"
	"fmt"
	"io"
	"os"
	"strconv"
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

Sessions holding the same file (byte for byte) are stored once: the earliest
by visit date, then by label (sub-01/ses-01 before sub-01/ses-02), whatever
the number of workers; the others are listed as duplicates.

Sharded ingest (a batch scheduler's array of tasks, then "longwave merge"):
--shard K/N ingests the sessions whose slice is K, numbered from 0 to N-1.
A session's slice is the first 8 bytes of the SHA-256 of its label
("sub-01/ses-02", or "sub-01" without session folders), read as a big-endian
number, modulo N: it never depends on the order of the files. Run every K
from 0 to N-1, each into its own database, with the same dataset and flags.
--shard auto takes K from the scheduler: under SLURM, K is
SLURM_ARRAY_TASK_ID minus SLURM_ARRAY_TASK_MIN (divided by
SLURM_ARRAY_TASK_STEP) and N is SLURM_ARRAY_TASK_COUNT (--array=0-3 or 1-4
both give K = 0…3; a list of indexes such as --array=1,2,9 is refused); in a Kubernetes Indexed Job, K is JOB_COMPLETION_INDEX
(0-based) and N must be given with --shards (the Job's completions).
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
			shard := fs.String("shard", "", "with --bids, ingest only slice `K/N` of the sessions (K from 0 to N-1), or auto: K (and N) from "+
				"SLURM_ARRAY_TASK_ID/SLURM_ARRAY_TASK_COUNT or JOB_COMPLETION_INDEX")
			shards := fs.Int("shards", 0, "with --shard auto, the number of slices `N` (required with JOB_COMPLETION_INDEX)")
			return func(args []string) error {
				if *bidsDir != "" {
					if len(args) > 0 || *patient != "" || *date != "" || *closed != "" || *open != "" {
						return usagef("--bids takes no FILE, --patient, --date, --closed or --open")
					}
					opt := intake.BIDSOptions{Workers: *workers, CodePrefix: *prefix, Cohort: *cohort, Group: *group}
					var err error
					if opt.Shard, opt.Shards, err = parseShard(*shard, *shards, os.Getenv); err != nil {
						return err
					}
					return ingestBIDS(e, *db, *bidsDir, opt)
				}
				if *shard != "" || *shards != 0 {
					return usagef("--shard and --shards go with --bids")
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
	where := fmt.Sprintf("%d sessions in %s", sum.Visits, dir)
	if opt.Shards > 0 {
		where = fmt.Sprintf("%d of the %d sessions in %s (shard %d of %d, numbered from 0)", sum.InShard, sum.Visits, dir, opt.Shard, opt.Shards)
	}
	fmt.Fprintf(e.stdout, "%s: %d ingested, %d already known, %d failed, %d duplicates of earlier sessions (%.1f s)\n",
		where, sum.Ingested, sum.Known, len(sum.Failed), len(sum.Duplicates), sum.Elapsed.Seconds())
	for _, d := range sum.Duplicates {
		fmt.Fprintf(e.stdout, "  duplicate %s: holds the same file as the earlier session %s (SHA-256 %s…), which is the one stored\n",
			d.Visit, d.Of, d.SHA256[:12])
	}
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

// parseShard reads --shard and --shards into a 0-based slice index and a
// slice count (0, 0: no sharding). getenv reads the scheduler's variables
// for --shard auto.
func parseShard(shard string, shards int, getenv func(string) string) (int, int, error) {
	switch {
	case shard == "" && shards != 0:
		return 0, 0, usagef("--shards goes with --shard auto")
	case shard == "":
		return 0, 0, nil
	case shard != "auto":
		if shards != 0 {
			return 0, 0, usagef("--shards goes with --shard auto; --shard %s names the count itself", shard)
		}
		ks, ns, ok := strings.Cut(shard, "/")
		k, errK := strconv.Atoi(ks)
		n, errN := strconv.Atoi(ns)
		if !ok || errK != nil || errN != nil || n < 1 || k < 0 || k >= n {
			return 0, 0, usagef("--shard %q: want K/N with 0 ≤ K < N (slices are numbered from 0), or auto", shard)
		}
		return k, n, nil
	}
	if shards < 0 {
		return 0, 0, usagef("--shards %d: want a positive count", shards)
	}
	slurm, kube := getenv("SLURM_ARRAY_TASK_ID"), getenv("JOB_COMPLETION_INDEX")
	envInt := func(name, def string) (int, error) {
		v := getenv(name)
		if v == "" {
			v = def
		}
		n, err := strconv.Atoi(v)
		if err != nil || n < 0 {
			return 0, usagef("--shard auto: %s=%q is not a whole number ≥ 0", name, v)
		}
		return n, nil
	}
	switch {
	case slurm != "" && kube != "":
		return 0, 0, usagef("--shard auto: both SLURM_ARRAY_TASK_ID and JOB_COMPLETION_INDEX are set; give --shard K/N")
	case slurm != "":
		id, err := envInt("SLURM_ARRAY_TASK_ID", "")
		if err != nil {
			return 0, 0, err
		}
		if getenv("SLURM_ARRAY_TASK_COUNT") == "" {
			return 0, 0, usagef("--shard auto: SLURM_ARRAY_TASK_ID is set but SLURM_ARRAY_TASK_COUNT is not (not a job array?)")
		}
		count, err := envInt("SLURM_ARRAY_TASK_COUNT", "")
		if err != nil {
			return 0, 0, err
		}
		lo, err := envInt("SLURM_ARRAY_TASK_MIN", "0")
		if err != nil {
			return 0, 0, err
		}
		step, err := envInt("SLURM_ARRAY_TASK_STEP", "1")
		if err != nil {
			return 0, 0, err
		}
		if step == 0 {
			step = 1
		}
		hi, err := envInt("SLURM_ARRAY_TASK_MAX", strconv.Itoa(lo+(count-1)*step))
		if err != nil {
			return 0, 0, err
		}
		// A list of indexes (--array=1,2,9) is no range: MAX − MIN then
		// differs from (COUNT − 1) × STEP.
		if count < 1 || hi-lo != (count-1)*step || id < lo || (id-lo)%step != 0 || (id-lo)/step >= count {
			return 0, 0, usagef("--shard auto: SLURM_ARRAY_TASK_ID=%d is not one of the %d tasks from %d in steps of %d; "+
				"submit the array as one range (--array=0-%d)", id, count, lo, step, max(count-1, 0))
		}
		if shards != 0 && shards != count {
			return 0, 0, usagef("--shards %d, but the SLURM array has %d tasks (SLURM_ARRAY_TASK_COUNT)", shards, count)
		}
		return (id - lo) / step, count, nil
	case kube != "":
		if shards == 0 {
			return 0, 0, usagef("--shard auto with JOB_COMPLETION_INDEX needs --shards N (the Job's completions)")
		}
		k, err := envInt("JOB_COMPLETION_INDEX", "")
		if err != nil {
			return 0, 0, err
		}
		if k >= shards {
			return 0, 0, usagef("--shard auto: JOB_COMPLETION_INDEX=%d is not below --shards %d", k, shards)
		}
		return k, shards, nil
	}
	return 0, 0, usagef("--shard auto: neither SLURM_ARRAY_TASK_ID (a SLURM job array) nor JOB_COMPLETION_INDEX " +
		"(a Kubernetes Indexed Job) is set; give --shard K/N")
}
