package bids

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"longwave/ingest"
)

// eegSidecar holds what longwave uses of a *_eeg.json (BIDS EEG extension,
// Pernet et al. 2019; FORMATS.md §2.2).
type eegSidecar struct {
	SamplingFrequency float64 // 0 when absent
	// PowerLineFrequency in Hz; 0 when absent or "n/a".
	PowerLineFrequency float64
	EEGReference       string
	// Hardware are the filter edges HardwareFilters states (Known false
	// where it says nothing); HardwareText its summary.
	Hardware     ingest.Filters
	HardwareText string
	// SoftwareText summarises SoftwareFilters ("" for "n/a" or absent).
	SoftwareText string
	Equipment    string // Manufacturer and ManufacturersModelName
	TaskName     string
	Instructions string // Instructions and TaskDescription
}

// readEEGJSON parses a *_eeg.json. Malformed JSON is an error with its
// byte offset; a field of the wrong type an error naming the field.
func readEEGJSON(path string) (*eegSidecar, error) {
	data, err := readLimited(path)
	if err != nil {
		return nil, err
	}
	return parseEEGJSON(filepath.Base(path), data)
}

// parseEEGJSON parses the bytes of a *_eeg.json called name.
func parseEEGJSON(name string, data []byte) (*eegSidecar, error) {
	fail := func(field string, off int64, format string, args ...any) error {
		return &ingest.FormatError{File: name, Field: field, Signal: -1, Offset: off,
			Msg: fmt.Sprintf(format, args...), Err: ingest.ErrInvalid}
	}
	var raw map[string]json.RawMessage
	if err := json.Unmarshal(data, &raw); err != nil {
		var se *json.SyntaxError
		if errors.As(err, &se) {
			return nil, fail("", se.Offset, "not valid JSON: %v", se)
		}
		return nil, fail("", 0, "not a JSON object: %v", err)
	}
	sc := &eegSidecar{}
	number := func(key string, dst *float64, naAllowed bool) error {
		v, ok := raw[key]
		if !ok {
			return nil
		}
		var s string
		if naAllowed && json.Unmarshal(v, &s) == nil && isNA(s) {
			return nil
		}
		var f float64
		if err := json.Unmarshal(v, &f); err != nil || !(f > 0) || math.IsInf(f, 0) {
			return fail(key, -1, "%s is not a positive number", bytes.TrimSpace(v))
		}
		*dst = f
		return nil
	}
	text := func(key string, dst *string) error {
		v, ok := raw[key]
		if !ok {
			return nil
		}
		var s string
		if err := json.Unmarshal(v, &s); err != nil {
			return fail(key, -1, "%s is not a string", bytes.TrimSpace(v))
		}
		*dst = strings.TrimSpace(s)
		return nil
	}
	var manufacturer, model, instructions, description string
	for _, err := range []error{
		number("SamplingFrequency", &sc.SamplingFrequency, false),
		number("PowerLineFrequency", &sc.PowerLineFrequency, true),
		text("EEGReference", &sc.EEGReference),
		text("Manufacturer", &manufacturer),
		text("ManufacturersModelName", &model),
		text("TaskName", &sc.TaskName),
		text("Instructions", &instructions),
		text("TaskDescription", &description),
	} {
		if err != nil {
			return nil, err
		}
	}
	if isNA(sc.EEGReference) {
		sc.EEGReference = ""
	}
	sc.Equipment = strings.TrimSpace(strings.Join(slices.DeleteFunc([]string{manufacturer, model}, isNA), " "))
	sc.Instructions = strings.TrimSpace(instructions + " " + description)
	if v, ok := raw["HardwareFilters"]; ok {
		f, summary, err := parseFilters(v)
		if err != nil {
			return nil, fail("HardwareFilters", -1, "%v", err)
		}
		sc.Hardware, sc.HardwareText = f, summary
	}
	if v, ok := raw["SoftwareFilters"]; ok {
		_, summary, err := parseFilters(v)
		if err != nil {
			return nil, fail("SoftwareFilters", -1, "%v", err)
		}
		sc.SoftwareText = summary
	}
	return sc, nil
}

// parseFilters reads a BIDS filter description: "n/a" or an object of
// objects, filter name → parameters (e.g. {"Anti-aliasing filter":
// {"half-amplitude cutoff (Hz)": 500}}). Edges are recognised from the
// filter's name: "high" with "pass" (or "highpass", "hp") → high-pass;
// "low" with "pass", "lowpass", "lp" or "anti-alias" → low-pass; "notch",
// "bandstop" or "line" → notch. Its frequency is the first numeric
// parameter whose key mentions "cutoff", "freq" or "hz" (keys in sorted
// order), or a bare number. Filters it cannot read stay unknown; the
// summary lists every filter as "name: key=value, …" in sorted order.
func parseFilters(v json.RawMessage) (ingest.Filters, string, error) {
	var f ingest.Filters
	var s string
	if json.Unmarshal(v, &s) == nil {
		if isNA(s) {
			return f, "", nil
		}
		return f, "", fmt.Errorf("%q: want an object or \"n/a\"", s)
	}
	var obj map[string]json.RawMessage
	if err := json.Unmarshal(v, &obj); err != nil {
		return f, "", fmt.Errorf("want an object of filters or \"n/a\"")
	}
	names := make([]string, 0, len(obj))
	for k := range obj {
		names = append(names, k)
	}
	slices.Sort(names)
	var parts []string
	for _, n := range names {
		hz, known, summary := filterFrequency(obj[n])
		parts = append(parts, n+": "+summary)
		if !known {
			continue
		}
		l := strings.ToLower(n)
		compact := strings.NewReplacer(" ", "", "-", "", "_", "").Replace(l)
		switch {
		case strings.Contains(compact, "highpass") || compact == "hp" || strings.HasPrefix(compact, "hp"):
			f.HighPass = ingest.Frequency{Hz: hz, Known: true}
		case strings.Contains(compact, "lowpass") || compact == "lp" || strings.HasPrefix(compact, "lp") ||
			strings.Contains(compact, "antialias"):
			f.LowPass = ingest.Frequency{Hz: hz, Known: true}
		case strings.Contains(compact, "notch") || strings.Contains(compact, "bandstop") || strings.Contains(compact, "line"):
			f.Notch = ingest.Frequency{Hz: hz, Known: true}
		}
	}
	summary := strings.Join(parts, "; ")
	f.Text = summary
	return f, summary, nil
}

// filterFrequency finds a filter's frequency in its parameters.
func filterFrequency(v json.RawMessage) (hz float64, known bool, summary string) {
	var bare float64
	if json.Unmarshal(v, &bare) == nil {
		return bare, bare >= 0, strconv.FormatFloat(bare, 'g', -1, 64)
	}
	var params map[string]json.RawMessage
	if json.Unmarshal(v, &params) != nil {
		return 0, false, string(bytes.TrimSpace(v))
	}
	keys := make([]string, 0, len(params))
	for k := range params {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	var parts []string
	for _, k := range keys {
		parts = append(parts, k+"="+string(bytes.TrimSpace(params[k])))
		if known {
			continue
		}
		lk := strings.ToLower(k)
		if !strings.Contains(lk, "cutoff") && !strings.Contains(lk, "freq") && !strings.Contains(lk, "hz") {
			continue
		}
		var x float64
		if json.Unmarshal(params[k], &x) == nil && x >= 0 && !math.IsInf(x, 0) {
			hz, known = x, true
		}
	}
	return hz, known, strings.Join(parts, ", ")
}

// channelRow is one row of a *_channels.tsv (FORMATS.md §2.3).
type channelRow struct {
	Name, Type string
	Bad        bool
	// HighPass (low_cutoff) and LowPass (high_cutoff) edges, Known false for
	// "n/a" or absent.
	HighPass, LowPass ingest.Frequency
}

func readChannels(path string) ([]channelRow, error) {
	t, err := readTable(path)
	if err != nil {
		return nil, err
	}
	return channelsOf(t)
}

// channelsOf reads the rows of a parsed channels.tsv.
func channelsOf(t *table) ([]channelRow, error) {
	cName, cType, cStatus := t.col("name"), t.col("type"), t.col("status")
	cLow, cHigh := t.col("low_cutoff"), t.col("high_cutoff")
	if cName < 0 {
		return nil, t.errAt(1, "name", "required column missing")
	}
	var out []channelRow
	for _, r := range t.rows {
		c := channelRow{Name: r.fields[cName]}
		if cType >= 0 {
			c.Type = strings.ToUpper(r.fields[cType])
		}
		if cStatus >= 0 {
			switch st := strings.ToLower(r.fields[cStatus]); {
			case st == "bad":
				c.Bad = true
			case st == "good" || isNA(st):
			default:
				return nil, t.errAt(r.line, "status", "%q: want good, bad or n/a", r.fields[cStatus])
			}
		}
		for _, e := range []struct {
			col  int
			name string
			dst  *ingest.Frequency
		}{{cLow, "low_cutoff", &c.HighPass}, {cHigh, "high_cutoff", &c.LowPass}} {
			if e.col < 0 || isNA(r.fields[e.col]) {
				continue
			}
			v, err := strconv.ParseFloat(r.fields[e.col], 64)
			if err != nil || v < 0 || math.IsInf(v, 0) || math.IsNaN(v) {
				return nil, t.errAt(r.line, e.name, "%q is not a frequency in Hz", r.fields[e.col])
			}
			*e.dst = ingest.Frequency{Hz: v, Known: true}
		}
		out = append(out, c)
	}
	return out, nil
}

// readEvents reads a *_events.tsv into annotations: onset and duration in
// seconds (duration "n/a" → 0; a row with onset "n/a" is skipped, as BIDS
// allows), text from trial_type, else the value column (FORMATS.md §2.4:
// value is no longer a standard column but still common).
func readEvents(path string) ([]ingest.Annotation, error) {
	t, err := readTable(path)
	if err != nil {
		return nil, err
	}
	return eventsOf(t)
}

// eventsOf reads the rows of a parsed events.tsv.
func eventsOf(t *table) ([]ingest.Annotation, error) {
	cOnset, cDur := t.col("onset"), t.col("duration")
	cType, cValue := t.col("trial_type"), t.col("value")
	if cOnset < 0 {
		return nil, t.errAt(1, "onset", "required column missing")
	}
	var out []ingest.Annotation
	for _, r := range t.rows {
		if isNA(r.fields[cOnset]) {
			continue
		}
		onset, err := strconv.ParseFloat(r.fields[cOnset], 64)
		if err != nil || math.IsInf(onset, 0) || math.IsNaN(onset) {
			return nil, t.errAt(r.line, "onset", "%q is not a number of seconds", r.fields[cOnset])
		}
		a := ingest.Annotation{Onset: onset}
		if cDur >= 0 && !isNA(r.fields[cDur]) {
			d, err := strconv.ParseFloat(r.fields[cDur], 64)
			if err != nil || d < 0 || math.IsInf(d, 0) || math.IsNaN(d) {
				return nil, t.errAt(r.line, "duration", "%q is not a duration ≥ 0 in seconds", r.fields[cDur])
			}
			a.Duration = d
		}
		if cType >= 0 && !isNA(r.fields[cType]) {
			a.Text = r.fields[cType]
		} else if cValue >= 0 && !isNA(r.fields[cValue]) {
			a.Text = r.fields[cValue]
		}
		out = append(out, a)
	}
	return out, nil
}

// kindOf maps a channels.tsv type to a channel kind.
func kindOf(bidsType string) (ingest.ChannelKind, bool) {
	switch bidsType {
	case "":
		return "", false
	case "EEG":
		return ingest.KindEEG, true
	case "EOG", "HEOG", "VEOG":
		return ingest.KindEOG, true
	case "ECG":
		return ingest.KindECG, true
	case "EMG":
		return ingest.KindEMG, true
	}
	return ingest.KindOther, true
}
