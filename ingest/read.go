package ingest

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io"
	"os"
	"path/filepath"
)

// ReadFile decodes the EDF, EDF+ or BDF file at path (see Decode); the
// recording's Name and every error name only the file's base name.
func ReadFile(path string, opt Options) (*Recording, error) {
	name := filepath.Base(path)
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("ingest: open %s: %w", name, unwrapPath(err))
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return nil, fmt.Errorf("ingest: stat %s: %w", name, unwrapPath(err))
	}
	if !st.Mode().IsRegular() {
		return nil, fmt.Errorf("ingest: %s: not a regular file", name)
	}
	// The SHA-256 is read on its own goroutine through a section reader
	// (positioned reads, so it shares the file with Decode without a
	// shared offset): on a 30-minute file the hash and the decode each take
	// tens of milliseconds and overlap on two cores.
	type hashed struct {
		sum string
		err error
	}
	done := make(chan hashed, 1)
	go func() {
		h := sha256.New()
		if _, err := io.Copy(h, io.NewSectionReader(f, 0, st.Size())); err != nil {
			done <- hashed{err: err}
			return
		}
		done <- hashed{sum: hex.EncodeToString(h.Sum(nil))}
	}()
	rec, err := Decode(f, st.Size(), name, opt) // ReadAt on *os.File is safe alongside the hash
	sum := <-done                               // always collected, so the file is closed only after both reads
	if err != nil {
		return nil, err
	}
	if sum.err != nil {
		return nil, fmt.Errorf("ingest: read %s for its SHA-256: %w", name, unwrapPath(sum.err))
	}
	rec.SHA256 = sum.sum
	return rec, nil
}

// unwrapPath drops the full path from an *os.PathError (directory names
// can carry a patient's name); the cause stays available to errors.Is.
func unwrapPath(err error) error {
	if pe, ok := err.(*os.PathError); ok {
		return pe.Err
	}
	return err
}
