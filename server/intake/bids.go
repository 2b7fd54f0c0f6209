package intake

import (
	"context"
	"crypto/sha256"
	"encoding/binary"
	"fmt"
	"io"
	"runtime"
	"sort"
	"strings"
	"sync"
	"time"

	"longwave/ingest"
	"longwave/ingest/bids"
	"longwave/server/store"
)

// BIDSOptions configure IngestBIDS.
type BIDSOptions struct {
	// Workers decode and analyse visits in parallel (0: GOMAXPROCS). One
	// goroutine stores them: SQLite has one writer.
	Workers int
	// CodePrefix is put before each participant_id to make the patient
	// code ("" none), so that two datasets' "sub-01" stay apart.
	CodePrefix string
	// Cohort and Group given to every patient of the dataset ("" none).
	Cohort, Group string
	// Progress, when set, is called after each visit (stored, skipped or
	// failed) with the count done and the total, from one goroutine.
	Progress func(done, total int)
	// Shards > 0 ingests only the sessions of slice Shard (0 ≤ Shard <
	// Shards) of the dataset, as ShardOf assigns them; 0 ingests them all.
	Shard, Shards int
}

// Duplicate is a session not stored because an earlier session of the
// dataset holds the same recording file (by SHA-256).
type Duplicate struct {
	Visit  string // "sub-01/ses-02"
	Of     string // the earlier session, the one stored: "sub-01/ses-01"
	SHA256 string // the shared file's hash
}

// BIDSSummary says what a dataset ingest did.
type BIDSSummary struct {
	Visits   int // visits found in the dataset
	InShard  int // of those, the visits of the shard ingested (Visits without sharding)
	Ingested int // stored now
	Known    int // skipped: their files were stored already
	// Duplicates are sessions holding a file of an earlier session of the
	// dataset; the earlier one is stored (see IngestBIDS).
	Duplicates []Duplicate
	Failed     []Failure // visits not stored, and files the reader refused
	Elapsed    time.Duration
}

// IngestBIDS ingests a BIDS-EEG dataset: participants become patients (code
// = CodePrefix + participant_id, sex from participants.tsv), sessions
// become visits. BIDS gives the age at the session, not a birth date, so the
// age is stored on each visit (the participants.tsv age, plus the time from
// the participant's first dated session) and the birth year is left 0 rather
// than invented. The visit date is the session's acquisition date (the
// subject's sessions.tsv acq_time, else the earliest acq_time of the
// session's files in its scans.tsv); a session without one fails with that
// reason rather than get an invented date, since a course is drawn over
// dates and longwave keeps one visit per patient per day.
//
// Visits are decoded and analysed on Workers goroutines while this goroutine
// stores them one by one, each in its own transaction; a failing visit is
// reported and the rest go on. The error is non-nil only when the dataset
// cannot be read at all, the shard is out of range, or ctx ends.
//
// The result does not depend on the number of workers: every file is hashed
// before any visit is analysed, and when sessions share a file (byte for
// byte), only the earliest of them is stored and the others are reported as
// Duplicates of it. Earliest means the earlier visit date (the day of the
// session's acq_time), then the smaller session label ("sub-01/ses-01"
// before "sub-01/ses-02", "sub-01/…" before "sub-02/…"). The key is the day,
// not the time of day, because the store keeps the visit date and the
// patient code, so that store.Merge applies exactly this rule across shards.
// A file stored already by an earlier ingest makes its session Known.
//
// With Shards > 0 only the shard's sessions are ingested; ages are still
// reckoned from each participant's first dated session of the whole dataset,
// so a shard stores exactly what a whole ingest stores for those sessions.
// Problems the reader found in a session folder are reported by that
// session's shard, those outside any session (participants.tsv, a subject's
// sessions.tsv) by shard 0.
func (p *Pipeline) IngestBIDS(ctx context.Context, root string, opt BIDSOptions) (BIDSSummary, error) {
	start := time.Now()
	if opt.Shards < 0 || opt.Shards > 0 && (opt.Shard < 0 || opt.Shard >= opt.Shards) {
		return BIDSSummary{}, fmt.Errorf("%w: shard %d of %d: want 0 ≤ shard < shards", ErrRequest, opt.Shard, opt.Shards)
	}
	ds, err := bids.Read(root, p.options(""))
	if err != nil {
		return BIDSSummary{}, fmt.Errorf("intake: %w", err)
	}
	sum := BIDSSummary{Visits: len(ds.Visits)}
	for _, pr := range ds.Problems {
		if opt.Shards == 0 || problemShard(pr.Path, opt.Shards) == opt.Shard {
			sum.Failed = append(sum.Failed, Failure{Visit: pr.Path, Err: pr.Err})
		}
	}
	jobs := planBIDS(ds, opt)
	if opt.Shards > 0 {
		mine := jobs[:0]
		for _, j := range jobs {
			if ShardOf(j.label, opt.Shards) == opt.Shard {
				mine = append(mine, j)
			}
		}
		jobs = mine
	}
	sum.InShard = len(jobs)
	workers := opt.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	if err := hashJobs(ctx, jobs, workers); err != nil {
		return sum, err
	}
	markDuplicates(jobs)

	type result struct {
		job  *bidsJob
		prep *prepared
		out  Outcome
		skip bool
		err  error
	}
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	jobCh := make(chan *bidsJob)
	resCh := make(chan result)
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for j := range jobCh {
				r := result{job: j}
				if j.err != nil {
					r.err = j.err
				} else if j.dupOf == nil {
					r.out, r.skip, r.err = p.claim(ctx, j.parts)
					if r.err == nil && !r.skip {
						visit := j.visit
						if r.err = setFormats(j.parts, visit); r.err == nil {
							r.prep, r.err = p.prepare(j.req, j.parts, func() (*ingest.Recording, error) {
								return visit.Load(p.options(""))
							})
						}
						if r.err != nil {
							p.release(j.parts)
						}
					}
				}
				select {
				case resCh <- r:
				case <-ctx.Done():
					if r.prep != nil {
						p.release(j.parts)
					}
					return
				}
			}
		}()
	}
	go func() {
		defer close(jobCh)
		for _, j := range jobs {
			select {
			case jobCh <- j:
			case <-ctx.Done():
				return
			}
		}
	}()
	go func() { wg.Wait(); close(resCh) }()

	done := 0
	for r := range resCh {
		switch {
		case r.err != nil:
			sum.Failed = append(sum.Failed, Failure{Visit: r.job.label, Err: r.err})
		case r.job.dupOf != nil:
			sum.Duplicates = append(sum.Duplicates, Duplicate{Visit: r.job.label, Of: r.job.dupOf.label, SHA256: r.job.dupSHA})
		case r.skip:
			sum.Known++
		default:
			_, err := p.commit(ctx, r.prep)
			p.release(r.job.parts)
			if err != nil {
				sum.Failed = append(sum.Failed, Failure{Visit: r.job.label, Err: err})
			} else {
				sum.Ingested++
			}
		}
		done++
		if opt.Progress != nil {
			opt.Progress(done, len(jobs))
		}
		if ctx.Err() != nil {
			break
		}
	}
	sum.Elapsed = time.Since(start)
	if err := ctx.Err(); err != nil {
		return sum, err
	}
	return sum, nil
}

// bidsJob is one session to ingest.
type bidsJob struct {
	label string
	visit bids.Visit
	req   Request
	parts []part
	err   error // a problem found while planning (no date, odd runs) or hashing
	// dupOf is the earlier session holding the file dupSHA of this one.
	dupOf  *bidsJob
	dupSHA string
}

// ShardOf is the shard, 0 ≤ ShardOf < n, of the session with that label
// ("sub-01/ses-02", or "sub-01" for a subject without session folders): the
// first 8 bytes of the label's SHA-256 (FIPS 180-4) read as a big-endian
// unsigned integer, modulo n. It depends on the label alone, never on the
// order in which files are listed, so every shard process computes the same
// partition. n must be positive.
func ShardOf(label string, n int) int {
	h := sha256.Sum256([]byte(label))
	return int(binary.BigEndian.Uint64(h[:8]) % uint64(n))
}

// problemShard is the shard that reports a reader problem at rel (a
// slash-separated path in the dataset): the shard of the session folder it
// lies in, 0 when it lies in none.
func problemShard(rel string, n int) int {
	el := strings.Split(rel, "/")
	switch {
	case len(el) >= 3 && strings.HasPrefix(el[0], "sub-") && strings.HasPrefix(el[1], "ses-"):
		return ShardOf(el[0]+"/"+el[1], n)
	case len(el) >= 3 && strings.HasPrefix(el[0], "sub-") && el[1] == "eeg":
		return ShardOf(el[0], n)
	}
	return 0
}

// hashJobs hashes every file of the jobs on workers goroutines; a file that
// cannot be read fails its job.
func hashJobs(ctx context.Context, jobs []*bidsJob, workers int) error {
	ch := make(chan *bidsJob)
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for j := range ch {
				if err := hashParts(j.parts); err != nil {
					j.err = err
				}
			}
		}()
	}
	for _, j := range jobs {
		if j.err != nil {
			continue
		}
		select {
		case ch <- j:
		case <-ctx.Done():
		}
		if ctx.Err() != nil {
			break
		}
	}
	close(ch)
	wg.Wait()
	return ctx.Err()
}

// markDuplicates marks each job that holds a file of an earlier job (by
// date, then label; see IngestBIDS) as its duplicate. A duplicate's other
// files are not claimed, since it is not stored.
func markDuplicates(jobs []*bidsJob) {
	order := make([]*bidsJob, 0, len(jobs))
	for _, j := range jobs {
		if j.err == nil {
			order = append(order, j)
		}
	}
	sort.SliceStable(order, func(a, b int) bool {
		if order[a].req.Date != order[b].req.Date {
			return order[a].req.Date < order[b].req.Date
		}
		return order[a].label < order[b].label
	})
	owner := map[string]*bidsJob{}
	for _, j := range order {
		for _, pt := range j.parts {
			if o, ok := owner[pt.sha]; ok {
				j.dupOf, j.dupSHA = o, pt.sha
				break
			}
		}
		if j.dupOf == nil {
			for _, pt := range j.parts {
				owner[pt.sha] = j
			}
		}
	}
}

// planBIDS turns the dataset's sessions into requests: patient fields from
// participants.tsv, the date from acq_time, the age from the participant's
// age at the first dated session plus the years since.
func planBIDS(ds *bids.Dataset, opt BIDSOptions) []*bidsJob {
	people := map[string]bids.Participant{}
	for _, pt := range ds.Participants {
		people[normSub(pt.ID)] = pt
	}
	first := map[string]time.Time{}
	dates := make([]time.Time, len(ds.Visits))
	for i, v := range ds.Visits {
		if d, ok := acqDate(visitTime(v)); ok {
			dates[i] = d
			if f, seen := first[normSub(v.Subject)]; !seen || d.Before(f) {
				first[normSub(v.Subject)] = d
			}
		}
	}
	jobs := make([]*bidsJob, 0, len(ds.Visits))
	for i, v := range ds.Visits {
		sub := normSub(v.Subject)
		label := sub
		if v.Session != "" {
			label += "/" + normSes(v.Session)
		}
		j := &bidsJob{label: label, visit: v}
		pt := people[sub]
		j.req = Request{PatientCode: opt.CodePrefix + sub, Sex: pt.Sex, Cohort: opt.Cohort, Group: opt.Group}
		if dates[i].IsZero() {
			j.err = fmt.Errorf("intake: %s: no acquisition date (acq_time in the subject's sessions.tsv or the session's scans.tsv); "+
				"a visit needs a date", label)
		} else {
			j.req.Date = dates[i].Format(time.DateOnly)
			if pt.AgeKnown {
				j.req.AgeYears = pt.Age + dates[i].Sub(first[sub]).Hours()/24/365.2425
				j.req.AgeKnown = true
			}
		}
		if j.err == nil {
			j.parts, j.err = bidsParts(label, v)
		}
		jobs = append(jobs, j)
	}
	sort.SliceStable(jobs, func(a, b int) bool { return jobs[a].label < jobs[b].label })
	return jobs
}

// bidsParts lists the files of a session that bids.Visit.Load analyses,
// with their roles: one file is the single recording; of several, the first
// eyes-closed and the first eyes-open run (by file name), as Load picks
// them. A session of several files without such a pair is refused with the
// reason: which one Load would take depends on its events, and the stored
// files must be exactly the analysed ones so that reprocessing repeats it.
func bidsParts(label string, v bids.Visit) ([]part, error) {
	if len(v.Files) == 0 {
		return nil, fmt.Errorf("intake: %s: no EEG file", label)
	}
	if len(v.Files) == 1 {
		return []part{{file: &File{Path: v.Files[0].Path}, role: store.RoleSingle, format: string(v.Files[0].Format)}}, nil
	}
	var closed, open *bids.File
	for i := range v.Files {
		f := &v.Files[i]
		switch {
		case f.State == ingest.EyesClosed && closed == nil:
			closed = f
		case f.State == ingest.EyesOpen && open == nil:
			open = f
		}
	}
	if closed == nil || open == nil {
		return nil, fmt.Errorf("intake: %s: %d EEG runs without an eyes-closed and an eyes-open one; "+
			"longwave takes one resting run, or one eyes-closed and one eyes-open run", label, len(v.Files))
	}
	return []part{
		{file: &File{Path: closed.Path}, role: store.RoleClosed, format: string(closed.Format)},
		{file: &File{Path: open.Path}, role: store.RoleOpen, format: string(open.Format)},
	}, nil
}

// setFormats fills the parts' formats from the dataset's files, or from
// the file's header where the reader left it empty.
func setFormats(parts []part, v bids.Visit) error {
	for i := range parts {
		for _, f := range v.Files {
			if f.Path == parts[i].file.Path && f.Format != "" {
				parts[i].format = string(f.Format)
			}
		}
		if parts[i].format == "" {
			if err := headerFormat(&parts[i]); err != nil {
				return err
			}
		}
	}
	return nil
}

// headerFormat reads a part's format from its file's header.
func headerFormat(pt *part) error {
	r, size, err := pt.file.open()
	if err != nil {
		return err
	}
	defer r.Close()
	ra, ok := r.(io.ReaderAt)
	if !ok {
		return fmt.Errorf("intake: %s: cannot read header", pt.file.name())
	}
	h, err := ingest.DecodeHeader(ra, size, pt.file.name())
	if err != nil {
		return err
	}
	pt.format = string(h.Format)
	return nil
}

func normSub(s string) string {
	if strings.HasPrefix(s, "sub-") {
		return s
	}
	return "sub-" + s
}

func normSes(s string) string {
	if strings.HasPrefix(s, "ses-") {
		return s
	}
	return "ses-" + s
}

// visitTime is when the session was recorded: its acq_time in the subject's
// sessions.tsv, else the earliest acq_time of its files in the session's
// scans.tsv ("" when neither gives one).
func visitTime(v bids.Visit) string {
	if v.AcqTime != "" {
		return v.AcqTime
	}
	return v.FirstScanTime()
}

// acqDate reads the date of a BIDS acq_time ("YYYY-MM-DDThh:mm:ss[.frac][Z]").
func acqDate(s string) (time.Time, bool) {
	if len(s) < 10 {
		return time.Time{}, false
	}
	d, err := time.Parse(time.DateOnly, s[:10])
	return d, err == nil
}
