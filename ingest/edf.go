package ingest

import (
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"runtime"
	"strings"
)

// Options steer Decode.
type Options struct {
	// Phrases recognise eye-state annotations; nil means DefaultEyePhrases().
	Phrases *EyePhrases
	// DeclaredState, when not "", is the user's eye state for the whole file
	// (PeriodSource FromUser); it must be EyesClosed, EyesOpen or EyesUnknown.
	DeclaredState EyeState
}

// Decode reads an EDF (Kemp et al. 1992), EDF+C/EDF+D (Kemp & Olivan 2003),
// BDF or BDF+ file of the given size from r. name is the file's base name,
// used in messages only.
//
// Samples are scaled with the header's extremes as a signed gain,
//
//	phys = pmin + (dig − dmin)·(pmax − pmin)/(dmax − dmin),
//
// (FORMATS.md 1.3; an inverted physical range gives a negative gain) and held
// as float32, in µV for every channel whose unit is a volt unit (V and mV are
// converted; uV, µV U+00B5 and μV U+03BC are µV), in the file's own unit
// otherwise. Data records are streamed through a bounded buffer (whole
// records up to 1 MiB at a time); memory is allocated only after every count
// has been checked against the file size and the Max* limits.
//
// Tolerated with a Caution: a header byte count other than 256·(ns+1), "-1"
// or 0 records (counted from the file size), a short last record (dropped), a
// header declaring more records than the file holds (the whole records there
// are read), bytes after the last record, an EDF+ flag without an annotation
// signal. Zero padding at the end: when the file's annotations give an end
// (the latest onset+duration of an annotation with a duration) and every EEG
// channel holds only digital zeros after it, those samples are cut (the
// eegmmidb files end this way); without such an annotation nothing is cut.
//
// Decode refuses a file with no EEG channel (ErrUnsupported, as
// ingest/errors.go defines it): longwave has nothing to measure in it.
// Every bad-input error is a *FormatError; identifying header fields (the
// patient field, the start date, investigation and technician codes, free
// annotation text) are never read into the Recording, an error or a log.
func Decode(r io.ReaderAt, size int64, name string, opt Options) (*Recording, error) {
	return decode(r, size, name, opt, true)
}

// onsetTolerance is how far (in EEG sample periods) a record onset may
// differ from the end of the previous record and still count as contiguous:
// half a sample, since a smaller shift cannot be expressed in sample
// indices (common practice: TAL onsets are printed with limited decimals).
const onsetTolerance = 0.5

// decode is Decode with the EEG requirement switchable, so that tests can
// read the non-EEG test files (generator signals, annotation-only files).
func decode(r io.ReaderAt, size int64, name string, opt Options, requireEEG bool) (*Recording, error) {
	switch opt.DeclaredState {
	case "", EyesClosed, EyesOpen, EyesUnknown:
	default:
		return nil, fmt.Errorf("ingest: declared eye state %q: want %q, %q or %q", opt.DeclaredState, EyesClosed, EyesOpen, EyesUnknown)
	}
	phrases := DefaultEyePhrases()
	if opt.Phrases != nil {
		phrases = *opt.Phrases
	}
	hdr, err := DecodeHeader(r, size, name)
	if err != nil {
		return nil, err
	}
	rec := &Recording{Name: name}
	c := &rec.Conditions
	c.Format = hdr.Format
	c.StartTimeOfDay = hdr.StartTimeOfDay
	c.Equipment = hdr.Equipment
	c.Cautions = append([]Caution(nil), hdr.Cautions...)

	// Channels and their scaling.
	plans := make([]signalPlan, len(hdr.Signals))
	hasEEG := false
	seen := map[string]bool{}
	for i := range hdr.Signals {
		s := &hdr.Signals[i]
		if s.Annotation {
			plans[i] = signalPlan{channel: -1}
			continue
		}
		label, ref, kind, _ := NormalizeLabel(s.Label, s.Transducer)
		factor, _ := unitFactor(s.Unit)
		g := (s.PhysicalMax - s.PhysicalMin) / float64(s.DigitalMax-s.DigitalMin)
		off := s.PhysicalMin - float64(s.DigitalMin)*g
		plans[i] = signalPlan{channel: len(rec.Channels), gain: g * factor, offset: off * factor}
		rec.Channels = append(rec.Channels, Channel{
			Label: label, Original: s.Label, Reference: ref, Kind: kind, Unit: s.Unit,
			SampleRate: float64(s.SamplesPerRecord) / hdr.RecordDuration,
			UVPerStep:  math.Abs(g * factor),
			DigitalMin: s.DigitalMin, DigitalMax: s.DigitalMax,
			PhysicalMin: s.PhysicalMin, PhysicalMax: s.PhysicalMax,
			Prefilter: s.Prefilter, Transducer: s.Transducer,
		})
		if kind == KindEEG {
			hasEEG = true
		}
		if seen[label] {
			c.Cautions = append(c.Cautions, Caution{Code: "duplicate_label",
				Text: fmt.Sprintf("signal %d %q has the same name %q as an earlier signal; the first is used by name", i, printable(s.Label), printable(label))})
		}
		seen[label] = true
	}
	if requireEEG && !hasEEG {
		return nil, &FormatError{File: name, Field: "label", Signal: -1, Offset: mainHeaderSize,
			Msg: fmt.Sprintf("no EEG channel among %d ordinary signals (labels and transducers name none)", len(rec.Channels)),
			Err: ErrUnsupported}
	}
	for i := range hdr.Signals {
		if p := plans[i]; p.channel >= 0 {
			rec.Channels[p.channel].Samples = make([]float32, hdr.Records*int64(hdr.Signals[i].SamplesPerRecord))
		}
	}
	rate := eegRate(rec.Channels)
	eegPerRecord := 0
	for i := range hdr.Signals {
		if p := plans[i]; p.channel >= 0 && rec.Channels[p.channel].Kind == KindEEG && rec.Channels[p.channel].SampleRate == rate {
			eegPerRecord = hdr.Signals[i].SamplesPerRecord
			break
		}
	}
	firstAnn := -1
	for i := range hdr.Signals {
		if hdr.Signals[i].Annotation {
			firstAnn = i
			break
		}
	}
	plus := hdr.Format != FormatEDF && hdr.Format != FormatBDF
	discontinuous := hdr.Format == FormatEDFPlusD || hdr.Format == FormatBDFPlusD
	tol := 1e-3
	if rate > 0 {
		tol = onsetTolerance / rate
	}

	// Stream the data records.
	perChunk := int64(decodeChunkBytes) / hdr.RecordBytes
	if perChunk < 1 {
		perChunk = 1
	}
	if perChunk > hdr.Records {
		perChunk = hdr.Records
	}
	buf := make([]byte, perChunk*hdr.RecordBytes)
	// The signal samples of the records from split on are converted on a
	// second goroutine (its own reads, its own buffer) while this one reads
	// the first part and every record's annotations, which must be read in
	// order. Each sample is converted by the same code either way.
	split := hdr.Records
	var second chan error
	if runtime.GOMAXPROCS(0) > 1 && hdr.Records*hdr.RecordBytes >= parallelDecodeBytes {
		split = hdr.Records / 2
		second = make(chan error, 1)
		go func() { second <- decodeSignals(r, name, hdr, split, hdr.Records, perChunk, plans, rec) }()
		defer func() {
			if second != nil {
				<-second
			}
		}()
	}
	var (
		t0, prevOnset float64
		haveT0        bool
		missingTK     bool
		notContiguous bool
		unterminated  bool
		annotatedEnd  = math.Inf(-1)
		events        []Annotation
	)
	// Without an annotation signal the records from split on hold nothing
	// for this loop: the second goroutine reads them alone.
	end := hdr.Records
	if firstAnn < 0 {
		end = split
	}
	for r0 := int64(0); r0 < end; r0 += perChunk {
		nr := min(perChunk, end-r0)
		chunk := buf[:nr*hdr.RecordBytes]
		at := hdr.HeaderBytes + r0*hdr.RecordBytes
		if err := readFull(r, chunk, at); err != nil {
			return nil, &FormatError{File: name, Field: "data record", Signal: -1, Offset: at,
				Msg: fmt.Sprintf("cannot read data record %d: %v", r0, err), Err: io.ErrUnexpectedEOF}
		}
		for k := int64(0); k < nr; k++ {
			ri := r0 + k
			rb := chunk[k*hdr.RecordBytes : (k+1)*hdr.RecordBytes]
			recordAt := at + k*hdr.RecordBytes
			onset, haveOnset := 0.0, false
			for i := range hdr.Signals {
				s := &hdr.Signals[i]
				slot := rb[s.recordOffset : s.recordOffset+int64(s.SamplesPerRecord*hdr.SampleWidth)]
				p := plans[i]
				if p.channel >= 0 {
					if ri >= split {
						continue
					}
					p.convert(rec, s, hdr.SampleWidth, ri, slot)
					continue
				}
				tals, unterm, terr := parseTALs(slot)
				if terr != nil {
					return nil, &FormatError{File: name, Field: terr.Field, Signal: i, Label: printable(s.Label),
						Offset: recordAt + s.recordOffset + int64(terr.Pos),
						Msg:    fmt.Sprintf("%s in data record %d", terr.Msg, ri), Err: ErrInvalid}
				}
				unterminated = unterminated || unterm
				for ti, t := range tals {
					texts := t.Texts
					if i == firstAnn && ti == 0 && len(texts) > 0 && texts[0] == "" {
						onset, haveOnset = t.Onset, true
						texts = texts[1:]
					}
					for _, txt := range texts {
						if txt == "" {
							continue
						}
						if t.HasDuration && t.Duration > 0 {
							annotatedEnd = math.Max(annotatedEnd, t.Onset+t.Duration)
						}
						if _, ok := phrases.Match(txt); ok {
							events = append(events, Annotation{Onset: t.Onset, Duration: t.Duration, Text: txt})
						}
					}
				}
			}
			if firstAnn < 0 {
				continue
			}
			if !haveOnset {
				if discontinuous {
					return nil, &FormatError{File: name, Field: "TAL onset", Signal: firstAnn, Label: printable(hdr.Signals[firstAnn].Label),
						Offset: recordAt + hdr.Signals[firstAnn].recordOffset,
						Msg:    fmt.Sprintf("data record %d has no time-keeping TAL, which an EDF+D file needs for its record times", ri),
						Err:    ErrInvalid}
				}
				missingTK = true
				onset = prevOnset + hdr.RecordDuration
				if ri == 0 {
					onset = 0
				}
			}
			if !haveT0 {
				t0, haveT0 = onset, true
				rec.Segments = append(rec.Segments, Segment{Onset: 0, First: 0, Count: eegPerRecord})
				prevOnset = onset
				continue
			}
			gap := onset - (prevOnset + hdr.RecordDuration)
			last := &rec.Segments[len(rec.Segments)-1]
			switch {
			case math.Abs(gap) <= tol || !discontinuous:
				if math.Abs(gap) > tol {
					notContiguous = true
				}
				last.Count += eegPerRecord
			case gap > 0:
				rec.Segments = append(rec.Segments, Segment{Onset: onset - t0, First: last.First + last.Count, Count: eegPerRecord})
			default:
				return nil, &FormatError{File: name, Field: "TAL onset", Signal: firstAnn, Label: printable(hdr.Signals[firstAnn].Label),
					Offset: recordAt + hdr.Signals[firstAnn].recordOffset,
					Msg:    fmt.Sprintf("data record %d starts at %g s, before the end of the previous record at %g s", ri, onset, prevOnset+hdr.RecordDuration),
					Err:    ErrInvalid}
			}
			prevOnset = onset
		}
	}
	if second != nil {
		err := <-second
		second = nil
		if err != nil {
			return nil, err
		}
	}
	if firstAnn < 0 || len(rec.Segments) == 0 {
		rec.Segments = []Segment{{Onset: 0, First: 0, Count: int(hdr.Records) * eegPerRecord}}
	}
	if !plus && firstAnn >= 0 {
		rec.Segments = []Segment{{Onset: 0, First: 0, Count: int(hdr.Records) * eegPerRecord}}
	}
	if missingTK && plus {
		c.Cautions = append(c.Cautions, Caution{Code: "time_keeping_missing",
			Text: "some data records have no time-keeping TAL; their start was taken as contiguous"})
	}
	if notContiguous {
		c.Cautions = append(c.Cautions, Caution{Code: "record_onsets_not_contiguous",
			Text: "the time-keeping TALs of this continuous (EDF+C) file show gaps or overlaps; the records were read as contiguous"})
	}
	if unterminated {
		c.Cautions = append(c.Cautions, Caution{Code: "unterminated_tal",
			Text: "a TAL lacks its closing 0x00 before the next onset; it was read as two TALs"})
	}
	for i := range events {
		events[i].Onset -= t0
	}
	rec.Annotations = events
	if !math.IsInf(annotatedEnd, -1) {
		var zeros []zeroValue
		for _, p := range plans {
			if p.channel >= 0 {
				zeros = append(zeros, zeroValue{channel: p.channel, value: float32(p.offset)})
			}
		}
		trimZeroPadding(rec, annotatedEnd-t0, zeros)
	}

	// Conditions and periods.
	FinishConditions(rec)
	core := coreEEG(rec.Channels)
	if len(core) > 0 {
		c.Filters = ParsePrefilter(core[0].Prefilter)
		for _, ch := range core[1:] {
			if strings.TrimSpace(ch.Prefilter) != strings.TrimSpace(core[0].Prefilter) {
				c.Cautions = append(c.Cautions, Caution{Code: "prefilter_differs",
					Text: fmt.Sprintf("channel %s declares prefiltering %q, channel %s %q; the first is reported",
						ch.Label, printable(ch.Prefilter), core[0].Label, printable(core[0].Prefilter))})
				break
			}
		}
	}
	total := 0.0
	if n := len(rec.Segments); n > 0 && rate > 0 {
		last := rec.Segments[n-1]
		total = last.Onset + float64(last.Count)/rate
	}
	switch {
	case opt.DeclaredState != "":
		c.PeriodSource = FromUser
		rec.Periods = []Period{{State: opt.DeclaredState, Start: 0, End: total}}
	case len(rec.Annotations) > 0:
		c.PeriodSource = FromAnnotations
		rec.Periods = PeriodsFromEvents(rec.Annotations, total, phrases)
	default:
		c.PeriodSource = FromNothing
		rec.Periods = []Period{{State: EyesUnknown, Start: 0, End: total}}
	}
	return rec, nil
}

// signalPlan says where a signal's samples go and how they are scaled.
type signalPlan struct {
	channel      int // index in rec.Channels, -1 for an annotation signal
	gain, offset float64
}

// convert scales the digital samples of data record ri's slot of signal
// s (width 2 or 3 bytes) into their place in the plan's channel.
func (p signalPlan) convert(rec *Recording, s *SignalHeader, width int, ri int64, slot []byte) {
	n := int64(s.SamplesPerRecord)
	dst := rec.Channels[p.channel].Samples[ri*n : (ri+1)*n]
	if width == 2 {
		decode16(dst, slot, p.gain, p.offset)
	} else {
		decode24(dst, slot, p.gain, p.offset)
	}
}

// parallelDecodeBytes is the data size from which decode converts the
// samples of the second half of the records on a second goroutine: below
// it (a few seconds of a routine recording) a goroutine costs more than it
// saves.
const parallelDecodeBytes = 8 << 20

// decodeSignals converts the ordinary signals' samples of data records
// [from, to) into rec's channels, reading perChunk records at a time
// through its own buffer; annotation signals are left to decode's loop.
func decodeSignals(r io.ReaderAt, name string, hdr *Header, from, to, perChunk int64, plans []signalPlan, rec *Recording) error {
	buf := make([]byte, perChunk*hdr.RecordBytes)
	for r0 := from; r0 < to; r0 += perChunk {
		nr := min(perChunk, to-r0)
		chunk := buf[:nr*hdr.RecordBytes]
		at := hdr.HeaderBytes + r0*hdr.RecordBytes
		if err := readFull(r, chunk, at); err != nil {
			return &FormatError{File: name, Field: "data record", Signal: -1, Offset: at,
				Msg: fmt.Sprintf("cannot read data record %d: %v", r0, err), Err: io.ErrUnexpectedEOF}
		}
		for k := int64(0); k < nr; k++ {
			ri := r0 + k
			rb := chunk[k*hdr.RecordBytes : (k+1)*hdr.RecordBytes]
			for i := range hdr.Signals {
				p := plans[i]
				if p.channel < 0 {
					continue
				}
				s := &hdr.Signals[i]
				slot := rb[s.recordOffset : s.recordOffset+int64(s.SamplesPerRecord*hdr.SampleWidth)]
				p.convert(rec, s, hdr.SampleWidth, ri, slot)
			}
		}
	}
	return nil
}

type zeroValue struct {
	channel int
	value   float32 // the physical value of digital 0
}

// trimZeroPadding cuts the samples after end (seconds of recording time)
// when every EEG channel holds only digital zeros there; other channels are
// cut too when their tail is zero as well. The last segment shrinks.
func trimZeroPadding(rec *Recording, end float64, zeros []zeroValue) {
	if len(rec.Segments) == 0 {
		return
	}
	last := &rec.Segments[len(rec.Segments)-1]
	rate := eegRate(rec.Channels)
	if rate <= 0 || end <= last.Onset || end >= last.Onset+float64(last.Count)/rate {
		return
	}
	// cut returns the first sample index of channel ch at or after end.
	cut := func(ch *Channel) int {
		segStart := int(math.Round(float64(last.First) * ch.SampleRate / rate))
		k := segStart + int(math.Ceil((end-last.Onset)*ch.SampleRate-1e-9))
		if k < 0 {
			k = 0
		}
		return k
	}
	tailZero := func(z zeroValue) bool {
		ch := &rec.Channels[z.channel]
		k := cut(ch)
		if k >= len(ch.Samples) {
			return false
		}
		for _, v := range ch.Samples[k:] {
			if v != z.value {
				return false
			}
		}
		return true
	}
	anyEEG := false
	for _, z := range zeros {
		if rec.Channels[z.channel].Kind != KindEEG {
			continue
		}
		anyEEG = true
		if !tailZero(z) {
			return
		}
	}
	if !anyEEG {
		return
	}
	cutEEG := 0
	for _, z := range zeros {
		ch := &rec.Channels[z.channel]
		if ch.Kind == KindEEG || tailZero(z) {
			k := cut(ch)
			if ch.Kind == KindEEG && ch.SampleRate == rate {
				cutEEG = len(ch.Samples) - k
			}
			ch.Samples = ch.Samples[:k:k]
		}
	}
	last.Count -= cutEEG
	if last.Count < 0 {
		last.Count = 0
	}
	rec.Conditions.Cautions = append(rec.Conditions.Cautions, Caution{Code: "zero_padding_cut",
		Text: fmt.Sprintf("%d samples of digital zero after the annotated end at %.3f s were cut from each EEG channel", cutEEG, end)})
}

// unitFactor returns the factor from the unit to µV and whether it is a volt unit.
func unitFactor(unit string) (float64, bool) {
	switch unit {
	case "uV", "µV", "μV", "UV", "uv":
		return 1, true
	case "mV":
		return 1e3, true
	case "V":
		return 1e6, true
	case "nV":
		return 1e-3, true
	}
	return 1, false
}

// decode16 scales little-endian int16 samples: dst[j] = offset + gain·dig,
// computed in float64 and rounded once to float32. Four samples are taken
// per 8-byte load to keep bounds checks out of the loop.
func decode16(dst []float32, src []byte, gain, offset float64) {
	src = src[:2*len(dst)]
	j := 0
	for ; j+4 <= len(dst); j += 4 {
		w := binary.LittleEndian.Uint64(src[2*j:])
		d := dst[j : j+4 : j+4]
		d[0] = float32(offset + gain*float64(int16(w)))
		d[1] = float32(offset + gain*float64(int16(w>>16)))
		d[2] = float32(offset + gain*float64(int16(w>>32)))
		d[3] = float32(offset + gain*float64(int16(w>>48)))
	}
	for ; j < len(dst); j++ {
		dst[j] = float32(offset + gain*float64(int16(binary.LittleEndian.Uint16(src[2*j:]))))
	}
}

// decode24 scales little-endian 24-bit two's-complement samples (BDF),
// four samples per 12 bytes.
func decode24(dst []float32, src []byte, gain, offset float64) {
	src = src[:3*len(dst)]
	j := 0
	for ; j+4 <= len(dst); j += 4 {
		b := src[3*j : 3*j+12 : 3*j+12]
		lo := binary.LittleEndian.Uint64(b[0:8])
		hi := uint64(binary.LittleEndian.Uint32(b[8:12]))
		d := dst[j : j+4 : j+4]
		d[0] = float32(offset + gain*float64(int32(uint32(lo)<<8)>>8))
		d[1] = float32(offset + gain*float64(int32(uint32(lo>>24)<<8)>>8))
		d[2] = float32(offset + gain*float64(int32(uint32(lo>>48|hi<<16)<<8)>>8))
		d[3] = float32(offset + gain*float64(int32(uint32(hi>>8)<<8)>>8))
	}
	for ; j < len(dst); j++ {
		b := src[3*j : 3*j+3 : 3*j+3]
		v := int32(uint32(b[0])<<8|uint32(b[1])<<16|uint32(b[2])<<24) >> 8
		dst[j] = float32(offset + gain*float64(v))
	}
}
