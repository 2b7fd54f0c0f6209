package ingest

import (
	"strconv"
	"strings"
)

// ParsePrefilter reads the hardware filters from an EDF "prefiltering" field.
//
// The standard form is "HP:0.1Hz LP:75Hz N:50Hz" (Kemp & Olivan 2003, EDF+
// item 11). Real files also write semicolons or commas between items, a
// comma as the decimal separator ("HP:0,16; LP:500"), "DC" for no high-pass,
// no "Hz", "kHz", spaces after the colon and lower case (FORMATS.md 1.8,
// BioSemi's format table). Keys: HP (high-pass), LP (low-pass), N or NOTCH
// (notch). "RF:50Hz" (seen in the PhysioNet eegmat headers) is read as a
// notch: the dataset's description says a 50 Hz power-line notch was used
// and the same header states HP and LP separately; this reading is ours.
//
// Unknown stays unknown and is never guessed: a missing key, a value that
// does not parse, "LP:0Hz" or "N:0Hz" (a 0 Hz low-pass or notch is
// meaningless), and the placeholder "HP:0Hz LP:0Hz N:0Hz" as a whole (all
// values 0, as BCI2000 writes when it knows nothing) give Known false. A
// lone "HP:0Hz" or "HP:DC" is a known DC-coupled input (0 Hz, Known true).
func ParsePrefilter(text string) Filters {
	f := Filters{Text: strings.TrimSpace(text)}
	type item struct {
		v     float64
		ok    bool
		found bool
	}
	var hp, lp, notch item
	allZero, anyValue := true, false
	for _, tok := range prefilterItems(text) {
		key, val, found := strings.Cut(tok, ":")
		if !found {
			continue
		}
		key = strings.ToUpper(strings.TrimSpace(key))
		v, ok := parseFilterHz(val)
		var dst *item
		switch key {
		case "HP", "HPF", "HIGHPASS":
			dst = &hp
		case "LP", "LPF", "LOWPASS":
			dst = &lp
		case "N", "NOTCH", "RF":
			dst = &notch
		default:
			continue
		}
		if dst.found {
			continue // the first value of a key counts
		}
		*dst = item{v: v, ok: ok, found: true}
		if ok {
			anyValue = true
			if v != 0 {
				allZero = false
			}
		}
	}
	if anyValue && allZero && (lp.found || notch.found) {
		return f // "HP:0Hz LP:0Hz N:0Hz": no information
	}
	if hp.ok {
		f.HighPass = Frequency{Hz: hp.v, Known: true}
	}
	if lp.ok && lp.v > 0 {
		f.LowPass = Frequency{Hz: lp.v, Known: true}
	}
	if notch.ok && notch.v > 0 {
		f.Notch = Frequency{Hz: notch.v, Known: true}
	}
	return f
}

// prefilterItems splits the field into "KEY:value" items. Items are
// separated by spaces or semicolons; a comma separates items only when the
// text after it starts a new key (so "0,16" stays one decimal number).
func prefilterItems(text string) []string {
	var items []string
	var cur strings.Builder
	flush := func() {
		if s := strings.TrimSpace(cur.String()); s != "" {
			items = append(items, s)
		}
		cur.Reset()
	}
	for i := 0; i < len(text); i++ {
		c := text[i]
		switch {
		case c == ';':
			flush()
		case c == ',' && startsKey(text[i+1:]):
			flush()
		case c == ' ' || c == '\t':
			// "HP: 0.1 Hz": a space after the colon or before the unit joins.
			rest := strings.TrimLeft(text[i:], " \t")
			if strings.HasSuffix(strings.TrimSpace(cur.String()), ":") || startsUnitOrNumber(rest) && !startsKey(rest) {
				continue
			}
			flush()
		default:
			cur.WriteByte(c)
		}
	}
	flush()
	return items
}

// startsKey reports whether s (after spaces) begins with "letters:".
func startsKey(s string) bool {
	s = strings.TrimLeft(s, " \t")
	n := 0
	for n < len(s) && (s[n] >= 'A' && s[n] <= 'Z' || s[n] >= 'a' && s[n] <= 'z') {
		n++
	}
	return n > 0 && n < len(s) && s[n] == ':'
}

func startsUnitOrNumber(s string) bool {
	u := strings.ToLower(s)
	return strings.HasPrefix(u, "hz") || strings.HasPrefix(u, "khz")
}

// parseFilterHz parses "0.1Hz", "0,16", "70 Hz", "1kHz", "DC" into Hz.
func parseFilterHz(val string) (float64, bool) {
	s := strings.ToLower(strings.TrimSpace(val))
	if s == "dc" {
		return 0, true
	}
	mult := 1.0
	switch {
	case strings.HasSuffix(s, "khz"):
		mult, s = 1000, strings.TrimSpace(strings.TrimSuffix(s, "khz"))
	case strings.HasSuffix(s, "hz"):
		s = strings.TrimSpace(strings.TrimSuffix(s, "hz"))
	}
	s = strings.ReplaceAll(s, ",", ".")
	if s == "" {
		return 0, false
	}
	for _, c := range s {
		if !(c >= '0' && c <= '9' || c == '.') {
			return 0, false
		}
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || v < 0 {
		return 0, false
	}
	return v * mult, true
}
