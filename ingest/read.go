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
	rec, err := Decode(f, st.Size(), name, opt)
	if err != nil {
		return nil, err
	}
	h := sha256.New()
	if _, err := io.Copy(h, io.NewSectionReader(f, 0, st.Size())); err != nil {
		return nil, fmt.Errorf("ingest: read %s for its SHA-256: %w", name, unwrapPath(err))
	}
	rec.SHA256 = hex.EncodeToString(h.Sum(nil))
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
