// Package intake runs a visit's recordings through longwave: hash, decode,
// compute the markers under the fixed settings, apply the single-visit
// quality rules, copy the files into the data folder and store the visit in
// one transaction. The command line and the server's upload both use it.
//
// A bad file leaves nothing behind (no row, no stored file) and comes back
// as an error naming the file; a file whose SHA-256 is already stored is
// skipped with a message saying where it is.
package intake

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"time"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/server/store"
	"longwave/trends"
)

// ErrRequest: the request itself is wrong (a missing code or date, no file,
// a file in two roles); nothing was read.
var ErrRequest = errors.New("intake: bad request")

// Pipeline ingests visits into one store. Its zero Settings are not valid:
// build it with New, or set Settings (metrics.Current()) yourself. It is safe for
// concurrent use.
type Pipeline struct {
	Store    *store.Store
	Settings metrics.Settings
	// Phrases are the eye-state annotation phrases; nil: the defaults.
	Phrases *ingest.EyePhrases

	mu       sync.Mutex
	inFlight map[string]bool // SHA-256 of files being ingested now
}

// New returns a pipeline with the current settings (metrics.Current) and the
// default eye-state phrases.
func New(st *store.Store) *Pipeline {
	return &Pipeline{Store: st, Settings: metrics.Current()}
}

// File is one recording file: a path on disk, or content already in memory
// (an upload), with the name used in messages.
type File struct {
	Path string
	Data []byte
	// Name for messages; the base name of Path when empty. Never stored.
	Name string
}

func (f *File) name() string {
	if f.Name != "" {
		return f.Name
	}
	if f.Path != "" {
		return filepath.Base(f.Path)
	}
	return "upload"
}

// open returns a reader of the whole file and its size.
func (f *File) open() (io.ReadSeekCloser, int64, error) {
	if f.Data != nil {
		return nopCloser{bytesReader(f.Data)}, int64(len(f.Data)), nil
	}
	r, err := os.Open(f.Path)
	if err != nil {
		return nil, 0, fmt.Errorf("intake: open %s: %w", f.name(), pathless(err))
	}
	st, err := r.Stat()
	if err != nil {
		r.Close()
		return nil, 0, fmt.Errorf("intake: %s: %w", f.name(), pathless(err))
	}
	if !st.Mode().IsRegular() {
		r.Close()
		return nil, 0, fmt.Errorf("intake: %s: not a regular file", f.name())
	}
	return r, st.Size(), nil
}

// pathless drops the full path of an *os.PathError: folder names can carry a
// patient's name, and messages name only the file.
func pathless(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}

// Request is one visit to ingest.
type Request struct {
	PatientCode string
	Date        string // YYYY-MM-DD
	// BirthYear (0 unknown) or BirthDate (YYYY-MM-DD) give the age at the
	// visit; AgeYears with AgeKnown gives it directly (BIDS datasets).
	BirthYear int
	BirthDate string
	AgeYears  float64
	AgeKnown  bool
	Sex       string // "F", "M", "O" or ""
	Group     string
	Cohort    string
	Context   string
	// Single is one file with its own eye-state periods; or Closed and/or
	// Open are the eyes-closed and eyes-open runs of the visit.
	Single, Closed, Open *File
	// DeclaredState is the eye state of the whole Single file when the file
	// says none ("" none).
	DeclaredState ingest.EyeState
}

// Outcome is what became of a request.
type Outcome struct {
	VisitID   int64
	PatientID int64
	// Skipped is true when a file was already stored (by SHA-256) or is being
	// ingested right now; Message says which and where.
	Skipped bool
	Message string
	Result  *metrics.Result
	Flags   []metrics.Flag
	// Timing of the stages, for the speed figures. FileTime is the copy of
	// the files into the data folder, which runs beside decode and compute;
	// FileWait what of it outlasted them; SaveTime the transaction;
	// StoreTime = FileWait + SaveTime, what storing added to the ingest.
	DecodeTime, ComputeTime, FileTime, FileWait, SaveTime, StoreTime time.Duration
}

// Failure is a visit (or a file a dataset reader refused) that was not
// ingested or reprocessed, with the reason.
type Failure struct {
	Visit string // "sub-01/ses-02", "visit 12", or the path of a refused file
	Err   error
}

// part is one file of a visit, hashed.
type part struct {
	file   *File
	role   string
	sha    string
	size   int64
	format string
}

// prepared is a visit decoded and analysed, ready to store.
type prepared struct {
	nv      store.NewVisit
	parts   []part
	created []part // files this ingest put in the data folder
	out     Outcome
}

// IngestVisit ingests one visit. A file the decoder refuses, a result the
// store refuses, or a failure to write the data folder comes back as an
// error and leaves no row and no stored file.
func (p *Pipeline) IngestVisit(ctx context.Context, req Request) (Outcome, error) {
	parts, err := requestParts(req)
	if err != nil {
		return Outcome{}, err
	}
	if err := hashParts(parts); err != nil {
		return Outcome{}, err
	}
	if out, skip, err := p.claim(ctx, parts); err != nil || skip {
		return out, err
	}
	defer p.release(parts)
	prep, err := p.prepare(req, parts, func() (*ingest.Recording, error) { return p.decodeParts(parts, req.DeclaredState) })
	if err != nil {
		return Outcome{}, err
	}
	return p.commit(ctx, prep)
}

// requestParts checks the request and lists its files with their roles.
func requestParts(req Request) ([]part, error) {
	if req.PatientCode == "" {
		return nil, fmt.Errorf("%w: no patient code", ErrRequest)
	}
	if _, err := time.Parse(time.DateOnly, req.Date); err != nil {
		return nil, fmt.Errorf("%w: visit date %q: want YYYY-MM-DD", ErrRequest, req.Date)
	}
	switch {
	case req.Single != nil && (req.Closed != nil || req.Open != nil):
		return nil, fmt.Errorf("%w: give one file, or an eyes-closed and an eyes-open run, not both", ErrRequest)
	case req.Single != nil:
		return []part{{file: req.Single, role: store.RoleSingle}}, nil
	case req.Closed == nil && req.Open == nil:
		return nil, fmt.Errorf("%w: no recording file", ErrRequest)
	}
	if req.DeclaredState != "" {
		return nil, fmt.Errorf("%w: a declared eye state applies to a single file; runs carry their own", ErrRequest)
	}
	var parts []part
	if req.Closed != nil {
		parts = append(parts, part{file: req.Closed, role: store.RoleClosed})
	}
	if req.Open != nil {
		parts = append(parts, part{file: req.Open, role: store.RoleOpen})
	}
	return parts, nil
}

// hashParts reads every file once for its SHA-256 and size.
func hashParts(parts []part) error {
	for i := range parts {
		r, size, err := parts[i].file.open()
		if err != nil {
			return err
		}
		h := sha256.New()
		_, err = io.Copy(h, r)
		r.Close()
		if err != nil {
			return fmt.Errorf("intake: read %s: %w", parts[i].file.name(), pathless(err))
		}
		if size == 0 {
			return fmt.Errorf("intake: %s: empty file", parts[i].file.name())
		}
		parts[i].sha, parts[i].size = hex.EncodeToString(h.Sum(nil)), size
	}
	if len(parts) == 2 && parts[0].sha == parts[1].sha {
		return fmt.Errorf("%w: the eyes-closed and eyes-open runs are the same file", ErrRequest)
	}
	return nil
}

// claim skips the visit when one of its files is stored already or being
// ingested by another call now; otherwise it marks the files in flight.
func (p *Pipeline) claim(ctx context.Context, parts []part) (Outcome, bool, error) {
	for _, pt := range parts {
		rec, known, err := p.Store.RecordingKnown(ctx, pt.sha)
		if err != nil {
			return Outcome{}, false, err
		}
		if known {
			msg := fmt.Sprintf("%s is already stored (SHA-256 %s…, visit %d); skipped", pt.file.name(), pt.sha[:12], rec.VisitID)
			if v, err := p.Store.Visit(ctx, rec.VisitID); err == nil {
				if pat, err := p.Store.PatientByID(ctx, v.Visit.PatientID); err == nil {
					msg = fmt.Sprintf("%s is already stored (SHA-256 %s…) as the visit of %s on %s; skipped",
						pt.file.name(), pt.sha[:12], pat.Code, v.Visit.Date)
				}
			}
			return Outcome{VisitID: rec.VisitID, Skipped: true, Message: msg}, true, nil
		}
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.inFlight == nil {
		p.inFlight = map[string]bool{}
	}
	for _, pt := range parts {
		if p.inFlight[pt.sha] {
			return Outcome{Skipped: true, Message: fmt.Sprintf("%s (SHA-256 %s…) is being ingested by another request; skipped",
				pt.file.name(), pt.sha[:12])}, true, nil
		}
	}
	for _, pt := range parts {
		p.inFlight[pt.sha] = true
	}
	return Outcome{}, false, nil
}

func (p *Pipeline) release(parts []part) {
	p.mu.Lock()
	defer p.mu.Unlock()
	for _, pt := range parts {
		delete(p.inFlight, pt.sha)
	}
}

func (p *Pipeline) options(state ingest.EyeState) ingest.Options {
	return ingest.Options{Phrases: p.Phrases, DeclaredState: state}
}

// decodeParts decodes the files: one file as it is; one run alone as a file
// of its run's state; two runs joined by ingest.Combine.
func (p *Pipeline) decodeParts(parts []part, declared ingest.EyeState) (*ingest.Recording, error) {
	recs := make([]*ingest.Recording, len(parts))
	for i := range parts {
		state := declared
		switch parts[i].role {
		case store.RoleClosed:
			state = ingest.EyesClosed
		case store.RoleOpen:
			state = ingest.EyesOpen
		}
		rec, err := decodeFile(parts[i].file, p.options(state))
		if err != nil {
			return nil, err
		}
		parts[i].format = string(rec.Conditions.Format)
		if parts[i].sha != "" {
			rec.SHA256 = parts[i].sha // seeds the marker intervals
		}
		recs[i] = rec
	}
	if len(recs) == 1 {
		return recs[0], nil
	}
	rec, err := ingest.Combine(recs[0], recs[1])
	if err != nil {
		return nil, fmt.Errorf("intake: join %s and %s: %w", parts[0].file.name(), parts[1].file.name(), err)
	}
	return rec, nil
}

func decodeFile(f *File, opt ingest.Options) (*ingest.Recording, error) {
	if f.Data != nil {
		return ingest.Decode(bytesReader(f.Data), int64(len(f.Data)), f.name(), opt)
	}
	rec, err := ingest.ReadFile(f.Path, opt)
	if err != nil {
		return nil, err
	}
	if f.Name != "" {
		rec.Name = f.Name
	}
	return rec, nil
}

// prepare decodes (with load) and analyses a visit: the CPU-heavy part,
// which the BIDS batch runs on several workers. Meanwhile the files are
// copied into the data folder (keepFiles), so that the copy and its fsync
// add nothing to the ingest's wall time unless they outlast the analysis.
// On failure the files it created are removed again.
func (p *Pipeline) prepare(req Request, parts []part, load func() (*ingest.Recording, error)) (*prepared, error) {
	t0 := time.Now()
	kept := make(chan keepResult, 1)
	startKeep := func() {
		snapshot := append([]part(nil), parts...) // load may refine formats meanwhile
		go func() {
			t := time.Now()
			created, err := p.keepFiles(snapshot)
			kept <- keepResult{created: created, err: err, took: time.Since(t)}
		}()
	}
	started := false
	// The format names the stored file; a part whose format is known before
	// decoding (BIDS) starts copying at once, the others after the decode.
	if formatsKnown(parts) {
		startKeep()
		started = true
	}
	abandon := func(err error) (*prepared, error) {
		if started {
			k := <-kept
			p.removeFiles(k.created)
		}
		return nil, err
	}
	rec, err := load()
	if err != nil {
		return abandon(err)
	}
	t1 := time.Now()
	if len(parts) == 1 && rec.Conditions.Format != "" && extOf(string(rec.Conditions.Format)) == extOf(parts[0].format) {
		parts[0].format = string(rec.Conditions.Format) // "EDF+C" where the dataset said "EDF"
	}
	if !started {
		startKeep()
		started = true
	}
	periods := append([]ingest.Period(nil), rec.Periods...)
	res, err := metrics.Compute(rec, p.Settings)
	if err != nil {
		return abandon(fmt.Errorf("intake: %s: %w", partNames(parts), err))
	}
	flags := trends.CheckVisit(trends.VisitQuality{Conditions: res.Conditions, Quality: res.Quality, Markers: res.Markers})
	t2 := time.Now()
	k := <-kept
	if k.err != nil {
		p.removeFiles(k.created)
		return nil, k.err
	}
	prep := &prepared{parts: parts, created: k.created}
	prep.nv = store.NewVisit{
		Patient: store.Patient{Code: req.PatientCode, Sex: req.Sex, BirthYear: req.BirthYear, BirthDate: req.BirthDate,
			Group: req.Group, Cohort: req.Cohort},
		Visit:         store.Visit{Date: req.Date, AgeYears: req.AgeYears, AgeKnown: req.AgeKnown, Context: req.Context},
		DeclaredState: req.DeclaredState,
		Analysis:      store.Analysis{Result: res, Flags: flags, Periods: periods},
	}
	for _, pt := range parts {
		prep.nv.Recordings = append(prep.nv.Recordings, store.Recording{SHA256: pt.sha, Format: pt.format, Size: pt.size, Role: pt.role})
	}
	prep.out = Outcome{Result: res, Flags: flags, DecodeTime: t1.Sub(t0), ComputeTime: t2.Sub(t1), FileTime: k.took,
		FileWait: time.Since(t2)}
	return prep, nil
}

type keepResult struct {
	created []part
	err     error
	took    time.Duration
}

// extOf is the family of a format: files of one family share an extension
// in the data folder.
func extOf(format string) string {
	if strings.HasPrefix(format, "BDF") {
		return "bdf"
	}
	return "edf"
}

func formatsKnown(parts []part) bool {
	for _, pt := range parts {
		if pt.format == "" {
			return false
		}
	}
	return true
}

// keepFiles copies the parts into the data folder and returns those it
// created (a file already there is not created again).
func (p *Pipeline) keepFiles(parts []part) ([]part, error) {
	var created []part
	for _, pt := range parts {
		r, _, err := pt.file.open()
		if err != nil {
			return created, err
		}
		_, made, err := p.Store.PutRecording(pt.sha, pt.format, r)
		r.Close()
		if err != nil {
			return created, fmt.Errorf("intake: keep %s: %w", pt.file.name(), err)
		}
		if made {
			created = append(created, pt)
		}
	}
	return created, nil
}

// removeFiles deletes files keepFiles created for a visit that was not
// stored (the store keeps any that a stored recording references).
func (p *Pipeline) removeFiles(created []part) {
	for _, pt := range created {
		p.Store.RemoveRecordingFile(context.Background(), pt.sha, pt.format)
	}
}

func partNames(parts []part) string {
	if len(parts) == 1 {
		return parts[0].file.name()
	}
	return parts[0].file.name() + " + " + parts[1].file.name()
}

// commit saves the visit in one transaction; on failure it removes the
// files prepare created.
func (p *Pipeline) commit(ctx context.Context, prep *prepared) (Outcome, error) {
	t0 := time.Now()
	v, err := p.Store.SaveVisit(ctx, prep.nv)
	if err != nil {
		p.removeFiles(prep.created)
		return Outcome{}, fmt.Errorf("intake: %s: %w", partNames(prep.parts), err)
	}
	out := prep.out
	out.VisitID, out.PatientID = v.ID, v.PatientID
	out.SaveTime = time.Since(t0)
	out.StoreTime = out.FileWait + out.SaveTime
	return out, nil
}
