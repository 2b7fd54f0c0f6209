package ingest

import (
	"fmt"
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
	return Decode(f, st.Size(), name, opt)
}

// unwrapPath drops the full path from an *os.PathError (directory names
// can carry a patient's name); the cause stays available to errors.Is.
func unwrapPath(err error) error {
	if pe, ok := err.(*os.PathError); ok {
		return pe.Err
	}
	return err
}
