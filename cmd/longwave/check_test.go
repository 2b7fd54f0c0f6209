package main

import (
	"bufio"
	"context"
	"database/sql"
	"encoding/json"
	"fmt"
	"io"
	"io/fs"
	"net/http"
	"net/http/cookiejar"
	"net/url"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"longwave/migrations"
	"longwave/server/store"
)

// ingestOne ingests a synthetic two-minute visit of patient code into db
// with the real ingest command.
func ingestOne(t *testing.T, db, code, date string, seed uint64) {
	t.Helper()
	f := recording(t, t.TempDir(), "visit.edf", seed)
	if code, _, errOut := run(t, "", "ingest", "--db", db, "--patient", code, "--date", date, "--birth-year", "1951", f); code != exitDone {
		t.Fatalf("ingest: exit %d: %s", code, errOut)
	}
}

// onlyRecordingFile is the path of the single stored recording of db.
func onlyRecordingFile(t *testing.T, db string) string {
	t.Helper()
	var files []string
	err := filepath.WalkDir(db+".data", func(p string, d fs.DirEntry, err error) error {
		if err == nil && d.Type().IsRegular() {
			files = append(files, p)
		}
		return err
	})
	if err != nil || len(files) != 1 {
		t.Fatalf("recording files of %s: %v, %v; want one", db, files, err)
	}
	return files[0]
}

func TestCheckCommand(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "clinic.db")
	ingestOne(t, db, "LMC-301", "2025-03-04", 5)

	all, err := migrations.All()
	if err != nil {
		t.Fatal(err)
	}
	code, out, errOut := run(t, "", "check", "--db", db)
	if code != exitDone {
		t.Fatalf("clean database: exit %d\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
	}
	for _, want := range []string{
		db + ": every check holds",
		fmt.Sprintf("migrations: %d of %d applied, none unknown", len(all), len(all)),
		"visits:     1 of 1 patients, ",
		"(1 under settings 2)",
		"recordings: 1 rows, 1 files in " + db + ".data read again",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("summary lacks %q:\n%s", want, out)
		}
	}

	// A migration's row removed: check must not apply it, so it fails
	// every time, and the database keeps the gap.
	raw, err := sql.Open("sqlite", db)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := raw.Exec(`DELETE FROM schema_version WHERE version = 4`); err != nil {
		t.Fatal(err)
	}
	raw.Close()
	for range 2 {
		code, out, errOut = run(t, "", "check", "--db", db)
		if code != exitFailed || out != "migration: 0004_marker_intervals.sql: not applied (no schema_version row for version 4)\n" ||
			!strings.Contains(errOut, "1 problem in "+db) {
			t.Fatalf("migration row removed: exit %d\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
		}
	}

	// The recording file removed as well: one more line, naming the file.
	rec := onlyRecordingFile(t, db)
	if err := os.Remove(rec); err != nil {
		t.Fatal(err)
	}
	code, out, errOut = run(t, "", "check", "--db", db)
	lines := strings.Split(strings.TrimSuffix(out, "\n"), "\n")
	if code != exitFailed || len(lines) != 2 || !strings.Contains(errOut, "2 problems in "+db) {
		t.Fatalf("file removed: exit %d\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
	}
	if want := "recording: recording 1 of visit 1 (patient LMC-301): file " + rec + " is missing"; lines[1] != want {
		t.Errorf("line\n got %s\nwant %s", lines[1], want)
	}

	missing := filepath.Join(dir, "other.db")
	if code, _, errOut := run(t, "", "check", "--db", missing); code != exitFailed || !strings.Contains(errOut, "other.db") {
		t.Errorf("missing database: exit %d, stderr %s", code, errOut)
	}
	if _, err := os.Stat(missing); !os.IsNotExist(err) {
		t.Errorf("check created %s", missing)
	}
	if code, _, _ := run(t, "", "check", "--db", db, "extra"); code != exitUsage {
		t.Errorf("check with an argument: exit %d, want %d", code, exitUsage)
	}
}

// copyTree copies the regular files under src to dst, as a restore from a
// file copy of the data folder does.
func copyTree(t *testing.T, src, dst string) {
	t.Helper()
	err := filepath.WalkDir(src, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, err := filepath.Rel(src, p)
		if err != nil {
			return err
		}
		to := filepath.Join(dst, rel)
		if d.IsDir() {
			return os.MkdirAll(to, 0o750)
		}
		return copyFile(p, to)
	})
	if err != nil {
		t.Fatalf("copy %s to %s: %v", src, dst, err)
	}
}

func copyFile(src, dst string) error {
	in, err := os.Open(src)
	if err != nil {
		return err
	}
	defer in.Close()
	out, err := os.OpenFile(dst, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o640)
	if err != nil {
		return err
	}
	if _, err := io.Copy(out, in); err != nil {
		out.Close()
		return err
	}
	return out.Close()
}

var csrfRE = regexp.MustCompile(`name="csrf" value="([^"]+)"`)

// TestBackupRestoreCheckServe is the operations round trip of README's
// "Back up and restore": backup while the database is in use, restore into
// a new folder (the backup file as the database, the data folder copied
// beside it), the originals gone, check the restored folder, serve it, and
// read a patient and a trace (which reads the restored recording file).
func TestBackupRestoreCheckServe(t *testing.T) {
	if testing.Short() {
		t.Skip("ingests a recording and starts the service")
	}
	orig := t.TempDir()
	db := filepath.Join(orig, "clinic.db")
	ingestOne(t, db, "LMC-302", "2025-05-06", 9)
	const password = "restored-harbour-17"
	if code, _, errOut := run(t, password+"\n", "user", "add", "--db", db, "--name", "dr-okoro", "--role", "clinician"); code != exitDone {
		t.Fatalf("user add: exit %d: %s", code, errOut)
	}
	// The database stays open (as under a running server) during the backup.
	live, err := store.Open(db)
	if err != nil {
		t.Fatal(err)
	}
	defer live.Close()
	backupFile := filepath.Join(t.TempDir(), "clinic-2025-05-07.db")
	if code, out, errOut := run(t, "", "backup", "--db", db, backupFile); code != exitDone {
		t.Fatalf("backup: exit %d: %s %s", code, out, errOut)
	}

	restored := filepath.Join(t.TempDir(), "restored")
	if err := os.Mkdir(restored, 0o750); err != nil {
		t.Fatal(err)
	}
	rdb := filepath.Join(restored, "clinic.db")
	if err := copyFile(backupFile, rdb); err != nil {
		t.Fatal(err)
	}
	copyTree(t, db+".data", rdb+".data")
	live.Close()
	if err := os.RemoveAll(orig); err != nil {
		t.Fatal(err)
	}

	code, out, errOut := run(t, "", "check", "--db", rdb)
	if code != exitDone || !strings.Contains(out, "recordings: 1 rows, 1 files") {
		t.Fatalf("check of the restored folder: exit %d\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
	}

	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	pr, pw := io.Pipe()
	done := make(chan int, 1)
	go func() {
		var errBuf strings.Builder
		code := Run(ctx, []string{"serve", "--db", rdb, "--addr", "127.0.0.1:0"}, strings.NewReader(""), pw, &errBuf)
		if code != exitDone {
			t.Errorf("serve: exit %d: %s", code, errBuf.String())
		}
		pw.Close()
		done <- code
	}()
	lines := bufio.NewScanner(pr)
	if !lines.Scan() {
		t.Fatalf("serve printed nothing: %v", lines.Err())
	}
	m := regexp.MustCompile(`at (http://127\.0\.0\.1:[0-9]+) `).FindStringSubmatch(lines.Text())
	if m == nil {
		t.Fatalf("serve: no address in %q", lines.Text())
	}
	go io.Copy(io.Discard, pr)
	base := m[1]

	jar, _ := cookiejar.New(nil)
	c := &http.Client{Jar: jar, Timeout: 60 * time.Second,
		CheckRedirect: func(*http.Request, []*http.Request) error { return http.ErrUseLastResponse }}
	get := func(path string) (int, string) {
		t.Helper()
		res, err := c.Get(base + path)
		if err != nil {
			t.Fatalf("GET %s: %v", path, err)
		}
		defer res.Body.Close()
		b, err := io.ReadAll(res.Body)
		if err != nil {
			t.Fatalf("GET %s: %v", path, err)
		}
		return res.StatusCode, string(b)
	}
	_, form := get("/signin")
	tok := csrfRE.FindStringSubmatch(form)
	if tok == nil {
		t.Fatalf("sign-in form has no csrf field")
	}
	res, err := c.PostForm(base+"/signin", url.Values{"csrf": {tok[1]}, "name": {"dr-okoro"}, "password": {password}})
	if err != nil {
		t.Fatal(err)
	}
	res.Body.Close()
	if res.StatusCode != http.StatusSeeOther {
		t.Fatalf("sign in with the restored account: status %d, want 303", res.StatusCode)
	}

	status, body := get("/api/v1/patients")
	var list struct {
		Patients []struct {
			Code   string `json:"code"`
			Visits int    `json:"visits"`
		} `json:"patients"`
	}
	if err := json.Unmarshal([]byte(body), &list); status != http.StatusOK || err != nil {
		t.Fatalf("GET /api/v1/patients: status %d, %v: %.300s", status, err, body)
	}
	if len(list.Patients) != 1 || list.Patients[0].Code != "LMC-302" || list.Patients[0].Visits != 1 {
		t.Errorf("restored patients %+v, want LMC-302 with 1 visit", list.Patients)
	}
	status, body = get("/api/v1/visits/1/traces?seconds=5")
	if status != http.StatusOK || !strings.Contains(body, `"label":"O1`) {
		t.Errorf("GET /api/v1/visits/1/traces (from the restored recording): status %d: %.300s", status, body)
	}

	cancel()
	select {
	case <-done:
	case <-time.After(30 * time.Second):
		t.Fatal("serve did not stop after its context ended")
	}
}
