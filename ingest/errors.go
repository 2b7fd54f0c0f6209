package ingest

import (
	"errors"
	"fmt"
	"strings"
)

// Sentinel errors that callers branch on with errors.Is.
var (
	// ErrUnsupported: the file is of a kind longwave does not read (a data
	// format other than EDF/EDF+/BDF, an EDF with no EEG channel).
	ErrUnsupported = errors.New("unsupported format")
	// ErrInvalid: the file claims to be a format but breaks it.
	ErrInvalid = errors.New("invalid file")
)

// FormatError reports where a file breaks its format: the file's base name,
// the field (spec name), the signal when the field belongs to one, and the
// byte offset (or, for text sidecars, the line). It never quotes an
// identifying header field.
type FormatError struct {
	File   string // base name of the file
	Field  string // e.g. "number of signals", "physical maximum", "TAL onset"
	Signal int    // 0-based signal index, -1 when the field is not a signal's
	Label  string // the signal's original label when Signal >= 0
	Offset int64  // byte offset of the field, -1 when not known
	Line   int    // 1-based line of a text file, 0 when not a text file
	Msg    string // what is wrong, in plain words
	Err    error  // ErrInvalid, ErrUnsupported or io.ErrUnexpectedEOF
}

func (e *FormatError) Error() string {
	var b strings.Builder
	b.WriteString("ingest: ")
	if e.File != "" {
		b.WriteString(e.File)
		b.WriteString(": ")
	}
	if e.Signal >= 0 && e.Label != "" {
		fmt.Fprintf(&b, "signal %d %q: ", e.Signal, e.Label)
	} else if e.Signal >= 0 {
		fmt.Fprintf(&b, "signal %d: ", e.Signal)
	}
	if e.Field != "" {
		b.WriteString(e.Field)
		b.WriteString(": ")
	}
	b.WriteString(e.Msg)
	switch {
	case e.Line > 0:
		fmt.Fprintf(&b, " (line %d)", e.Line)
	case e.Offset >= 0:
		fmt.Fprintf(&b, " (offset %d)", e.Offset)
	}
	return b.String()
}

func (e *FormatError) Unwrap() error { return e.Err }
