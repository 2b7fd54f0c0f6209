package store

import (
	"bytes"
	"context"
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// limitedWriter fails with a "no space" error once n bytes are written: a
// full disk in the middle of a recording file.
type limitedWriter struct {
	w io.Writer
	n int
}

var errDiskFull = errors.New("no space left on device (simulated)")

func (l *limitedWriter) Write(p []byte) (int, error) {
	if len(p) > l.n {
		k, _ := l.w.Write(p[:l.n])
		l.n = 0
		return k, errDiskFull
	}
	l.n -= len(p)
	return l.w.Write(p)
}

// filesIn lists every file under dir (temporary ones included).
func filesIn(tb testing.TB, dir string) []string {
	tb.Helper()
	var out []string
	filepath.WalkDir(dir, func(p string, d os.DirEntry, err error) error {
		if err == nil && !d.IsDir() {
			out = append(out, p)
		}
		return nil
	})
	return out
}

func TestPutRecording(t *testing.T) {
	s := mustOpen(t)
	content := bytes.Repeat([]byte("0123456789abcdef"), 10000)
	sha := shaOf(content)
	path, created, err := s.PutRecording(sha, "BDF", bytes.NewReader(content))
	if err != nil || !created {
		t.Fatalf("PutRecording: %v created %v", err, created)
	}
	if want := filepath.Join(s.DataDir(), sha[:2], sha+".bdf"); path != want {
		t.Errorf("path = %s, want %s", path, want)
	}
	if got, _ := os.ReadFile(path); !bytes.Equal(got, content) {
		t.Error("stored content differs")
	}
	// Again: already there, the reader is not consumed.
	r := strings.NewReader("never read")
	if _, created, err := s.PutRecording(sha, "BDF", r); err != nil || created || r.Len() != len("never read") {
		t.Errorf("second put: created %v err %v, read %d bytes", created, err, len("never read")-r.Len())
	}
	if err := s.RemoveRecordingFile(context.Background(), sha, "BDF"); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(path); !errors.Is(err, os.ErrNotExist) {
		t.Error("RemoveRecordingFile left the file")
	}
	if _, _, err := s.PutRecording("ABC", "EDF", bytes.NewReader(content)); !errors.Is(err, ErrInvalid) {
		t.Errorf("bad hash: %v", err)
	}
}

func TestPutRecordingLeavesNoPartFile(t *testing.T) {
	content := bytes.Repeat([]byte{1, 2, 3, 4, 5, 6, 7}, 300000) // 2.1 MB: several writes
	sha := shaOf(content)
	tests := []struct {
		name  string
		setup func(s *Store)
		src   io.Reader
		want  error
	}{
		{"disk full after 1 MB", func(s *Store) {
			s.wrapWriter = func(w io.Writer) io.Writer { return &limitedWriter{w: w, n: 1 << 20} }
		}, bytes.NewReader(content), errDiskFull},
		{"content is not what the hash says", func(*Store) {}, bytes.NewReader(content[1:]), ErrHashMismatch},
		{"reader fails midway", func(*Store) {}, io.MultiReader(bytes.NewReader(content[:5000]), iotestErr{}), errRead},
	}
	for _, tt := range tests {
		s := mustOpen(t)
		tt.setup(s)
		_, _, err := s.PutRecording(sha, "EDF", tt.src)
		if !errors.Is(err, tt.want) {
			t.Errorf("%s: err = %v, want %v", tt.name, err, tt.want)
		}
		if files := filesIn(t, s.DataDir()); len(files) != 0 {
			t.Errorf("%s: files left: %v", tt.name, files)
		}
	}
}

var errRead = errors.New("read failed (simulated)")

type iotestErr struct{}

func (iotestErr) Read([]byte) (int, error) { return 0, errRead }

func TestStoredRecordingPath(t *testing.T) {
	ctx := context.Background()
	s := mustOpen(t)
	content := []byte("stored for later")
	nv := sampleVisit("MC-0008", "2024-02-02", content, 1)
	if _, _, err := s.PutRecording(nv.Recordings[0].SHA256, "EDF+C", bytes.NewReader(content)); err != nil {
		t.Fatal(err)
	}
	if _, err := s.SaveVisit(ctx, nv); err != nil {
		t.Fatal(err)
	}
	p, err := s.StoredRecordingPath(ctx, shaOf(content))
	if err != nil || !strings.HasSuffix(p, ".edf") {
		t.Fatalf("StoredRecordingPath = %s, %v", p, err)
	}
	// A referenced file is not removed.
	s.RemoveRecordingFile(ctx, shaOf(content), "EDF+C")
	if _, err := os.Stat(p); err != nil {
		t.Errorf("referenced file removed: %v", err)
	}
	if _, err := s.StoredRecordingPath(ctx, shaOf([]byte("x"))); !errors.Is(err, ErrNotFound) {
		t.Errorf("unknown hash: %v", err)
	}
	os.Remove(p)
	if _, err := s.StoredRecordingPath(ctx, shaOf(content)); err == nil || !strings.Contains(err.Error(), "stored file") {
		t.Errorf("missing file: %v", err)
	}
}

func TestOpenSweepsStaleTemporaryFiles(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "c.db")
	sub := filepath.Join(db+".data", "ab")
	os.MkdirAll(sub, 0o755)
	stale, fresh := filepath.Join(sub, ".incoming-1"), filepath.Join(sub, ".incoming-2")
	os.WriteFile(stale, []byte("left by a kill"), 0o644)
	os.WriteFile(fresh, []byte("being written now"), 0o644)
	old := fixedClock().Add(-2 * staleIncoming)
	os.Chtimes(stale, old, old)
	now := fixedClock()
	os.Chtimes(fresh, now, now)
	s, err := Open(db, WithClock(fixedClock))
	if err != nil {
		t.Fatal(err)
	}
	s.Close()
	if _, err := os.Stat(stale); !errors.Is(err, os.ErrNotExist) {
		t.Error("stale temporary file kept")
	}
	if _, err := os.Stat(fresh); err != nil {
		t.Error("a temporary file being written was removed")
	}
}
