package main

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"flag"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"longwave/ingest"
	"longwave/ingest/synth"
	"longwave/metrics"
	"longwave/server/store"
)

// run runs the real program in-process and returns its exit status and
// output streams.
func run(t *testing.T, stdin string, args ...string) (int, string, string) {
	t.Helper()
	var out, errOut bytes.Buffer
	code := Run(context.Background(), args, strings.NewReader(stdin), &out, &errOut)
	return code, out.String(), errOut.String()
}

// recording writes a two-minute synthetic EDF+C (eyes closed then open).
func recording(t testing.TB, dir, name string, seed uint64) string {
	t.Helper()
	s := synth.Default()
	s.Seed = seed
	s.Duration = 120
	s.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 65}, {State: ingest.EyesOpen, Start: 65, End: 120}}
	b, err := synth.Bytes(s)
	if err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(dir, name)
	if err := os.WriteFile(p, b, 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestHelpOfEveryCommand(t *testing.T) {
	for name, c := range commands {
		code, out, _ := run(t, "", name, "--help")
		if code != exitDone {
			t.Errorf("%s --help: exit %d", name, code)
		}
		fs := flag.NewFlagSet(name, flag.ContinueOnError)
		c.setup(fs, &env{})
		fs.VisitAll(func(f *flag.Flag) {
			if !strings.Contains(out, "-"+f.Name) {
				t.Errorf("%s --help does not list -%s", name, f.Name)
			}
		})
		if !strings.Contains(out, "exit status") {
			t.Errorf("%s --help does not give the exit statuses", name)
		}
	}
	_, out, _ := run(t, "", "markers", "--help")
	for _, m := range []string{metrics.PDRFrequency, metrics.PDRCentroid, metrics.PDRLeft, metrics.PDRRight, metrics.PDRAsymmetry,
		metrics.AlphaReactivity, metrics.AlphaRatio, metrics.ThetaAlphaRatio, metrics.AperiodicExponent, metrics.AperiodicOffset,
		metrics.AperiodicR2, metrics.RelDelta, metrics.RelTheta, metrics.RelAlpha, metrics.RelBeta, metrics.SlowingRatio,
		metrics.FrontalPosteriorAlpha, metrics.DrowsinessIndex} {
		if !strings.Contains(out, "  "+m+" ") {
			t.Errorf("markers --help does not explain %s", m)
		}
	}
	for _, db := range []string{"ingest", "reprocess", "export", "backup", "check", "user", "serve"} {
		_, out, _ := run(t, "", db, "--help")
		if !strings.Contains(out, "-db FILE") || !strings.Contains(out, `default "longwave.db"`) {
			t.Errorf("%s --help: no --db FILE defaulting to longwave.db", db)
		}
	}
}

func TestWrongUsage(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "u.db")
	for _, args := range [][]string{
		{},
		{"frobnicate"},
		{"ingest", "--db", db, "x.edf"}, // no patient or date
		{"ingest", "--db", db, "--patient", "A", "--date", "2024-13-01", "x.edf"}, // bad date
		{"ingest", "--db", db, "--nonsense"},                                      // unknown flag
		{"markers"},                                                               // no file
		{"markers", "--state", "dozing", "x.edf"},                                 // bad state
		{"export", "--db", db, "--format", "xlsx"},
		{"backup", "--db", db},
		{"user", "--db", db, "add"},                                  // no name
		{"user", "--db", db, "add", "--name", "a", "--role", "boss"}, // bad role
		{"serve", "--db", db, "--tls-cert", "c.pem"},                 // cert without key
	} {
		code, _, stderr := run(t, "", args...)
		if code != exitUsage {
			t.Errorf("%v: exit %d, want %d (stderr %q)", args, code, exitUsage, stderr)
		}
		if len(args) > 0 && !strings.Contains(stderr, "usage:") {
			t.Errorf("%v: stderr has no usage: %q", args, stderr)
		}
	}
	if _, err := os.Stat(db); err == nil {
		t.Error("a wrong invocation created the database")
	}
}

func TestMarkersCommand(t *testing.T) {
	dir := t.TempDir()
	f := recording(t, dir, "visit.edf", 3)
	code, out, stderr := run(t, "", "markers", f)
	if code != exitDone {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var got struct {
		Settings   struct{ Version, Hash string }
		Conditions map[string]any
		Markers    []map[string]any
		Flags      []map[string]any
	}
	if err := json.Unmarshal([]byte(out), &got); err != nil {
		t.Fatalf("output is not one JSON object: %v", err)
	}
	if got.Settings.Version != metrics.Current().Version || got.Settings.Hash != metrics.Current().Hash() {
		t.Errorf("settings = %+v", got.Settings)
	}
	if got.Conditions["sample_rate"] != 250.0 || got.Conditions["quality"] == nil {
		t.Errorf("conditions = %v", got.Conditions)
	}
	found := false
	for _, m := range got.Markers {
		for _, k := range []string{"name", "region", "state", "value", "unit", "computable", "reason"} {
			if _, ok := m[k]; !ok {
				t.Errorf("marker %v has no %s", m["name"], k)
			}
		}
		if m["name"] == metrics.PDRFrequency && m["state"] == "closed" && m["computable"] == true {
			found = true
			if v := m["value"].(float64); v < 9.9 || v > 10.1 {
				t.Errorf("pdr_frequency = %v, want the synthetic 10 Hz rhythm", v)
			}
		}
	}
	if !found {
		t.Error("no computable eyes-closed pdr_frequency")
	}
	if got.Flags == nil {
		t.Error("flags missing (want a list, empty when none)")
	}

	// A bad file: exit 1 and one line naming the file.
	bad := filepath.Join(dir, "broken.edf")
	os.WriteFile(bad, []byte("0       this is not an EDF header"), 0o644)
	code, out, stderr = run(t, "", "markers", bad)
	if code != exitFailed || out != "" {
		t.Errorf("bad file: exit %d, stdout %q", code, out)
	}
	if strings.Count(stderr, "\n") != 1 || !strings.Contains(stderr, "broken.edf") {
		t.Errorf("bad file: stderr %q, want one line naming broken.edf", stderr)
	}
}

func TestIngestExportBackupUser(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "clinic.db")
	f1 := recording(t, dir, "one.edf", 11)
	f2 := recording(t, dir, "two.edf", 12)
	code, out, stderr := run(t, "", "ingest", "--db", db, "--patient", "MC-0100", "--date", "2019-04-02",
		"--birth-year", "1925", "--sex", "f", f1)
	if code != exitDone || !strings.Contains(out, "stored visit") || !strings.Contains(out, "posterior dominant rhythm") {
		t.Fatalf("ingest: exit %d\n%s\n%s", code, out, stderr)
	}
	// A summary, not a dump of every marker: at most 12 lines besides one
	// line per flag (settings v2 flag each marker whose interval is too
	// wide, and a short synthetic visit has several).
	n := 0
	for _, line := range strings.Split(strings.TrimSpace(out), "\n") {
		if !strings.HasPrefix(strings.TrimSpace(line), "flag ") {
			n++
		}
	}
	if n > 12 {
		t.Errorf("ingest printed %d lines besides its flags, want a few", n)
	}
	code, out, _ = run(t, "", "ingest", f2, "--db", db, "--patient", "MC-0100", "--date", "2021-04-06")
	if code != exitDone {
		t.Fatalf("second visit: exit %d %s", code, out)
	}
	code, out, _ = run(t, "", "ingest", "--db", db, "--patient", "MC-0100", "--date", "2022-01-01", f1)
	if code != exitDone || !strings.Contains(out, "already stored") {
		t.Errorf("same file again: exit %d, %q", code, out)
	}

	// Export: CSV with dates, then de-identified.
	code, out, stderr = run(t, "", "export", "--db", db, "--format", "csv")
	if code != exitDone {
		t.Fatalf("export: %d %s", code, stderr)
	}
	rows, err := csv.NewReader(strings.NewReader(out)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	col := map[string]int{}
	for i, h := range rows[0] {
		col[h] = i
	}
	if len(rows) < 3 || rows[1][col["visit_date"]] != "2019-04-02" || rows[1][col["patient"]] != "MC-0100" {
		t.Fatalf("export rows: %d, first %v", len(rows), rows[1])
	}
	for _, r := range rows[1:] {
		if r[col["computable"]] == "false" && r[col["value"]] != "" {
			t.Errorf("a marker that is not computable has value %q", r[col["value"]])
		}
		if c := r[col["comparable"]]; c != "yes" && c != "no" {
			t.Errorf("comparable = %q", c)
		}
	}
	code, out, _ = run(t, "", "export", "--db", db, "--format", "csv", "--deidentify")
	if code != exitDone || strings.Contains(out, "2019-") || strings.Contains(out, "2021-") {
		t.Errorf("de-identified export holds a date: exit %d", code)
	}
	rows, _ = csv.NewReader(strings.NewReader(out)).ReadAll()
	col = map[string]int{}
	for i, h := range rows[0] {
		col[h] = i
	}
	if _, ok := col["equipment"]; ok {
		t.Error("de-identified export keeps the equipment column")
	}
	days := map[string]bool{}
	for _, r := range rows[1:] {
		days[r[col["days_since_first_visit"]]] = true
		// Born 1925: 93.8 and 95.8 at the visits; Safe Harbor caps at 90.
		if r[col["age_years"]] != "90" {
			t.Errorf("age %q, want 90 (capped)", r[col["age_years"]])
			break
		}
	}
	// 2019-04-02 to 2021-04-06: 735 days.
	if !days["0"] || !days["735"] || len(days) != 2 {
		t.Errorf("days since first visit = %v, want 0 and 735", days)
	}
	code, out, _ = run(t, "", "export", "--db", db, "--format", "json", "--deidentify", "--out", filepath.Join(dir, "x.json"))
	b, _ := os.ReadFile(filepath.Join(dir, "x.json"))
	var js []map[string]any
	if code != exitDone || json.Unmarshal(b, &js) != nil || len(js) != len(rows)-1 {
		t.Errorf("json export: exit %d, %d rows, want %d", code, len(js), len(rows)-1)
	}
	if _, ok := js[0]["visit_date"]; ok {
		t.Error("de-identified JSON keeps visit_date")
	}

	// Backup: a consistent copy that opens with the same visits.
	copyPath := filepath.Join(dir, "copy.db")
	if code, out, stderr := run(t, "", "backup", "--db", db, copyPath); code != exitDone {
		t.Fatalf("backup: %d %s %s", code, out, stderr)
	}
	st, err := store.Open(copyPath)
	if err != nil {
		t.Fatal(err)
	}
	ps, _ := st.Patients(context.Background())
	st.Close()
	if len(ps) != 1 || ps[0].Visits != 2 {
		t.Errorf("backup holds %+v", ps)
	}

	// Reprocess under the same settings: nothing to do.
	code, out, _ = run(t, "", "reprocess", "--db", db)
	if code != exitDone || !strings.Contains(out, "0 visits reprocessed") {
		t.Errorf("reprocess: %d %q", code, out)
	}

	// Users: password from stdin, or generated and shown once.
	if code, out, stderr := run(t, "correct horse battery\n", "user", "add", "--db", db, "--name", "dr.lind", "--role", "clinician"); code != exitDone || strings.Contains(out, "password") {
		t.Errorf("user add with stdin password: %d %q %q", code, out, stderr)
	}
	code, out, _ = run(t, "", "user", "add", "--db", db, "--name", "coord", "--role", "coordinator")
	if code != exitDone || !strings.Contains(out, "password (shown once): ") {
		t.Errorf("user add generated: %d %q", code, out)
	}
	pw := strings.TrimSpace(out[strings.Index(out, "shown once): ")+len("shown once): "):])
	st, _ = store.Open(db)
	defer st.Close()
	if _, err := st.CheckPassword(context.Background(), "coord", pw); err != nil {
		t.Errorf("generated password does not sign in: %v", err)
	}
	if _, err := st.CheckPassword(context.Background(), "dr.lind", "correct horse battery"); err != nil {
		t.Errorf("stdin password does not sign in: %v", err)
	}
	if code, _, stderr := run(t, "tarn-fell-39x\n", "user", "add", "--db", db, "--name", "coord", "--role", "admin", "--db", db); code != exitFailed || !strings.Contains(stderr, "exists") {
		t.Errorf("duplicate user: exit %d %q", code, stderr)
	}
}

func TestIngestRefusesBadFileAndBadDatabase(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "c.db")
	bad := filepath.Join(dir, "scan.edf")
	os.WriteFile(bad, bytes.Repeat([]byte("x"), 600), 0o644)
	code, _, stderr := run(t, "", "ingest", "--db", db, "--patient", "P", "--date", "2024-01-01", bad)
	if code != exitFailed || !strings.Contains(stderr, "scan.edf") || strings.Count(stderr, "\n") != 1 {
		t.Errorf("bad file: exit %d, stderr %q", code, stderr)
	}
	notDB := filepath.Join(dir, "notes.txt")
	os.WriteFile(notDB, []byte("shopping list"), 0o644)
	code, _, stderr = run(t, "", "export", "--db", notDB)
	if code != exitFailed || !strings.Contains(stderr, "not a longwave database (file is not SQLite)") {
		t.Errorf("not SQLite: exit %d, %q", code, stderr)
	}
}

func TestBIDSIngestCommand(t *testing.T) {
	dir := t.TempDir()
	root := filepath.Join(dir, "ds")
	for i, ses := range []string{"ses-01", "ses-02"} {
		p := filepath.Join(root, "sub-07", ses, "eeg")
		os.MkdirAll(p, 0o755)
		recording(t, p, "sub-07_"+ses+"_task-rest_eeg.edf", uint64(40+i))
	}
	os.WriteFile(filepath.Join(root, "participants.tsv"), []byte("participant_id\tage\tsex\nsub-07\t66\tM\n"), 0o644)
	os.WriteFile(filepath.Join(root, "sub-07", "sub-07_sessions.tsv"),
		[]byte("session_id\tacq_time\nses-01\t2020-02-03T09:00:00\nses-02\t2021-02-08T09:30:00\n"), 0o644)
	db := filepath.Join(dir, "b.db")
	code, out, stderr := run(t, "", "ingest", "--db", db, "--bids", root)
	if code != exitDone || !strings.Contains(out, "2 ingested, 0 already known, 0 failed") {
		t.Errorf("bids ingest: %d %q %q", code, out, stderr)
	}
	if strings.Contains(stderr, "[") {
		t.Error("progress bar drawn on a stream that is not a terminal")
	}
	code, out, _ = run(t, "", "ingest", "--db", db, "--bids", root)
	if code != exitDone || !strings.Contains(out, "0 ingested, 2 already known") {
		t.Errorf("again: %d %q", code, out)
	}
}
