package intake_test

import (
	"bufio"
	"context"
	"database/sql"
	"errors"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"longwave/server/intake"
	"longwave/server/store"
)

// TestDataFolderUnwritable: when the recording file cannot be written the
// ingest fails with a clear error and stores no part of the visit. As root
// (CI), chmod 0555 does not stop writes, so the data folder's path is then
// made a regular file, which fails the same way for any user; as another
// user both ways are tried. (A disk filling up in the middle of a file is
// simulated in package store, TestPutRecordingLeavesNoPartFile.)
func TestDataFolderUnwritable(t *testing.T) {
	ways := map[string]func(t *testing.T, dataDir string){
		"data folder path is a file": func(t *testing.T, dataDir string) {
			if err := os.WriteFile(dataDir, []byte("in the way"), 0o644); err != nil {
				t.Fatal(err)
			}
		},
	}
	if os.Geteuid() != 0 {
		ways["read-only data folder"] = func(t *testing.T, dataDir string) {
			if err := os.MkdirAll(dataDir, 0o755); err != nil {
				t.Fatal(err)
			}
			os.Chmod(dataDir, 0o555)
			t.Cleanup(func() { os.Chmod(dataDir, 0o755) })
		}
	} else {
		t.Log("running as root: chmod 0555 does not stop root's writes, so only the file-in-the-way case runs")
	}
	for name, spoil := range ways {
		t.Run(name, func(t *testing.T) {
			dir := t.TempDir()
			db := filepath.Join(dir, "clinic.db")
			st, err := store.Open(db)
			if err != nil {
				t.Fatal(err)
			}
			defer st.Close()
			spoil(t, st.DataDir())
			p := intake.New(st)
			_, err = p.IngestVisit(bg, intake.Request{PatientCode: "MC-0010", Date: "2024-06-01",
				Single: &intake.File{Path: writeFile(t, t.TempDir(), "v.edf", shortFile(t, 20))}})
			if err == nil {
				t.Fatal("ingest succeeded with an unwritable data folder")
			}
			if !strings.Contains(err.Error(), "data folder") || !strings.Contains(err.Error(), "v.edf") {
				t.Errorf("error %q does not say the data folder and the file", err)
			}
			if c := rowCounts(t, db); !allZero(c) {
				t.Errorf("rows left: %v", c)
			}
		})
	}
}

// killChildEnv makes the test binary run one batch ingest (see
// TestKillChild) instead of the tests.
const killChildEnv = "LONGWAVE_KILL_CHILD"

// TestKillChild is the child of TestKillDuringBatch: it ingests the files
// of the folder named by the environment into the database named there,
// one visit per file, until done or killed.
func TestKillChild(t *testing.T) {
	spec := os.Getenv(killChildEnv)
	if spec == "" {
		t.Skip("child of TestKillDuringBatch only")
	}
	db, dir, _ := strings.Cut(spec, "|")
	st, err := store.Open(db)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	p := intake.New(st)
	files, _ := filepath.Glob(filepath.Join(dir, "*.edf"))
	var wg sync.WaitGroup
	ch := make(chan string)
	for w := 0; w < 2; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for f := range ch {
				base := strings.TrimSuffix(filepath.Base(f), ".edf")
				code, date, _ := strings.Cut(base, "_")
				out, err := p.IngestVisit(bg, intake.Request{PatientCode: code, Date: date, BirthYear: 1950,
					Single: &intake.File{Path: f}})
				if err != nil {
					t.Error(err)
				} else if !out.Skipped {
					fmt.Println("stored") // the parent counts these to time its kill
				}
			}
		}()
	}
	for _, f := range files {
		ch <- f
	}
	close(ch)
	wg.Wait()
}

// TestKillDuringBatch kills a batch ingest (a child process) with SIGKILL
// at a random point, ten times over the same database, and checks after each
// kill that the database opens, passes PRAGMA integrity_check, and holds only
// whole visits: each with its conditions, markers and display products, and
// its recording files present with the content their hash names.
func TestKillDuringBatch(t *testing.T) {
	if os.Getenv(killChildEnv) != "" {
		t.Skip("in the child")
	}
	dir := t.TempDir()
	files := filepath.Join(dir, "in")
	const visits = 16
	for i := 0; i < visits; i++ {
		writeFile(t, files, fmt.Sprintf("MC-K%02d_%04d-01-15.edf", i%6, 2018+i/6), shortFile(t, uint64(100+i)))
	}
	db := filepath.Join(dir, "batch.db")
	rng := rand.New(rand.NewPCG(2026, 4)) // fixed seed: the same kill points each run
	killed, have := 0, 0
	for round := 0; round < 10; round++ {
		// Kill after a random number of the visits still to store, plus a
		// random delay: the kill lands inside a decode, a file copy or a
		// transaction, whatever the machine's speed (-race included).
		after := rng.IntN(visits - have)
		extra := time.Duration(rng.IntN(400)) * time.Millisecond
		cmd := exec.Command(os.Args[0], "-test.run=^TestKillChild$", "-test.count=1")
		cmd.Env = append(os.Environ(), killChildEnv+"="+db+"|"+files)
		stdout, err := cmd.StdoutPipe()
		if err != nil {
			t.Fatal(err)
		}
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		reached := make(chan struct{})
		go func() {
			sc := bufio.NewScanner(stdout)
			n := 0
			if after == 0 {
				close(reached)
			}
			for sc.Scan() {
				if sc.Text() == "stored" {
					if n++; n == after {
						close(reached)
					}
				}
			}
		}()
		done := make(chan error, 1)
		go func() { done <- cmd.Wait() }()
		wasKilled := false
		select {
		case err := <-done:
			if err != nil {
				t.Fatalf("round %d: child failed before the kill: %v", round, err)
			}
		case <-reached:
			select {
			case err := <-done:
				if err != nil {
					t.Fatalf("round %d: child failed before the kill: %v", round, err)
				}
			case <-time.After(extra):
				cmd.Process.Signal(syscall.SIGKILL)
				<-done
				killed++
				wasKilled = true
			}
		}
		have = checkWhole(t, db, round)
		t.Logf("round %d: killed %v after %d more visits + %v: %d whole visits", round, wasKilled, after, extra, have)
		if visits-have < 4 {
			// (Almost) everything is in: start again on a fresh database so
			// later kills still land mid-batch.
			for _, suffix := range []string{"", "-wal", "-shm"} {
				os.Remove(db + suffix)
			}
			os.RemoveAll(db + ".data")
			have = 0
		}
	}
	if killed < 5 {
		t.Errorf("only %d of 10 rounds were killed mid-batch; the kill times do not exercise the crash", killed)
	}
	// A last run to the end completes the batch over what the kills left.
	cmd := exec.Command(os.Args[0], "-test.run=^TestKillChild$", "-test.count=1")
	cmd.Env = append(os.Environ(), killChildEnv+"="+db+"|"+files)
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("final run: %v\n%s", err, out)
	}
	if n := checkWhole(t, db, 10); n != visits {
		t.Errorf("after the final run: %d visits, want %d", n, visits)
	}
}

// checkWhole opens the database as the program would and checks it; it
// returns the number of visits.
func checkWhole(t *testing.T, db string, round int) int {
	t.Helper()
	st, err := store.Open(db)
	if err != nil {
		t.Fatalf("round %d: reopen: %v", round, err)
	}
	defer st.Close()
	c, err := sql.Open("sqlite", db+"?_pragma=busy_timeout(10000)")
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	var ok string
	if err := c.QueryRow(`PRAGMA integrity_check`).Scan(&ok); err != nil || ok != "ok" {
		t.Fatalf("round %d: integrity_check = %q, %v", round, ok, err)
	}
	var fk int
	c.QueryRow(`SELECT count(*) FROM pragma_foreign_key_check`).Scan(&fk)
	if fk != 0 {
		t.Errorf("round %d: %d foreign key violations", round, fk)
	}
	var broken int
	err = c.QueryRow(`SELECT count(*) FROM visits v WHERE
		NOT EXISTS (SELECT 1 FROM conditions c WHERE c.visit_id = v.id) OR
		NOT EXISTS (SELECT 1 FROM display_products d WHERE d.visit_id = v.id) OR
		NOT EXISTS (SELECT 1 FROM recordings r WHERE r.visit_id = v.id) OR
		(SELECT count(*) FROM markers m WHERE m.visit_id = v.id) <> (SELECT count(*) FROM markers m2 WHERE m2.visit_id = (SELECT min(id) FROM visits))`).Scan(&broken)
	if err != nil {
		t.Fatal(err)
	}
	if broken != 0 {
		t.Errorf("round %d: %d visits are not whole", round, broken)
	}
	courses, err := st.AllVisitRecords(bg)
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for _, pc := range courses {
		for _, v := range pc.Visits {
			n++
			if len(v.Markers) == 0 {
				t.Errorf("round %d: visit %d has no markers", round, v.Visit.ID)
			}
			for _, r := range v.Recordings {
				if _, err := st.StoredRecordingPath(bg, r.SHA256); err != nil {
					t.Errorf("round %d: visit %d: %v", round, v.Visit.ID, err)
				}
			}
		}
	}
	checkContentAddressed(t, st.DataDir())
	return n
}

// TestConcurrentIngestAndRead runs 8 ingests and 8 readers at once for 20 s
// (issue 4, point 8) and checks that no call failed (in particular none
// with "database is locked") and that every visit reported stored is there.
func TestConcurrentIngestAndRead(t *testing.T) {
	const (
		writers  = 8
		readers  = 8
		duration = 20 * time.Second
	)
	p, db := newPipeline(t)
	base := shortFile(t, 200)
	// The first sample of the first signal (an EEG channel) sits right after
	// the header, whose length is the header field at offset 184 (EDF spec).
	hdrLen, err := strconv.Atoi(strings.TrimSpace(string(base[184:192])))
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(bg, duration)
	defer cancel()
	var (
		wg       sync.WaitGroup
		mu       sync.Mutex
		stored   []int64
		errs     []error
		reads    atomic.Int64
		attempts atomic.Int64
	)
	fail := func(err error) {
		mu.Lock()
		errs = append(errs, err)
		mu.Unlock()
	}
	for w := 0; w < writers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			for i := 0; ctx.Err() == nil; i++ {
				// A distinct recording each time: the same file with its
				// first sample changed (a different SHA-256, still valid).
				b := append([]byte(nil), base...)
				b[hdrLen], b[hdrLen+1] = byte(w), byte(i)
				attempts.Add(1)
				out, err := p.IngestVisit(context.WithoutCancel(ctx), intake.Request{
					PatientCode: fmt.Sprintf("MC-W%d", w), Date: time.Date(2000, 1, 1+i, 0, 0, 0, 0, time.UTC).Format(time.DateOnly),
					Single: &intake.File{Data: b, Name: "w.edf"}})
				if err != nil {
					fail(fmt.Errorf("writer %d visit %d: %w", w, i, err))
					return
				}
				mu.Lock()
				stored = append(stored, out.VisitID)
				mu.Unlock()
			}
		}(w)
	}
	for r := 0; r < readers; r++ {
		wg.Add(1)
		go func(r int) {
			defer wg.Done()
			for ctx.Err() == nil {
				var err error
				switch r % 4 {
				case 0:
					_, err = p.Store.AllVisitRecords(ctx, "pdr_frequency", "theta_alpha_ratio")
				case 1:
					_, err = p.Store.Patients(ctx)
				case 2:
					var pt store.Patient
					if pt, err = p.Store.PatientByCode(ctx, fmt.Sprintf("MC-W%d", r)); err == nil {
						_, err = p.Store.PatientVisits(ctx, pt.ID)
					} else if errors.Is(err, store.ErrNotFound) {
						err = nil
					}
				case 3:
					_, err = p.Store.VisitsWithOtherSettings(ctx, "v0", "x")
				}
				if err != nil && ctx.Err() == nil {
					fail(fmt.Errorf("reader %d: %w", r, err))
					return
				}
				reads.Add(1)
			}
		}(r)
	}
	wg.Wait()
	for _, err := range errs {
		if strings.Contains(err.Error(), "locked") || strings.Contains(err.Error(), "busy") {
			t.Errorf("lock error: %v", err)
		} else {
			t.Error(err)
		}
	}
	for _, id := range stored {
		if _, err := p.Store.Visit(bg, id); err != nil {
			t.Errorf("visit %d reported stored: %v", id, err)
		}
	}
	c := rowCounts(t, db)
	if c["visits"] != len(stored) || c["display_products"] != len(stored) || c["conditions"] != len(stored) {
		t.Errorf("counts %v, want %d visits", c, len(stored))
	}
	if len(stored) < writers {
		t.Errorf("only %d visits stored in %v", len(stored), duration)
	}
	t.Logf("%v: %d visits stored by %d writers, %d reads by %d readers", duration, len(stored), writers, reads.Load(), readers)
}
