package main

import (
	"bytes"
	"context"
	"database/sql"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"os/signal"
	"path/filepath"
	"slices"
	"strings"
	"syscall"
	"testing"
	"time"

	"longwave/server/intake"
)

// asProgram, set in a child's environment, makes the test binary run as the
// longwave program itself, so that tests start real separate processes
// without building the binary.
const asProgram = "LONGWAVE_TEST_AS_PROGRAM"

func TestMain(m *testing.M) {
	if os.Getenv(asProgram) == "1" {
		ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
		code := Run(ctx, os.Args[1:], os.Stdin, os.Stdout, os.Stderr)
		stop()
		os.Exit(code)
	}
	os.Exit(m.Run())
}

// program returns a command running longwave with args in a process of its
// own.
func program(args ...string) *exec.Cmd {
	c := exec.Command(os.Args[0], args...)
	c.Env = append(os.Environ(), asProgram+"=1")
	return c
}

func TestParseShard(t *testing.T) {
	env := func(kv ...string) func(string) string {
		m := map[string]string{}
		for i := 0; i+1 < len(kv); i += 2 {
			m[kv[i]] = kv[i+1]
		}
		return func(k string) string { return m[k] }
	}
	for _, c := range []struct {
		shard  string
		shards int
		env    func(string) string
		k, n   int
		err    string // in the usage error; "" none
	}{
		{"", 0, env(), 0, 0, ""},
		{"0/4", 0, env(), 0, 4, ""},
		{"3/4", 0, env(), 3, 4, ""},
		{"0/1", 0, env(), 0, 1, ""},
		{"4/4", 0, env(), 0, 0, "0 ≤ K < N"},
		{"-1/4", 0, env(), 0, 0, "0 ≤ K < N"},
		{"1/0", 0, env(), 0, 0, "0 ≤ K < N"},
		{"2", 0, env(), 0, 0, "want K/N"},
		{"1/4", 4, env(), 0, 0, "--shards goes with --shard auto"},
		{"", 4, env(), 0, 0, "--shards goes with --shard auto"},
		// SLURM: --array=0-3 and --array=1-4 both number the slices 0…3.
		{"auto", 0, env("SLURM_ARRAY_TASK_ID", "2", "SLURM_ARRAY_TASK_COUNT", "4", "SLURM_ARRAY_TASK_MIN", "0"), 2, 4, ""},
		{"auto", 0, env("SLURM_ARRAY_TASK_ID", "4", "SLURM_ARRAY_TASK_COUNT", "4", "SLURM_ARRAY_TASK_MIN", "1"), 3, 4, ""},
		{"auto", 4, env("SLURM_ARRAY_TASK_ID", "1", "SLURM_ARRAY_TASK_COUNT", "4", "SLURM_ARRAY_TASK_MIN", "1"), 0, 4, ""},
		{"auto", 0, env("SLURM_ARRAY_TASK_ID", "5", "SLURM_ARRAY_TASK_COUNT", "4", "SLURM_ARRAY_TASK_MIN", "1",
			"SLURM_ARRAY_TASK_STEP", "2"), 2, 4, ""},
		{"auto", 0, env("SLURM_ARRAY_TASK_ID", "4", "SLURM_ARRAY_TASK_COUNT", "4", "SLURM_ARRAY_TASK_MIN", "0"), 0, 0,
			"not one of the 4 tasks"},
		{"auto", 0, env("SLURM_ARRAY_TASK_ID", "9", "SLURM_ARRAY_TASK_COUNT", "3"), 0, 0, "--array=0-2"},
		{"auto", 0, env("SLURM_ARRAY_TASK_ID", "6", "SLURM_ARRAY_TASK_COUNT", "4", "SLURM_ARRAY_TASK_MIN", "0",
			"SLURM_ARRAY_TASK_MAX", "6", "SLURM_ARRAY_TASK_STEP", "2"), 3, 4, ""},
		// --array=1,2,9: three tasks, but not a range; every task refused.
		{"auto", 0, env("SLURM_ARRAY_TASK_ID", "2", "SLURM_ARRAY_TASK_COUNT", "3", "SLURM_ARRAY_TASK_MIN", "1",
			"SLURM_ARRAY_TASK_MAX", "9"), 0, 0, "submit the array as one range"},
		{"auto", 0, env("SLURM_ARRAY_TASK_ID", "1"), 0, 0, "SLURM_ARRAY_TASK_COUNT is not"},
		{"auto", 0, env("SLURM_ARRAY_TASK_ID", "one", "SLURM_ARRAY_TASK_COUNT", "4"), 0, 0, `SLURM_ARRAY_TASK_ID="one"`},
		{"auto", 3, env("SLURM_ARRAY_TASK_ID", "1", "SLURM_ARRAY_TASK_COUNT", "4"), 0, 0, "the SLURM array has 4 tasks"},
		// Kubernetes: the 0-based completion index, the count from --shards.
		{"auto", 4, env("JOB_COMPLETION_INDEX", "0"), 0, 4, ""},
		{"auto", 4, env("JOB_COMPLETION_INDEX", "3"), 3, 4, ""},
		{"auto", 4, env("JOB_COMPLETION_INDEX", "4"), 0, 0, "not below --shards 4"},
		{"auto", 0, env("JOB_COMPLETION_INDEX", "1"), 0, 0, "needs --shards N"},
		{"auto", -2, env("JOB_COMPLETION_INDEX", "1"), 0, 0, "positive count"},
		{"auto", 4, env("JOB_COMPLETION_INDEX", "1", "SLURM_ARRAY_TASK_ID", "1"), 0, 0, "both"},
		{"auto", 4, env(), 0, 0, "neither SLURM_ARRAY_TASK_ID"},
	} {
		k, n, err := parseShard(c.shard, c.shards, c.env)
		var ue usageError
		switch {
		case c.err == "" && err != nil:
			t.Errorf("--shard %q --shards %d: %v", c.shard, c.shards, err)
		case c.err != "" && (!errors.As(err, &ue) || !strings.Contains(err.Error(), c.err)):
			t.Errorf("--shard %q --shards %d: error %v, want a usage error saying %q", c.shard, c.shards, err, c.err)
		case c.err == "" && (k != c.k || n != c.n):
			t.Errorf("--shard %q --shards %d: slice %d of %d, want %d of %d", c.shard, c.shards, k, n, c.k, c.n)
		}
	}
	// Through the command: a usage error, exit 2, nothing created.
	dir := t.TempDir()
	t.Setenv("SLURM_ARRAY_TASK_ID", "")
	t.Setenv("JOB_COMPLETION_INDEX", "")
	db := filepath.Join(dir, "p.db")
	code, _, stderr := run(t, "", "ingest", "--db", db, "--bids", dir, "--shard", "auto", "--shards", "4")
	if code != exitUsage || !strings.Contains(stderr, "neither SLURM_ARRAY_TASK_ID") {
		t.Errorf("auto without a scheduler: exit %d, %q", code, stderr)
	}
	if _, err := os.Stat(db); err == nil {
		t.Error("a wrong invocation created the database")
	}
}

// writeShardDataset lays out a BIDS dataset of subjects sub-01…sub-NN with
// two sessions each a year apart, every file different except sub-01's
// two sessions, which hold the same bytes (ses-01 recorded first), and
// sub-03's, whose ses-02 was recorded first. It returns the sessions' labels.
func writeShardDataset(t *testing.T, root string, subjects int) []string {
	t.Helper()
	var participants, labels []string
	participants = append(participants, "participant_id\tage\tsex")
	for s := 1; s <= subjects; s++ {
		sub := fmt.Sprintf("sub-%02d", s)
		participants = append(participants, fmt.Sprintf("%s\t%d\t%s", sub, 60+s, []string{"F", "M"}[s%2]))
		first, second := fmt.Sprintf("2021-%02d-04T09:00:00", s%12+1), fmt.Sprintf("2022-%02d-07T10:00:00", s%12+1)
		if s == 3 {
			first, second = second, first
		}
		os.MkdirAll(filepath.Join(root, sub), 0o755)
		os.WriteFile(filepath.Join(root, sub, sub+"_sessions.tsv"),
			[]byte("session_id\tacq_time\nses-01\t"+first+"\nses-02\t"+second+"\n"), 0o644)
		var one []byte
		for i, ses := range []string{"ses-01", "ses-02"} {
			dir := filepath.Join(root, sub, ses, "eeg")
			os.MkdirAll(dir, 0o755)
			name := sub + "_" + ses + "_task-rest_eeg.edf"
			if i == 1 && (s == 1 || s == 3) {
				os.WriteFile(filepath.Join(dir, name), one, 0o644)
			} else {
				p := recording(t, dir, name, uint64(100+10*s+i))
				one, _ = os.ReadFile(p)
			}
			labels = append(labels, sub+"/"+ses)
		}
	}
	os.WriteFile(filepath.Join(root, "participants.tsv"), []byte(strings.Join(participants, "\n")+"\n"), 0o644)
	os.WriteFile(filepath.Join(root, "dataset_description.json"), []byte(`{"Name": "longwave shard test (invented)", "BIDSVersion": "1.9.0"}`), 0o644)
	return labels
}

// exportLines is the CSV export of db, rows sorted, header first.
func exportLines(t *testing.T, db string) []string {
	t.Helper()
	code, out, stderr := run(t, "", "export", "--db", db, "--format", "csv")
	if code != exitDone {
		t.Fatalf("export %s: exit %d %s", db, code, stderr)
	}
	lines := strings.Split(strings.TrimSpace(out), "\n")
	slices.Sort(lines[1:])
	return lines
}

// visitCount counts the visits of a database another process is writing,
// 0 while it does not exist yet.
func visitCount(db string) int {
	if _, err := os.Stat(db); err != nil {
		return 0
	}
	c, err := sql.Open("sqlite", db+"?_pragma=busy_timeout(10000)&_pragma=query_only(1)")
	if err != nil {
		return 0
	}
	defer c.Close()
	var n int
	if err := c.QueryRow(`SELECT count(*) FROM visits`).Scan(&n); err != nil {
		return 0
	}
	return n
}

// TestShardedIngestAndMerge: four shards ingested by four processes and
// merged give the export of one ingest of the whole dataset, rows compared
// after sorting; the largest shard is killed mid-run first and run again;
// merging twice adds nothing.
func TestShardedIngestAndMerge(t *testing.T) {
	const shards = 4
	dir := t.TempDir()
	root := filepath.Join(dir, "ds")
	labels := writeShardDataset(t, root, 6)
	count := make([]int, shards)
	for _, l := range labels {
		count[intake.ShardOf(l, shards)]++
	}
	// sub-01's copy of one file lies in two shards: only the merge can
	// apply the duplicate rule.
	if intake.ShardOf("sub-01/ses-01", shards) == intake.ShardOf("sub-01/ses-02", shards) {
		t.Fatal("test dataset: sub-01's sessions share a shard")
	}
	whole := filepath.Join(dir, "whole.db")
	code, out, stderr := run(t, "", "ingest", "--db", whole, "--bids", root, "--workers", "2")
	if code != exitDone || !strings.Contains(out, "10 ingested, 0 already known, 0 failed, 2 duplicates") {
		t.Fatalf("whole ingest: exit %d\n%s%s", code, out, stderr)
	}
	for _, want := range []string{"duplicate sub-01/ses-02: holds the same file as the earlier session sub-01/ses-01",
		"duplicate sub-03/ses-01: holds the same file as the earlier session sub-03/ses-02"} {
		if !strings.Contains(out, want) {
			t.Errorf("whole ingest does not report %q:\n%s", want, out)
		}
	}

	part := func(k int) string { return filepath.Join(dir, fmt.Sprintf("part-%d.db", k)) }
	shardArgs := func(k int) []string {
		return []string{"ingest", "--bids", root, "--shard", fmt.Sprintf("%d/%d", k, shards), "--db", part(k), "--workers", "1"}
	}
	// The largest shard, killed once it has stored a visit.
	big := 0
	for k := range count {
		if count[k] > count[big] {
			big = k
		}
	}
	killed := program(shardArgs(big)...)
	if err := killed.Start(); err != nil {
		t.Fatal(err)
	}
	deadline := time.Now().Add(2 * time.Minute)
	for visitCount(part(big)) == 0 && time.Now().Before(deadline) {
		time.Sleep(20 * time.Millisecond)
	}
	killed.Process.Kill()
	killed.Wait()
	stored := visitCount(part(big))
	t.Logf("shard %d killed after %d of its %d sessions", big, stored, count[big])
	if stored == 0 {
		t.Fatal("the shard stored nothing before it was killed")
	}

	// Every shard in a process of its own, at once (the killed one again).
	type result struct {
		k        int
		out, err bytes.Buffer
		cmd      *exec.Cmd
	}
	var rs []*result
	for k := 0; k < shards; k++ {
		r := &result{k: k, cmd: program(shardArgs(k)...)}
		r.cmd.Stdout, r.cmd.Stderr = &r.out, &r.err
		if err := r.cmd.Start(); err != nil {
			t.Fatal(err)
		}
		rs = append(rs, r)
	}
	for _, r := range rs {
		if err := r.cmd.Wait(); err != nil {
			t.Fatalf("shard %d: %v\n%s%s", r.k, err, r.out.String(), r.err.String())
		}
		want := fmt.Sprintf("%d of the 12 sessions in %s (shard %d of 4, numbered from 0)", count[r.k], root, r.k)
		if !strings.Contains(r.out.String(), want) {
			t.Errorf("shard %d says %q, want %q", r.k, r.out.String(), want)
		}
		if r.k == big && !strings.Contains(r.out.String(), fmt.Sprintf("%d already known", stored)) {
			t.Errorf("re-run of the killed shard: %q, want %d already known", r.out.String(), stored)
		}
	}

	clinic := filepath.Join(dir, "clinic.db")
	args := []string{"merge", "--db", clinic}
	for k := shards - 1; k >= 0; k-- { // any order
		args = append(args, part(k))
	}
	mergeCmd := program(args...)
	var mout, merr bytes.Buffer
	mergeCmd.Stdout, mergeCmd.Stderr = &mout, &merr
	if err := mergeCmd.Run(); err != nil {
		t.Fatalf("merge: %v\n%s%s", err, mout.String(), merr.String())
	}
	if !strings.Contains(mout.String(), "10 visits added, 0 already there, 2 duplicates") ||
		!strings.Contains(mout.String(), "10 recording files copied") {
		t.Errorf("merge says %q", mout.String())
	}
	if !strings.Contains(mout.String(), "duplicate sub-01 2022-02-07 in part-") || !strings.Contains(mout.String(), "same file as the visit sub-01 2021-02-04") {
		t.Errorf("merge does not report sub-01's second session as a duplicate: %q", mout.String())
	}
	want, got := exportLines(t, whole), exportLines(t, clinic)
	if len(want) < 100 {
		t.Fatalf("whole export has only %d lines", len(want))
	}
	if !slices.Equal(got, want) {
		t.Errorf("merged export (%d lines) differs from the whole ingest's (%d lines)", len(got), len(want))
		for i := range min(len(got), len(want)) {
			if got[i] != want[i] {
				t.Errorf("first difference:\n got %s\nwant %s", got[i], want[i])
				break
			}
		}
	}
	// Twice: nothing added.
	code, out, stderr = run(t, "", args...)
	if code != exitDone || !strings.Contains(out, "0 visits added, 10 already there") {
		t.Errorf("second merge: exit %d %q %q", code, out, stderr)
	}
	if again := exportLines(t, clinic); !slices.Equal(again, want) {
		t.Error("second merge changed the export")
	}
}

func TestMergeCommandRefuses(t *testing.T) {
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a.db"), filepath.Join(dir, "b.db")
	f1, f2 := recording(t, dir, "one.edf", 11), recording(t, dir, "two.edf", 12)
	if code, _, stderr := run(t, "", "ingest", "--db", a, "--patient", "MC-7", "--date", "2024-02-02", "--birth-year", "1950", f1); code != exitDone {
		t.Fatal(stderr)
	}
	if code, _, stderr := run(t, "", "ingest", "--db", b, "--patient", "MC-7", "--date", "2025-02-03", "--birth-year", "1951", f2); code != exitDone {
		t.Fatal(stderr)
	}
	clinic := filepath.Join(dir, "clinic.db")
	code, out, stderr := run(t, "", "merge", "--db", clinic, a, b)
	if code != exitFailed || !strings.Contains(out, "refused: patient MC-7: birth year 1950 in a.db, 1951 in b.db") ||
		!strings.Contains(stderr, "nothing was merged") {
		t.Errorf("conflicting birth years: exit %d\n%s%s", code, out, stderr)
	}
	if n := visitCount(clinic); n != 0 {
		t.Errorf("a refused merge stored %d visits", n)
	}
	if code, _, stderr := run(t, "", "merge", "--db", clinic, filepath.Join(dir, "missing.db")); code != exitFailed || !strings.Contains(stderr, "missing.db: no such database file") {
		t.Errorf("missing part: exit %d %q", code, stderr)
	}
	if _, err := os.Stat(filepath.Join(dir, "missing.db")); err == nil {
		t.Error("merge created the missing part")
	}
	if code, _, _ := run(t, "", "merge", "--db", clinic); code != exitUsage {
		t.Errorf("no parts: exit %d, want %d", code, exitUsage)
	}
}
