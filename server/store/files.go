package store

import (
	"context"
	"crypto/sha256"
	"database/sql"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"
)

// Recording files are kept content-addressed in the data folder:
// <data>/<first two hex digits>/<sha256><ext>, ext ".bdf" for BDF formats
// and ".edf" otherwise. A file is written under a temporary name in its
// final folder, synced, then renamed into place and the folder synced, so a
// crash leaves either no file or the whole file under the final name, never
// a part of one. A file is written before the transaction that records it
// commits: a crash between the two leaves an unreferenced file (harmless,
// reused when the same recording comes again), never a row without its file.

// staleIncoming is the age after which a temporary ".incoming-" file is
// taken as left by a crash (a copy in progress takes seconds) and removed
// when a store is opened.
const staleIncoming = time.Hour

// sweepIncoming removes temporary files that a killed process left in the
// data folder. Best effort: a failure only leaves the files.
func (s *Store) sweepIncoming() {
	cutoff := s.now().Add(-staleIncoming)
	subdirs, err := os.ReadDir(s.dataDir)
	if err != nil {
		return
	}
	for _, d := range subdirs {
		if !d.IsDir() || len(d.Name()) != 2 {
			continue
		}
		dir := filepath.Join(s.dataDir, d.Name())
		files, err := os.ReadDir(dir)
		if err != nil {
			continue
		}
		for _, f := range files {
			if !strings.HasPrefix(f.Name(), ".incoming-") {
				continue
			}
			if info, err := f.Info(); err == nil && info.ModTime().Before(cutoff) {
				os.Remove(filepath.Join(dir, f.Name()))
			}
		}
	}
}

// ErrHashMismatch: the bytes written do not hash to the SHA-256 given.
var ErrHashMismatch = errors.New("store: recording content does not match its SHA-256")

// validSHA reports whether sha is 64 lower-case hex digits.
func validSHA(sha string) bool {
	if len(sha) != 64 {
		return false
	}
	for _, c := range sha {
		if !('0' <= c && c <= '9' || 'a' <= c && c <= 'f') {
			return false
		}
	}
	return true
}

func extFor(format string) string {
	if strings.HasPrefix(format, "BDF") {
		return ".bdf"
	}
	return ".edf"
}

// RecordingFilePath is where the file with that hash and format lives in
// the data folder (whether or not it is there).
func (s *Store) RecordingFilePath(sha, format string) string {
	return filepath.Join(s.dataDir, sha[:2], sha+extFor(format))
}

// PutRecording writes src into the data folder under its hash and returns
// its path. created is false when the file was already there (the content is
// then not read). The SHA-256 of what is written is checked against sha; on
// any error no file is left under the final name and the temporary file is
// removed.
func (s *Store) PutRecording(sha, format string, src io.Reader) (path string, created bool, err error) {
	if !validSHA(sha) {
		return "", false, fmt.Errorf("%w: recording hash %q: want 64 lower-case hex digits", ErrInvalid, sha)
	}
	path = s.RecordingFilePath(sha, format)
	if st, err := os.Stat(path); err == nil && st.Mode().IsRegular() {
		return path, false, nil
	}
	dir := filepath.Dir(path)
	if err := os.MkdirAll(dir, 0o750); err != nil {
		return "", false, fmt.Errorf("store: data folder: %w", err)
	}
	tmp, err := os.CreateTemp(dir, ".incoming-*")
	if err != nil {
		return "", false, fmt.Errorf("store: data folder: %w", err)
	}
	defer func() {
		if err != nil {
			tmp.Close()
			os.Remove(tmp.Name())
		}
	}()
	h := sha256.New()
	var w io.Writer = tmp
	if s.wrapWriter != nil {
		w = s.wrapWriter(w)
	}
	if _, err = io.Copy(io.MultiWriter(w, h), src); err != nil {
		return "", false, fmt.Errorf("store: write recording %s: %w", sha[:12], err)
	}
	if got := hex.EncodeToString(h.Sum(nil)); got != sha {
		err = fmt.Errorf("%w: want %s, wrote %s", ErrHashMismatch, sha, got)
		return "", false, err
	}
	if err = tmp.Sync(); err != nil {
		return "", false, fmt.Errorf("store: write recording %s: %w", sha[:12], err)
	}
	if err = tmp.Close(); err != nil {
		return "", false, fmt.Errorf("store: write recording %s: %w", sha[:12], err)
	}
	if err = os.Rename(tmp.Name(), path); err != nil {
		return "", false, fmt.Errorf("store: write recording %s: %w", sha[:12], err)
	}
	if err = syncDir(dir); err != nil {
		os.Remove(path)
		return "", false, fmt.Errorf("store: write recording %s: %w", sha[:12], err)
	}
	return path, true, nil
}

// syncDir makes a rename in dir durable.
func syncDir(dir string) error {
	d, err := os.Open(dir)
	if err != nil {
		return err
	}
	defer d.Close()
	return d.Sync()
}

// RemoveRecordingFile deletes a file PutRecording created, when the visit
// that was to reference it was not saved. It refuses while a recording row
// still references the hash.
func (s *Store) RemoveRecordingFile(ctx context.Context, sha, format string) error {
	if !validSHA(sha) {
		return fmt.Errorf("%w: recording hash %q", ErrInvalid, sha)
	}
	var n int
	if err := s.w.QueryRowContext(ctx, `SELECT count(*) FROM recordings WHERE sha256 = ?`, sha).Scan(&n); err != nil {
		return fmt.Errorf("store: remove recording %s: %w", sha[:12], err)
	}
	if n > 0 {
		return nil
	}
	err := os.Remove(s.RecordingFilePath(sha, format))
	if err != nil && !errors.Is(err, os.ErrNotExist) {
		return fmt.Errorf("store: remove recording %s: %w", sha[:12], err)
	}
	return nil
}

// StoredRecordingPath returns the path of the stored file of the recording
// with that hash, ErrNotFound when no recording row has it, and an error
// naming the path when the row exists but the file is missing.
func (s *Store) StoredRecordingPath(ctx context.Context, sha string) (string, error) {
	var format string
	err := s.r.QueryRowContext(ctx, `SELECT format FROM recordings WHERE sha256 = ? LIMIT 1`, sha).Scan(&format)
	if errors.Is(err, sql.ErrNoRows) {
		return "", fmt.Errorf("%w: recording %s", ErrNotFound, sha)
	}
	if err != nil {
		return "", fmt.Errorf("store: recording %s: %w", sha, err)
	}
	path := s.RecordingFilePath(sha, format)
	if _, err := os.Stat(path); err != nil {
		return "", fmt.Errorf("store: recording %s: stored file: %w", sha, err)
	}
	return path, nil
}
