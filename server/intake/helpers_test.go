package intake_test

import (
	"context"
	"crypto/sha256"
	"database/sql"
	"encoding/hex"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"

	"longwave/ingest"
	"longwave/ingest/synth"
	"longwave/server/intake"
	"longwave/server/store"
)

// shortSpec is a healthy two-minute EDF+C (eyes closed 0–65 s, open
// 65–120 s) at 250 Hz with the 19 channels: quick to make and to analyse,
// long enough for every marker (metrics needs 30 s of clean data a state).
func shortSpec(seed uint64) synth.Spec {
	s := synth.Default()
	s.Seed = seed
	s.Duration = 120
	s.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 65}, {State: ingest.EyesOpen, Start: 65, End: 120}}
	return s
}

var synthCache sync.Map // seed → []byte

// synthBytes renders a spec (cached by seed for shortSpec).
func synthBytes(tb testing.TB, s synth.Spec) []byte {
	tb.Helper()
	b, err := synth.Bytes(s)
	if err != nil {
		tb.Fatalf("synth.Bytes: %v", err)
	}
	return b
}

func shortFile(tb testing.TB, seed uint64) []byte {
	tb.Helper()
	if b, ok := synthCache.Load(seed); ok {
		return b.([]byte)
	}
	b := synthBytes(tb, shortSpec(seed))
	synthCache.Store(seed, b)
	return b
}

// writeFile writes b to dir/name and returns the path.
func writeFile(tb testing.TB, dir, name string, b []byte) string {
	tb.Helper()
	p := filepath.Join(dir, name)
	if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
		tb.Fatal(err)
	}
	if err := os.WriteFile(p, b, 0o644); err != nil {
		tb.Fatal(err)
	}
	return p
}

// newPipeline opens a fresh store in a temporary folder.
func newPipeline(tb testing.TB) (*intake.Pipeline, string) {
	tb.Helper()
	db := filepath.Join(tb.TempDir(), "clinic.db")
	st, err := store.Open(db)
	if err != nil {
		tb.Fatal(err)
	}
	tb.Cleanup(func() { st.Close() })
	return intake.New(st), db
}

// storeTables are every table the store writes for a visit.
var storeTables = []string{"patients", "visits", "recordings", "conditions", "markers", "flags", "display_products"}

// rowCounts counts the rows of every store table, through a connection of
// its own.
func rowCounts(tb testing.TB, db string) map[string]int {
	tb.Helper()
	c, err := sql.Open("sqlite", db+"?_pragma=busy_timeout(10000)&_pragma=query_only(1)")
	if err != nil {
		tb.Fatal(err)
	}
	defer c.Close()
	out := map[string]int{}
	for _, t := range storeTables {
		var n int
		if err := c.QueryRow(`SELECT count(*) FROM ` + t).Scan(&n); err != nil {
			tb.Fatalf("count %s: %v", t, err)
		}
		out[t] = n
	}
	return out
}

func allZero(m map[string]int) bool {
	for _, n := range m {
		if n != 0 {
			return false
		}
	}
	return true
}

// dataFiles lists the files under the data folder by final name (temporary
// ".incoming-" files apart).
func dataFiles(tb testing.TB, dir string) (final, temp []string) {
	tb.Helper()
	filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return nil
		}
		if strings.HasPrefix(d.Name(), ".incoming-") {
			temp = append(temp, p)
		} else {
			final = append(final, p)
		}
		return nil
	})
	return final, temp
}

// checkContentAddressed fails when a stored file's content does not hash to
// its name: a half-written file under a final name.
func checkContentAddressed(tb testing.TB, dir string) int {
	tb.Helper()
	final, _ := dataFiles(tb, dir)
	for _, p := range final {
		b, err := os.ReadFile(p)
		if err != nil {
			tb.Errorf("read %s: %v", p, err)
			continue
		}
		h := sha256.Sum256(b)
		name := strings.TrimSuffix(filepath.Base(p), filepath.Ext(p))
		if hex.EncodeToString(h[:]) != name {
			tb.Errorf("%s holds content of another hash (a part file under a final name)", p)
		}
	}
	return len(final)
}

func sha(b []byte) string {
	h := sha256.Sum256(b)
	return hex.EncodeToString(h[:])
}

var bg = context.Background()
