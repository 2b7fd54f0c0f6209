package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// BenchmarkShardedIngest40 ingests a 40-session synthetic BIDS dataset
// (20 subjects × 2 sessions, two-minute 19-channel EDF+C files at 250 Hz)
// as four shards, one process after another (each with two workers), and
// merges them in a fifth. It reports the mean and longest shard time and
// the merge time:
//
//	go test ./cmd/longwave/ -run '^$' -bench ShardedIngest40 -benchtime 1x
func BenchmarkShardedIngest40(b *testing.B) {
	const shards = 4
	dir := b.TempDir()
	root := filepath.Join(dir, "ds")
	var participants []string
	participants = append(participants, "participant_id\tage\tsex")
	for s := 1; s <= 20; s++ {
		sub := fmt.Sprintf("sub-%02d", s)
		participants = append(participants, fmt.Sprintf("%s\t%d\tF", sub, 60+s))
		os.MkdirAll(filepath.Join(root, sub), 0o755)
		os.WriteFile(filepath.Join(root, sub, sub+"_sessions.tsv"), []byte(fmt.Sprintf(
			"session_id\tacq_time\nses-01\t2021-%02d-04T09:00:00\nses-02\t2022-%02d-07T10:00:00\n", s%12+1, s%12+1)), 0o644)
		for i, ses := range []string{"ses-01", "ses-02"} {
			d := filepath.Join(root, sub, ses, "eeg")
			os.MkdirAll(d, 0o755)
			recording(b, d, sub+"_"+ses+"_task-rest_eeg.edf", uint64(500+10*s+i))
		}
	}
	os.WriteFile(filepath.Join(root, "participants.tsv"), []byte(strings.Join(participants, "\n")+"\n"), 0o644)
	b.ResetTimer()
	var shardSum, shardMax, mergeSum time.Duration
	for n := 0; n < b.N; n++ {
		out := filepath.Join(dir, fmt.Sprint("run", n))
		os.MkdirAll(out, 0o755)
		args := []string{"merge", "--db", filepath.Join(out, "cohort.db")}
		for k := 0; k < shards; k++ {
			part := filepath.Join(out, fmt.Sprintf("part-%d.db", k))
			start := time.Now()
			if msg, err := program("ingest", "--bids", root, "--shard", fmt.Sprintf("%d/%d", k, shards), "--db", part,
				"--workers", "2").CombinedOutput(); err != nil {
				b.Fatalf("shard %d: %v\n%s", k, err, msg)
			}
			took := time.Since(start)
			b.Logf("shard %d of %d: %.2f s", k, shards, took.Seconds())
			shardSum += took
			shardMax = max(shardMax, took)
			args = append(args, part)
		}
		start := time.Now()
		msg, err := program(args...).CombinedOutput()
		if err != nil || !strings.Contains(string(msg), "40 visits added") {
			b.Fatalf("merge: %v\n%s", err, msg)
		}
		mergeSum += time.Since(start)
	}
	b.ReportMetric(shardSum.Seconds()/float64(b.N*shards), "s/shard")
	b.ReportMetric(shardMax.Seconds(), "s/longest-shard")
	b.ReportMetric(mergeSum.Seconds()/float64(b.N), "s/merge")
}
