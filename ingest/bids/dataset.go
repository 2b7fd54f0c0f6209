// Package bids reads BIDS-EEG datasets (Pernet et al. 2019, Sci Data 6:103;
// the BIDS specification's EEG extension, FORMATS.md §2): the folders
// sub-<label>/[ses-<label>/]eeg/, participants.tsv (age, sex), the subjects'
// sessions.tsv (acq_time), and each recording's *_eeg.json,
// *_channels.tsv and *_events.tsv. Data in .edf and .bdf are decoded by
// package ingest; every other data format is listed as a Problem
// "unsupported format", never a failure of the whole dataset.
//
// A Visit is one subject and session. Its Load decodes the recording,
// applies the sidecars and, when the session holds an eyes-closed and an
// eyes-open run, joins them with ingest.Combine.
package bids

import (
	"fmt"
	"math"
	"os"
	"path"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"time"

	"longwave/ingest"
)

// Dataset is what Read found under Root.
type Dataset struct {
	Root         string
	Participants []Participant // participants.tsv rows in file order
	Visits       []Visit       // sorted by subject, then session
	// Problems are files or rows that could not be used: unsupported data
	// formats, broken TSV rows (file and line), unreadable sidecars. Read
	// goes on past each.
	Problems []Problem
}

// Participant is one row of participants.tsv.
type Participant struct {
	ID       string  // participant_id as written, "sub-<label>"
	Age      float64 // years, when AgeKnown
	AgeKnown bool
	Sex      string // "F", "M", "O", or "" when unknown
}

// Visit is one subject's session: the recordings of one EEG appointment.
type Visit struct {
	Subject string // "sub-<label>"
	Session string // "ses-<label>", "" for a subject without session folders
	AcqTime string // sessions.tsv acq_time as written, "" when not given
	Files   []File // supported data files, sorted by name
}

// FirstScanTime is the earliest acq_time the scans.tsv gives for the
// visit's files ("" when it gives none). Times with a UTC offset are
// compared in UTC, times without one as written (BIDS: the viewer's local
// time).
func (v Visit) FirstScanTime() string {
	first, firstAt := "", time.Time{}
	for _, f := range v.Files {
		if f.AcqTime == "" {
			continue
		}
		at, ok := parseAcqTime(f.AcqTime)
		if ok && (first == "" || at.Before(firstAt)) {
			first, firstAt = f.AcqTime, at
		}
	}
	return first
}

// File is one supported data file of a visit with its sidecars.
type File struct {
	Path string // absolute path of the .edf/.bdf
	Task string // task label ("rest", "eyesclosed", …)
	Acq  string // acquisition label, "" when none
	Run  string // run index as written, "" when none
	// AcqTime is the file's acq_time in the scans.tsv
	// (sub-<label>[_ses-<label>]_scans.tsv) as written, "" when not given.
	AcqTime string
	// Format from the extension (FormatEDF or FormatBDF); the decoded
	// recording's Conditions.Format tells EDF+ apart.
	Format ingest.Format
	// State is the whole run's eye state: from its events when they name a
	// single state, else from the task or acq label or the sidecar's
	// TaskName/Instructions (see stateFromLabel); EyesUnknown when nothing
	// says, "" when its events name both states (a mixed run).
	State ingest.EyeState
	// StateFrom says which of "events", "task", "acq", "TaskName",
	// "Instructions" gave State ("" when unknown).
	StateFrom string

	events   []ingest.Annotation // parsed events.tsv (nil when absent)
	periods  []ingest.Period     // events recognised as eye-state periods (times relative to the file)
	sidecar  *eegSidecar         // nil when absent
	channels []channelRow        // nil when absent
	err      error               // a broken sidecar: Load refuses the file with it
}

// Problem is a file or row Read could not use.
type Problem struct {
	Path string // slash-separated path relative to Root
	Err  error
}

func (p Problem) Error() string { return p.Path + ": " + p.Err.Error() }

// ErrUnsupportedData is wrapped by the Problem of a data file in a format
// longwave does not read (it also matches ingest.ErrUnsupported).
var ErrUnsupportedData = fmt.Errorf("bids: %w", ingest.ErrUnsupported)

// Data-file extensions: read, and those of formats longwave does not read
// (BIDS EEG allows BrainVision, EEGLAB; other modalities' formats appear in
// mixed datasets). Companion files (.fdt, .eeg, .vmrk) of an unsupported
// primary file are not listed again.
var (
	readable    = map[string]ingest.Format{".edf": ingest.FormatEDF, ".bdf": ingest.FormatBDF}
	companions  = map[string]bool{".fdt": true, ".eeg": true, ".vmrk": true}
	sidecarExts = map[string]bool{".json": true, ".tsv": true}
)

// Read walks root for sub-*/[ses-*/]eeg/ folders. It fails only when root
// is not a readable folder; everything else that is wrong is a Problem.
// opt.Phrases (nil: ingest.DefaultEyePhrases) recognise eye-state events and
// sidecar instructions.
func Read(root string, opt ingest.Options) (*Dataset, error) {
	st, err := os.Stat(root)
	if err != nil {
		return nil, fmt.Errorf("bids: dataset folder: %w", unwrapPath(err))
	}
	if !st.IsDir() {
		return nil, fmt.Errorf("bids: dataset %s: not a folder", filepath.Base(root))
	}
	phrases := ingest.DefaultEyePhrases()
	if opt.Phrases != nil {
		phrases = *opt.Phrases
	}
	d := &Dataset{Root: root}
	problem := func(rel string, err error) { d.Problems = append(d.Problems, Problem{Path: rel, Err: err}) }

	if p := filepath.Join(root, "participants.tsv"); fileExists(p) {
		d.Participants = readParticipants(p, func(err error) { problem("participants.tsv", err) })
	}
	entries, err := os.ReadDir(root)
	if err != nil {
		return nil, fmt.Errorf("bids: list dataset folder: %w", unwrapPath(err))
	}
	for _, e := range entries {
		if !e.IsDir() || !strings.HasPrefix(e.Name(), "sub-") {
			continue
		}
		sub := e.Name()
		acq := map[string]string{}
		if p := filepath.Join(root, sub, sub+"_sessions.tsv"); fileExists(p) {
			acq = readSessions(p, func(err error) { problem(path.Join(sub, sub+"_sessions.tsv"), err) })
		}
		if isDir(filepath.Join(root, sub, "eeg")) {
			d.addVisit(root, sub, "", "", phrases, problem)
		}
		sessions, err := os.ReadDir(filepath.Join(root, sub))
		if err != nil {
			problem(sub, unwrapPath(err))
			continue
		}
		for _, s := range sessions {
			if s.IsDir() && strings.HasPrefix(s.Name(), "ses-") && isDir(filepath.Join(root, sub, s.Name(), "eeg")) {
				d.addVisit(root, sub, s.Name(), acq[s.Name()], phrases, problem)
			}
		}
	}
	slices.SortFunc(d.Visits, func(a, b Visit) int {
		if c := strings.Compare(a.Subject, b.Subject); c != 0 {
			return c
		}
		return strings.Compare(a.Session, b.Session)
	})
	return d, nil
}

// addVisit reads one eeg folder.
func (d *Dataset) addVisit(root, sub, ses, acqTime string, phrases ingest.EyePhrases, problem func(string, error)) {
	rel := path.Join(sub, ses, "eeg")
	dir := filepath.Join(root, filepath.FromSlash(rel))
	entries, err := os.ReadDir(dir)
	if err != nil {
		problem(rel, unwrapPath(err))
		return
	}
	v := Visit{Subject: sub, Session: ses, AcqTime: acqTime}
	scansName := sub + "_scans.tsv"
	if ses != "" {
		scansName = sub + "_" + ses + "_scans.tsv"
	}
	var scans map[string]string
	if p := filepath.Join(root, sub, ses, scansName); fileExists(p) {
		scans = readScans(p, func(err error) { problem(path.Join(sub, ses, scansName), err) })
	}
	names := map[string]bool{}
	for _, e := range entries {
		names[e.Name()] = true
	}
	for _, e := range entries {
		name := e.Name()
		ext := strings.ToLower(filepath.Ext(name))
		stem := strings.TrimSuffix(name, filepath.Ext(name))
		if !strings.HasSuffix(stem, "_eeg") || sidecarExts[ext] {
			continue
		}
		if e.IsDir() { // a format stored as a folder (e.g. .ds, .mefd)
			problem(path.Join(rel, name), fmt.Errorf("%w: %s data (a folder)", ErrUnsupportedData, ext))
			continue
		}
		format, ok := readable[ext]
		if !ok {
			if !companions[ext] {
				problem(path.Join(rel, name), fmt.Errorf("%w: %s data", ErrUnsupportedData, ext))
			}
			continue
		}
		base := strings.TrimSuffix(stem, "_eeg")
		ent := entities(base)
		f := File{Path: filepath.Join(dir, name), Task: ent["task"], Acq: ent["acq"], Run: ent["run"], Format: format,
			AcqTime: scans["eeg/"+name]}
		f.loadSidecars(root, dir, base, ent, names, phrases, func(sidecar string, err error) {
			problem(path.Join(rel, sidecar), err)
		})
		v.Files = append(v.Files, f)
	}
	if len(v.Files) > 0 {
		slices.SortFunc(v.Files, func(a, b File) int { return strings.Compare(a.Path, b.Path) })
		d.Visits = append(d.Visits, v)
	}
}

// loadSidecars reads the file's json, channels and events, then decides its
// state. The json is looked up beside the file, else at the dataset root as
// task-<label>[_acq-<label>]_eeg.json (the inheritance principle, for the
// common case of one dataset-wide sidecar per task).
func (f *File) loadSidecars(root, dir, base string, ent map[string]string, names map[string]bool,
	phrases ingest.EyePhrases, problem func(string, error)) {
	fail := func(sidecar string, err error) {
		problem(sidecar, err)
		if f.err == nil {
			f.err = fmt.Errorf("bids: %s: %w", sidecar, err)
		}
	}
	jsonPath := ""
	if names[base+"_eeg.json"] {
		jsonPath = filepath.Join(dir, base+"_eeg.json")
	} else {
		for _, top := range []string{"task-" + ent["task"] + "_acq-" + ent["acq"] + "_eeg.json", "task-" + ent["task"] + "_eeg.json"} {
			if p := filepath.Join(root, top); ent["task"] != "" && fileExists(p) {
				jsonPath = p
				break
			}
		}
	}
	if jsonPath != "" {
		sc, err := readEEGJSON(jsonPath)
		if err != nil {
			fail(filepath.Base(jsonPath), err)
		} else {
			f.sidecar = sc
		}
	}
	if n := base + "_channels.tsv"; names[n] {
		rows, err := readChannels(filepath.Join(dir, n))
		if err != nil {
			fail(n, err)
		} else {
			f.channels = rows
		}
	}
	if n := base + "_events.tsv"; names[n] {
		ev, err := readEvents(filepath.Join(dir, n))
		if err != nil {
			fail(n, err)
		} else {
			f.events = ev
			f.periods = ingest.PeriodsFromEvents(ev, math.Inf(1), phrases)
		}
	}
	f.State, f.StateFrom = ingest.EyesUnknown, ""
	if len(f.periods) > 0 {
		f.State, f.StateFrom = f.periods[0].State, "events"
		for _, p := range f.periods {
			if p.State != f.State {
				f.State = ""
			}
		}
		return
	}
	if s, ok := stateFromLabel(f.Task); ok {
		f.State, f.StateFrom = s, "task"
		return
	}
	if s, ok := stateFromLabel(f.Acq); f.Acq != "" && ok {
		f.State, f.StateFrom = s, "acq"
		return
	}
	if f.sidecar != nil {
		if s, ok := stateFromLabel(f.sidecar.TaskName); f.sidecar.TaskName != "" && ok {
			f.State, f.StateFrom = s, "TaskName"
			return
		}
		if s, ok := phrases.Match(f.sidecar.Instructions); ok {
			f.State, f.StateFrom = s, "Instructions"
		}
	}
}

// entities splits "sub-01_ses-1_task-rest_run-2" into its key-value pairs.
func entities(base string) map[string]string {
	out := map[string]string{}
	for _, part := range strings.Split(base, "_") {
		if k, v, ok := strings.Cut(part, "-"); ok {
			out[k] = v
		}
	}
	return out
}

// readParticipants reads participant_id, age and sex (or the capitalised
// Age, Sex, Gender columns some datasets use). A row with an impossible
// value is reported with its line and kept with that value unknown.
func readParticipants(p string, problem func(error)) []Participant {
	t, err := readTable(p)
	if err != nil {
		problem(err)
		return nil
	}
	return readParticipantsTable(t, problem)
}

func readParticipantsTable(t *table, problem func(error)) []Participant {
	cID, cAge, cSex := t.col("participant_id"), t.col("age"), t.col("sex", "gender")
	if cID < 0 {
		problem(t.errAt(1, "participant_id", "required column missing"))
		return nil
	}
	var out []Participant
	seen := map[string]bool{}
	for _, r := range t.rows {
		id := r.fields[cID]
		if !strings.HasPrefix(id, "sub-") || len(id) == 4 {
			problem(t.errAt(r.line, "participant_id", "%q does not start with sub-<label>", id))
			continue
		}
		if seen[id] {
			problem(t.errAt(r.line, "participant_id", "%s listed twice", id))
			continue
		}
		seen[id] = true
		pt := Participant{ID: id}
		if cAge >= 0 && !isNA(r.fields[cAge]) {
			a := strings.TrimSuffix(r.fields[cAge], "+") // "89+": deprecated cap form
			v, err := strconv.ParseFloat(a, 64)
			switch {
			case err != nil || math.IsNaN(v):
				problem(t.errAt(r.line, t.header[cAge], "%q is not an age in years", r.fields[cAge]))
			case v < 0 || v > maxAge:
				problem(t.errAt(r.line, t.header[cAge], "%v is not a possible age in years", v))
			default:
				pt.Age, pt.AgeKnown = v, true
			}
		}
		if cSex >= 0 && !isNA(r.fields[cSex]) {
			switch strings.ToLower(r.fields[cSex]) {
			case "f", "female":
				pt.Sex = "F"
			case "m", "male":
				pt.Sex = "M"
			case "o", "other":
				pt.Sex = "O"
			default:
				problem(t.errAt(r.line, t.header[cSex], "%q: want male, female, other or n/a", r.fields[cSex]))
			}
		}
		out = append(out, pt)
	}
	return out
}

// maxAge bounds a possible age in years (the oldest documented human lived
// 122 years; common knowledge).
const maxAge = 125

// acqTimeLayouts are the BIDS datetime forms (FORMATS.md §2.5), with and
// without fractional seconds and UTC offset.
var acqTimeLayouts = []string{"2006-01-02T15:04:05Z07:00", "2006-01-02T15:04:05.999999Z07:00",
	"2006-01-02T15:04:05", "2006-01-02T15:04:05.999999"}

// readSessions maps session_id to acq_time; an acq_time that is not a BIDS
// datetime is a problem with its line and left out.
func readSessions(p string, problem func(error)) map[string]string {
	return readAcqTimes(p, "session_id", problem)
}

// readAcqTimes maps the key column of a sessions.tsv or scans.tsv to the
// row's acq_time (rows with n/a or no acq_time column are left out); an
// acq_time that is not a BIDS datetime is a problem with its line and left
// out.
func readAcqTimes(p, key string, problem func(error)) map[string]string {
	out := map[string]string{}
	t, err := readTable(p)
	if err != nil {
		problem(err)
		return out
	}
	cKey, cAcq := t.col(key), t.col("acq_time")
	if cKey < 0 {
		problem(t.errAt(1, key, "required column missing"))
		return out
	}
	for _, r := range t.rows {
		if cAcq < 0 || isNA(r.fields[cAcq]) {
			continue
		}
		v := r.fields[cAcq]
		if _, ok := parseAcqTime(v); !ok {
			problem(t.errAt(r.line, "acq_time", "%q is not a date and time YYYY-MM-DDThh:mm:ss", v))
			continue
		}
		out[r.fields[cKey]] = v
	}
	return out
}

// parseAcqTime reads a BIDS datetime in any of acqTimeLayouts.
func parseAcqTime(v string) (time.Time, bool) {
	for _, l := range acqTimeLayouts {
		if t, err := time.Parse(l, v); err == nil {
			return t, true
		}
	}
	return time.Time{}, false
}

// readScans maps a scans.tsv's filename (relative to the session folder,
// slash-separated: "eeg/sub-01_ses-01_task-rest_eeg.edf") to its acq_time,
// as readAcqTimes.
func readScans(p string, problem func(error)) map[string]string {
	out := map[string]string{}
	for name, v := range readAcqTimes(p, "filename", problem) {
		out[path.Clean(strings.ReplaceAll(name, "\\", "/"))] = v
	}
	return out
}

func fileExists(p string) bool {
	st, err := os.Stat(p)
	return err == nil && st.Mode().IsRegular()
}

func isDir(p string) bool {
	st, err := os.Stat(p)
	return err == nil && st.IsDir()
}
