package ingest

import (
	"fmt"
	"strconv"
)

// Byte values of the EDF+ time-stamped annotation list (Kemp & Olivan 2003,
// §2.2.2): Onset [0x15 Duration] 0x14 { Annotation 0x14 } 0x00.
const (
	talDuration = 0x15
	talText     = 0x14
	talEnd      = 0x00
)

// tal is one time-stamped annotation list: an onset in seconds after the
// header's start time, an optional duration, and its annotation texts.
type tal struct {
	Onset       float64
	Duration    float64
	HasDuration bool
	Texts       []string
}

// talError says where in an annotation slot a TAL breaks the format.
type talError struct {
	Field string // "TAL onset", "TAL duration", "TAL annotation"
	Pos   int    // byte position inside the slot
	Msg   string
}

func (e *talError) Error() string { return fmt.Sprintf("%s: %s (slot byte %d)", e.Field, e.Msg, e.Pos) }

// parseTALs parses the bytes of one data record's annotation signal into its
// TALs. Unused bytes after the last TAL are 0x00. Two tolerances for real
// exports: a slot that ends right after a text's 0x14 ends the TAL, and a TAL
// whose 0x00 is missing before the next onset (the next "text" is itself an
// onset such as "+0.000000", FORMATS/PROVENANCE mne-testing-data MB0400FU) is
// split there; unterminated reports whether that happened.
func parseTALs(b []byte) (tals []tal, unterminated bool, err *talError) {
	pos := 0
	for {
		for pos < len(b) && b[pos] == talEnd {
			pos++
		}
		if pos >= len(b) {
			return tals, unterminated, nil
		}
		t, next, e := parseOnset(b, pos)
		if e != nil {
			return nil, unterminated, e
		}
		pos = next
		// Texts until 0x00 (or the slot's end after a 0x14).
		for {
			if pos >= len(b) || b[pos] == talEnd {
				pos++
				break
			}
			start := pos
			for pos < len(b) && b[pos] != talText && b[pos] != talEnd {
				pos++
			}
			if pos >= len(b) || b[pos] != talText {
				return nil, unterminated, &talError{Field: "TAL annotation", Pos: start,
					Msg: "annotation text is not ended by byte 0x14"}
			}
			raw := b[start:pos]
			pos++
			if looksLikeOnset(raw) {
				// Missing 0x00: a new TAL starts here.
				tals = append(tals, t)
				unterminated = true
				nt, _, e := parseOnset(append(append([]byte(nil), raw...), talText), 0)
				if e != nil {
					e.Pos += start
					return nil, unterminated, e
				}
				t = nt
				continue
			}
			t.Texts = append(t.Texts, decodeText(raw))
		}
		tals = append(tals, t)
	}
}

// parseOnset parses "±onset[0x15 duration]0x14" at pos and returns the TAL
// head and the position after its 0x14.
func parseOnset(b []byte, pos int) (tal, int, *talError) {
	var t tal
	start := pos
	if b[pos] != '+' && b[pos] != '-' {
		return t, 0, &talError{Field: "TAL onset", Pos: pos, Msg: fmt.Sprintf("byte 0x%02x where a TAL must start with '+' or '-'", b[pos])}
	}
	pos++
	for pos < len(b) && b[pos] != talText && b[pos] != talDuration {
		if !isDecimalByte(b[pos]) {
			return t, 0, &talError{Field: "TAL onset", Pos: pos, Msg: fmt.Sprintf("byte 0x%02x is not a digit or '.'", b[pos])}
		}
		pos++
	}
	if pos >= len(b) {
		return t, 0, &talError{Field: "TAL onset", Pos: start, Msg: "onset runs to the end of its data record"}
	}
	v, ok := parseDecimal(b[start:pos])
	if !ok {
		return t, 0, &talError{Field: "TAL onset", Pos: start, Msg: "onset is not a number"}
	}
	t.Onset = v
	if b[pos] == talDuration {
		pos++
		ds := pos
		for pos < len(b) && b[pos] != talText {
			if !isDecimalByte(b[pos]) {
				return t, 0, &talError{Field: "TAL duration", Pos: pos, Msg: fmt.Sprintf("byte 0x%02x is not a digit or '.'", b[pos])}
			}
			pos++
		}
		if pos >= len(b) {
			return t, 0, &talError{Field: "TAL duration", Pos: ds, Msg: "duration runs to the end of its data record"}
		}
		d, ok := parseDecimal(b[ds:pos])
		if !ok || d < 0 {
			return t, 0, &talError{Field: "TAL duration", Pos: ds, Msg: "duration is not a number"}
		}
		t.Duration, t.HasDuration = d, true
	}
	return t, pos + 1, nil // skip the 0x14
}

func isDecimalByte(c byte) bool { return c >= '0' && c <= '9' || c == '.' }

// parseDecimal parses [sign]digits[.digits] (at least one digit).
func parseDecimal(b []byte) (float64, bool) {
	digits, dots := 0, 0
	for i, c := range b {
		switch {
		case c >= '0' && c <= '9':
			digits++
		case c == '.':
			dots++
		case (c == '+' || c == '-') && i == 0:
		default:
			return 0, false
		}
	}
	if digits == 0 || dots > 1 {
		return 0, false
	}
	v, err := strconv.ParseFloat(string(b), 64)
	return v, err == nil
}

// looksLikeOnset reports whether an annotation text is in fact a TAL onset
// (sign, digits, optional fraction, optional 0x15 duration).
func looksLikeOnset(b []byte) bool {
	if len(b) < 2 || (b[0] != '+' && b[0] != '-') {
		return false
	}
	on := b
	for i, c := range b {
		if c == talDuration {
			on = b[:i]
			if _, ok := parseDecimal(b[i+1:]); !ok {
				return false
			}
			break
		}
	}
	_, ok := parseDecimal(on)
	return ok
}
