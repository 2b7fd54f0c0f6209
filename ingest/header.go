package ingest

import (
	"bytes"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"unicode/utf8"
)

// Limits that a header must respect before the decoder allocates anything
// from its counts. Each count is also checked against the file's real size.
const (
	// MaxSignals bounds the number of signals (ns). BioSemi's largest
	// systems record 256 scalp channels plus sensors and Status; 1024 leaves
	// room for any clinical or research cap while a header claiming 4,000
	// signals is refused (common practice: no EEG amplifier exceeds ~300).
	MaxSignals = 1024
	// MaxSamplesPerRecord bounds one signal's samples per data record:
	// 2^20 is 16 kHz for a 60-s record, far beyond any EEG export.
	MaxSamplesPerRecord = 1 << 20
	// MaxRecordBytes bounds one data record (all signals). The EDF spec
	// recommends at most 61,440 bytes; real exports go higher (long records
	// of dense caps), so 64 MiB refuses only absurd headers.
	MaxRecordBytes = 64 << 20
	// MaxSampleBytes bounds the float32 sample memory of one decode (4 GiB,
	// an 8-hour 256-channel 2-kHz BDF is 59 GB of samples and is refused;
	// a routine clinical EEG needs well under 100 MB).
	MaxSampleBytes = 4 << 30
	// MaxSampleRate bounds a signal's rate (samples per record over the
	// record duration): 1 MHz, far above any EEG amplifier (BioSemi's top
	// rate is 16 kHz), so a record duration like 1e-300 s is refused.
	MaxSampleRate = 1e6
	// decodeChunkBytes is the size of the read buffer used to stream data
	// records: whole records up to this many bytes (at least one record).
	decodeChunkBytes = 1 << 20
)

// Field offsets of the 256-byte main header (Kemp et al. 1992; FORMATS.md 1.1).
const (
	offVersion     = 0
	offPatient     = 8
	offRecording   = 88
	offStartDate   = 168
	offStartTime   = 176
	offHeaderBytes = 184
	offReserved    = 192
	offRecords     = 236
	offDuration    = 244
	offSignals     = 252
	mainHeaderSize = 256
)

// mainFields names the main header fields in file order, with offset and width.
var mainFields = []struct {
	name      string
	off, size int
}{
	{"version", offVersion, 8},
	{"local patient identification", offPatient, 80},
	{"local recording identification", offRecording, 80},
	{"startdate of recording", offStartDate, 8},
	{"starttime of recording", offStartTime, 8},
	{"number of bytes in header record", offHeaderBytes, 8},
	{"reserved", offReserved, 44},
	{"number of data records", offRecords, 8},
	{"duration of a data record", offDuration, 8},
	{"number of signals", offSignals, 4},
}

// signalFields names the per-signal header fields in file order with their
// widths: the ns labels come first, then the ns transducers, and so on
// (FORMATS.md 1.2). Offsets of signal i are 256 + ns·(sum of earlier widths) + width·i.
var signalFields = []struct {
	name string
	size int
}{
	{"label", 16},
	{"transducer type", 80},
	{"physical dimension", 8},
	{"physical minimum", 8},
	{"physical maximum", 8},
	{"digital minimum", 8},
	{"digital maximum", 8},
	{"prefiltering", 80},
	{"nr of samples in each data record", 8},
	{"reserved", 32},
}

// Indices into signalFields.
const (
	sfLabel = iota
	sfTransducer
	sfUnit
	sfPhysMin
	sfPhysMax
	sfDigMin
	sfDigMax
	sfPrefilter
	sfSamples
	sfReserved
)

// signalFieldOffset returns the byte offset of field f of signal i among ns.
func signalFieldOffset(f, i, ns int) int64 {
	off := int64(mainHeaderSize)
	for k := 0; k < f; k++ {
		off += int64(signalFields[k].size) * int64(ns)
	}
	return off + int64(signalFields[f].size)*int64(i)
}

// Header is the non-identifying part of an EDF, EDF+ or BDF header, checked
// against the file's size. It never holds the patient field, the start date,
// or the investigation and technician codes of the recording field.
type Header struct {
	Format Format
	// SampleWidth is 2 (EDF) or 3 (BDF) bytes per sample.
	SampleWidth int
	// HeaderBytes is where the data records start: 256·(ns+1). The header's
	// own "number of bytes in header record" is only compared with it.
	HeaderBytes int64
	// DeclaredRecords is the header's record count (-1 when unknown).
	DeclaredRecords int64
	// Records is the number of whole data records that will be read.
	Records int64
	// RecordDuration in seconds (0 for annotation-only EDF+ files).
	RecordDuration float64
	// RecordBytes is the size of one data record.
	RecordBytes int64
	Signals     []SignalHeader
	// StartTimeOfDay "hh:mm:ss" or "" when the field does not parse.
	StartTimeOfDay string
	// Equipment is the fifth subfield of an EDF+ recording field ("" if X or absent).
	Equipment string
	// Cautions found while reading the header.
	Cautions []Caution
}

// SignalHeader is one signal's header fields.
type SignalHeader struct {
	Label      string // trimmed label as written
	Transducer string
	Unit       string
	// PhysicalMin/Max and DigitalMin/Max are the extremes used for scaling.
	PhysicalMin, PhysicalMax float64
	DigitalMin, DigitalMax   int
	Prefilter                string
	SamplesPerRecord         int
	// Annotation is true for an "EDF Annotations"/"BDF Annotations" signal.
	Annotation bool
	// offset of this signal's samples inside a data record, in bytes.
	recordOffset int64
}

// headerReader carries the state of one header parse for error messages.
type headerReader struct {
	name string
	ns   int
	sigs []SignalHeader
}

func (h *headerReader) errMain(field string, off int64, sentinel error, format string, args ...any) *FormatError {
	return &FormatError{File: h.name, Field: field, Signal: -1, Offset: off, Msg: fmt.Sprintf(format, args...), Err: sentinel}
}

func (h *headerReader) errSignal(f, i int, sentinel error, format string, args ...any) *FormatError {
	label := ""
	if f > sfLabel && i < len(h.sigs) {
		label = h.sigs[i].Label
	}
	return &FormatError{File: h.name, Field: signalFields[f].name, Signal: i, Label: label,
		Offset: signalFieldOffset(f, i, h.ns), Msg: fmt.Sprintf(format, args...), Err: sentinel}
}

// DecodeHeader reads and checks the header of an EDF, EDF+ or BDF file of the
// given size without reading its data records. name is the file's base name
// for error messages. Errors are *FormatError wrapping ErrInvalid,
// ErrUnsupported or io.ErrUnexpectedEOF.
func DecodeHeader(r io.ReaderAt, size int64, name string) (*Header, error) {
	h := &headerReader{name: name}
	if size <= 0 {
		return nil, h.errMain("version", 0, io.ErrUnexpectedEOF, "empty file")
	}
	n := int64(mainHeaderSize)
	if size < n {
		n = size
	}
	main := make([]byte, n)
	if err := readFull(r, main, 0); err != nil {
		return nil, h.errMain("version", 0, io.ErrUnexpectedEOF, "cannot read the header: %v", err)
	}
	hdr := &Header{}
	// Version: "0" + spaces for EDF/EDF+, 0xFF "BIOSEMI" for BDF/BDF+.
	if len(main) >= 8 && main[0] == 0xFF && string(main[1:8]) == "BIOSEMI" {
		hdr.Format, hdr.SampleWidth = FormatBDF, 3
	} else if len(main) >= 1 && main[0] == '0' && (len(main) < 8 || blankOrNUL(main[1:8])) {
		hdr.Format, hdr.SampleWidth = FormatEDF, 2
	} else {
		return nil, h.errMain("version", 0, ErrUnsupported, "not an EDF or BDF file (the first 8 bytes are neither \"0\" nor 0xFF \"BIOSEMI\")")
	}
	if size < mainHeaderSize {
		for _, f := range mainFields {
			if int64(f.off+f.size) > size {
				return nil, h.errMain(f.name, int64(f.off), io.ErrUnexpectedEOF,
					"file ends after %d bytes, inside the 256-byte main header", size)
			}
		}
	}
	hdr.StartTimeOfDay = parseStartTime(main[offStartTime : offStartTime+8])
	reserved := text(main[offReserved : offReserved+44])
	declaredHeaderBytes := text(main[offHeaderBytes : offHeaderBytes+8])

	records, err := parseInt(main[offRecords : offRecords+8])
	if err != nil {
		return nil, h.errMain("number of data records", offRecords, ErrInvalid, "%v", err)
	}
	if records < -1 {
		return nil, h.errMain("number of data records", offRecords, ErrInvalid, "%d is negative (only -1, unknown, is allowed)", records)
	}
	hdr.DeclaredRecords = records
	dur, err := parseFloat(main[offDuration : offDuration+8])
	if err != nil {
		return nil, h.errMain("duration of a data record", offDuration, ErrInvalid, "%v", err)
	}
	if dur < 0 {
		return nil, h.errMain("duration of a data record", offDuration, ErrInvalid, "%g s is negative", dur)
	}
	hdr.RecordDuration = dur
	ns64, err := parseInt(main[offSignals : offSignals+4])
	if err != nil {
		return nil, h.errMain("number of signals", offSignals, ErrInvalid, "%v", err)
	}
	if ns64 < 1 {
		return nil, h.errMain("number of signals", offSignals, ErrInvalid, "%d signals: at least one is required", ns64)
	}
	if ns64 > MaxSignals {
		return nil, h.errMain("number of signals", offSignals, ErrInvalid, "%d signals exceed the limit of %d", ns64, MaxSignals)
	}
	ns := int(ns64)
	h.ns = ns
	hdr.HeaderBytes = int64(mainHeaderSize) * int64(ns+1)
	if size < hdr.HeaderBytes {
		// Name the signal-header field in which the file ends.
		for f := range signalFields {
			for i := 0; i < ns; i++ {
				off := signalFieldOffset(f, i, ns)
				if off+int64(signalFields[f].size) > size {
					return nil, &FormatError{File: name, Field: signalFields[f].name, Signal: i, Offset: off,
						Msg: fmt.Sprintf("file ends after %d bytes, inside the signal headers of %d bytes that %d signals need",
							size, hdr.HeaderBytes, ns), Err: io.ErrUnexpectedEOF}
				}
			}
		}
	}
	if v, err := strconv.ParseInt(declaredHeaderBytes, 10, 64); err != nil || v != hdr.HeaderBytes {
		hdr.Cautions = append(hdr.Cautions, Caution{Code: "header_bytes",
			Text: fmt.Sprintf("the header says %q bytes for itself; %d signals take %d bytes, which is what was used",
				printable(declaredHeaderBytes), ns, hdr.HeaderBytes)})
	}
	sh := make([]byte, hdr.HeaderBytes-mainHeaderSize)
	if err := readFull(r, sh, mainHeaderSize); err != nil {
		return nil, &FormatError{File: name, Field: "label", Signal: 0, Offset: mainHeaderSize,
			Msg: fmt.Sprintf("cannot read the signal headers: %v", err), Err: io.ErrUnexpectedEOF}
	}
	field := func(f, i int) []byte {
		off := signalFieldOffset(f, i, ns) - mainHeaderSize
		return sh[off : off+int64(signalFields[f].size)]
	}
	h.sigs = make([]SignalHeader, ns)
	sigs := h.sigs
	for i := range sigs {
		sigs[i].Label = text(field(sfLabel, i))
		l := strings.ToLower(sigs[i].Label)
		sigs[i].Annotation = l == "edf annotations" || l == "bdf annotations" || l == "edf+ annotations"
	}
	for i := range sigs {
		sigs[i].Transducer = text(field(sfTransducer, i))
	}
	for i := range sigs {
		sigs[i].Unit = unitText(field(sfUnit, i))
	}
	// Numeric fields, field by field in file order so the first bad one is named.
	for i := range sigs {
		v, err := parseFloat(field(sfPhysMin, i))
		if err != nil && !sigs[i].Annotation {
			return nil, h.errSignal(sfPhysMin, i, ErrInvalid, "%v", err)
		}
		sigs[i].PhysicalMin = v
	}
	for i := range sigs {
		v, err := parseFloat(field(sfPhysMax, i))
		if err != nil && !sigs[i].Annotation {
			return nil, h.errSignal(sfPhysMax, i, ErrInvalid, "%v", err)
		}
		sigs[i].PhysicalMax = v
		if !sigs[i].Annotation && v == sigs[i].PhysicalMin {
			return nil, h.errSignal(sfPhysMax, i, ErrInvalid, "equals physical minimum (%g): the gain is undefined", v)
		}
	}
	lo, hi := int64(-1)<<(8*hdr.SampleWidth-1), int64(1)<<(8*hdr.SampleWidth-1)-1
	for i := range sigs {
		v, err := parseInt(field(sfDigMin, i))
		if err == nil && (v < lo || v > hi) {
			err = fmt.Errorf("%d is outside the %d-bit sample range", v, 8*hdr.SampleWidth)
		}
		if err != nil && !sigs[i].Annotation {
			return nil, h.errSignal(sfDigMin, i, ErrInvalid, "%v", err)
		}
		sigs[i].DigitalMin = int(v)
	}
	for i := range sigs {
		v, err := parseInt(field(sfDigMax, i))
		if err == nil && (v < lo || v > hi) {
			err = fmt.Errorf("%d is outside the %d-bit sample range", v, 8*hdr.SampleWidth)
		}
		if err != nil && !sigs[i].Annotation {
			return nil, h.errSignal(sfDigMax, i, ErrInvalid, "%v", err)
		}
		sigs[i].DigitalMax = int(v)
		if !sigs[i].Annotation && sigs[i].DigitalMax <= sigs[i].DigitalMin {
			return nil, h.errSignal(sfDigMax, i, ErrInvalid, "%d is not larger than digital minimum %d",
				sigs[i].DigitalMax, sigs[i].DigitalMin)
		}
	}
	for i := range sigs {
		sigs[i].Prefilter = text(field(sfPrefilter, i))
	}
	var recordSamples int64
	for i := range sigs {
		v, err := parseInt(field(sfSamples, i))
		if err != nil {
			return nil, h.errSignal(sfSamples, i, ErrInvalid, "%v", err)
		}
		if v < 1 {
			return nil, h.errSignal(sfSamples, i, ErrInvalid, "%d samples per record: at least one is required", v)
		}
		if v > MaxSamplesPerRecord {
			return nil, h.errSignal(sfSamples, i, ErrInvalid, "%d samples per record exceed the limit of %d", v, MaxSamplesPerRecord)
		}
		sigs[i].SamplesPerRecord = int(v)
		sigs[i].recordOffset = recordSamples * int64(hdr.SampleWidth)
		recordSamples += v
		if recordSamples*int64(hdr.SampleWidth) > MaxRecordBytes {
			return nil, h.errSignal(sfSamples, i, ErrInvalid, "a data record of %d bytes exceeds the limit of %d",
				recordSamples*int64(hdr.SampleWidth), MaxRecordBytes)
		}
	}
	hdr.RecordBytes = recordSamples * int64(hdr.SampleWidth)
	hdr.Signals = sigs

	ordinary, annotations := 0, 0
	for i := range sigs {
		if sigs[i].Annotation {
			annotations++
		} else {
			ordinary++
		}
	}
	if dur == 0 && ordinary > 0 {
		return nil, h.errMain("duration of a data record", offDuration, ErrUnsupported,
			"0 s with %d ordinary signals: their sampling rate is undefined", ordinary)
	}
	for i := range sigs {
		if !sigs[i].Annotation && float64(sigs[i].SamplesPerRecord) > MaxSampleRate*dur {
			return nil, h.errMain("duration of a data record", offDuration, ErrUnsupported,
				"%g s for %d samples of signal %d is a rate above the limit of %g Hz", dur, sigs[i].SamplesPerRecord, i, float64(MaxSampleRate))
		}
	}
	hdr.Format, hdr.Cautions = plusFormat(hdr, reserved, annotations > 0, hdr.Cautions)
	if hdr.Format != FormatEDF && hdr.Format != FormatBDF {
		hdr.Equipment = equipment(main[offRecording : offRecording+80])
	}

	// Records: trust the file size, compare with the header.
	avail := size - hdr.HeaderBytes
	present := avail / hdr.RecordBytes
	rest := avail % hdr.RecordBytes
	switch {
	case present == 0:
		return nil, h.errMain("number of data records", offRecords, io.ErrUnexpectedEOF,
			"the file holds no complete data record (%d bytes after the header, a record takes %d)", avail, hdr.RecordBytes)
	case records <= 0:
		hdr.Records = present
		hdr.Cautions = append(hdr.Cautions, Caution{Code: "records_unknown",
			Text: fmt.Sprintf("the header gives %d data records; %d were counted from the file size", records, present)})
		if rest > 0 {
			hdr.Cautions = append(hdr.Cautions, shortRecordCaution(rest, hdr.RecordBytes))
		}
	case records > present:
		hdr.Records = present
		hdr.Cautions = append(hdr.Cautions, Caution{Code: "records_missing",
			Text: fmt.Sprintf("the header declares %d data records but the file holds %d whole records; the %d were read", records, present, present)})
		if rest > 0 {
			hdr.Cautions = append(hdr.Cautions, shortRecordCaution(rest, hdr.RecordBytes))
		}
	case records < present:
		hdr.Records = records
		hdr.Cautions = append(hdr.Cautions, Caution{Code: "records_extra",
			Text: fmt.Sprintf("the header declares %d data records but the file holds %d whole records; only the declared %d were read", records, present, records)})
	default:
		hdr.Records = records
		if rest > 0 {
			hdr.Cautions = append(hdr.Cautions, Caution{Code: "trailing_bytes",
				Text: fmt.Sprintf("%d bytes after the last data record were ignored", rest)})
		}
	}
	var perRecord int64
	for i := range sigs {
		if !sigs[i].Annotation {
			perRecord += int64(sigs[i].SamplesPerRecord)
		}
	}
	if perRecord*hdr.Records*4 > MaxSampleBytes {
		return nil, h.errMain("number of data records", offRecords, ErrUnsupported,
			"%d records would need %d bytes of samples, over the limit of %d", hdr.Records, perRecord*hdr.Records*4, int64(MaxSampleBytes))
	}
	return hdr, nil
}

func shortRecordCaution(rest, recordBytes int64) Caution {
	return Caution{Code: "short_last_record",
		Text: fmt.Sprintf("a last data record of %d bytes (a record takes %d) was incomplete and dropped", rest, recordBytes)}
}

// plusFormat refines EDF/BDF into EDF+/BDF+ from the reserved field. A "+"
// flag without an annotation signal is not EDF+ (the spec requires one); such
// files are read as plain EDF/BDF with a caution.
func plusFormat(hdr *Header, reserved string, hasAnnotations bool, cautions []Caution) (Format, []Caution) {
	flag := ""
	if len(reserved) >= 5 {
		flag = strings.ToUpper(reserved[:5])
	}
	cont, disc := FormatEDFPlusC, FormatEDFPlusD
	if hdr.SampleWidth == 3 {
		cont, disc = FormatBDFPlusC, FormatBDFPlusD
	}
	var f Format
	switch flag {
	case "EDF+C", "BDF+C":
		f = cont
	case "EDF+D", "BDF+D":
		f = disc
	default:
		return hdr.Format, cautions
	}
	if !hasAnnotations {
		return hdr.Format, append(cautions, Caution{Code: "plus_flag_without_annotations",
			Text: fmt.Sprintf("the reserved field says %s but there is no annotation signal; read as plain %s", flag, hdr.Format)})
	}
	if hdr.SampleWidth == 3 && flag[0] == 'E' {
		cautions = append(cautions, Caution{Code: "edf_flag_in_bdf",
			Text: fmt.Sprintf("the reserved field says %s in a BDF file; read as %s", flag, f)})
	}
	return f, cautions
}

// equipment returns the fifth subfield of an EDF+ recording field
// ("Startdate dd-MMM-yyyy code technician equipment"), "" when absent or X.
// The other subfields are never kept.
func equipment(field []byte) string {
	parts := strings.Fields(text(field))
	if len(parts) < 5 || !strings.EqualFold(parts[0], "Startdate") {
		return ""
	}
	e := parts[4]
	if e == "X" {
		return ""
	}
	return e
}

// parseStartTime turns "hh.mm.ss" into "hh:mm:ss", "" when it is not a
// valid time of day (e.g. "26.00.99").
func parseStartTime(b []byte) string {
	s := text(b)
	if len(s) != 8 || s[2] != '.' || s[5] != '.' {
		return ""
	}
	var v [3]int
	for k := 0; k < 3; k++ {
		p := s[3*k : 3*k+2]
		if p[0] < '0' || p[0] > '9' || p[1] < '0' || p[1] > '9' {
			return ""
		}
		v[k] = int(p[0]-'0')*10 + int(p[1]-'0')
	}
	if v[0] > 23 || v[1] > 59 || v[2] > 59 {
		return ""
	}
	return fmt.Sprintf("%02d:%02d:%02d", v[0], v[1], v[2])
}

// text returns a header field cut at the first NUL and trimmed of spaces,
// decoded as UTF-8 when valid, else as Latin-1 (FORMATS.md 1.10 item 1).
func text(b []byte) string {
	if i := bytes.IndexByte(b, 0); i >= 0 {
		b = b[:i]
	}
	b = bytes.Trim(b, " ")
	return decodeText(b)
}

// decodeText decodes UTF-8, falling back to Latin-1 for invalid bytes.
func decodeText(b []byte) string {
	if utf8.Valid(b) {
		return string(b)
	}
	r := make([]rune, len(b))
	for i, c := range b {
		r[i] = rune(c)
	}
	return string(r)
}

// unitText decodes the physical dimension; the Shift-JIS micro sign
// "\x83\xca" some exporters write becomes "µ".
func unitText(b []byte) string {
	if i := bytes.IndexByte(b, 0); i >= 0 {
		b = b[:i]
	}
	b = bytes.Trim(b, " ")
	if bytes.Equal(b, []byte("\x83\xcaV")) {
		return "µV"
	}
	return decodeText(b)
}

func blankOrNUL(b []byte) bool {
	for _, c := range b {
		if c != ' ' && c != 0 {
			return false
		}
	}
	return true
}

// printable returns s with non-printable characters replaced, for messages.
func printable(s string) string {
	return strings.Map(func(r rune) rune {
		if r < 32 || r == 127 {
			return '?'
		}
		return r
	}, s)
}

// parseInt parses an integer field: trimmed, an optional sign, digits only.
func parseInt(b []byte) (int64, error) {
	s := text(b)
	if s == "" {
		return 0, fmt.Errorf("empty, a number is required")
	}
	v, err := strconv.ParseInt(strings.TrimPrefix(s, "+"), 10, 64)
	if err != nil {
		return 0, fmt.Errorf("%q is not an integer", printable(s))
	}
	return v, nil
}

// parseFloat parses a decimal field, accepting ',' as the decimal separator
// (FORMATS.md 1.10 item 2); NaN, infinities and hex floats are refused.
func parseFloat(b []byte) (float64, error) {
	s := text(b)
	if s == "" {
		return 0, fmt.Errorf("empty, a number is required")
	}
	s = strings.ReplaceAll(s, ",", ".")
	for _, c := range s {
		if !(c >= '0' && c <= '9' || c == '.' || c == '+' || c == '-' || c == 'e' || c == 'E') {
			return 0, fmt.Errorf("%q is not a number", printable(s))
		}
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsInf(v, 0) || math.IsNaN(v) {
		return 0, fmt.Errorf("%q is not a number", printable(s))
	}
	return v, nil
}

// readFull reads len(b) bytes at off.
func readFull(r io.ReaderAt, b []byte, off int64) error {
	n, err := r.ReadAt(b, off)
	if n == len(b) {
		return nil
	}
	if err == nil || err == io.EOF {
		err = io.ErrUnexpectedEOF
	}
	return err
}
