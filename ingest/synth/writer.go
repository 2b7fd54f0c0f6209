package synth

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"longwave/ingest"
)

// Write encodes s as EDF, EDF+C, BDF or BDF+C (FORMATS.md §1): a 256-byte
// main header, 256 bytes per signal stored field by field, then data records
// of little-endian two's-complement samples (2 bytes EDF, 3 bytes BDF), each
// record holding every channel's samples in turn and, in the "+C" forms, the
// annotation signal last. The same Spec gives the same bytes.
func Write(w io.Writer, s Spec) error {
	r, err := Render(s)
	if err != nil {
		return err
	}
	return encode(w, s, r)
}

// Bytes returns the file Write would write.
func Bytes(s Spec) ([]byte, error) {
	var b bytes.Buffer
	if err := Write(&b, s); err != nil {
		return nil, err
	}
	return b.Bytes(), nil
}

// digitalRange is the full 16-bit (EDF) or 24-bit (BDF) two's-complement range.
func digitalRange(s Spec) (int, int) {
	if s.isBDF() {
		return -1 << 23, 1<<23 - 1
	}
	return -1 << 15, 1<<15 - 1
}

// physicalRange returns the physical extremes as written (8 characters) and
// the gain they give with the digital range.
func physicalRange(s Spec) (pmin, pmax string, gain float64, err error) {
	dmin, dmax := digitalRange(s)
	pmin, ok1 := headerNumber(float64(dmin) * s.UVPerStep)
	pmax, ok2 := headerNumber(float64(dmax) * s.UVPerStep)
	if !ok1 || !ok2 {
		return "", "", 0, specError("µV per step %v: physical range does not fit the 8-character header fields", s.UVPerStep)
	}
	gain = (parseHeaderNumber(pmax) - parseHeaderNumber(pmin)) / float64(dmax-dmin)
	if !(gain > 0) {
		return "", "", 0, specError("µV per step %v: too small for the 8-character header fields", s.UVPerStep)
	}
	return pmin, pmax, gain, nil
}

// headerNumber formats v in at most 8 characters, with as many decimals as
// fit (rounding the last one).
func headerNumber(v float64) (string, bool) {
	if t := strconv.FormatFloat(v, 'f', -1, 64); len(t) <= 8 {
		return t, true
	}
	for d := 7; d >= 0; d-- {
		if t := strconv.FormatFloat(v, 'f', d, 64); len(t) <= 8 {
			return t, true
		}
	}
	return "", false
}

func parseHeaderNumber(t string) float64 {
	v, _ := strconv.ParseFloat(t, 64) // only texts made by headerNumber reach here
	return v
}

// seconds formats a time in seconds for a TAL: rounded to the microsecond,
// no exponent, no trailing zeros.
func seconds(v float64) string {
	return strconv.FormatFloat(math.Round(v*1e6)/1e6, 'f', -1, 64)
}

// annotations lists the eye-state periods (clipped to the recording) and the
// extra annotations, in that order.
func (m *model) annotations() []ingest.Annotation {
	var out []ingest.Annotation
	closed, open := m.s.ClosedText, m.s.OpenText
	if closed == "" {
		closed = "eyes closed"
	}
	if open == "" {
		open = "eyes open"
	}
	for _, p := range m.s.Periods {
		if p.Start >= m.total {
			continue
		}
		text := closed
		if p.State == ingest.EyesOpen {
			text = open
		}
		out = append(out, ingest.Annotation{Onset: p.Start, Duration: min(p.End, m.total) - p.Start, Text: text})
	}
	for _, a := range m.s.ExtraAnnotations {
		if a.Onset < m.total {
			out = append(out, a)
		}
	}
	return out
}

// tals builds each record's annotation bytes: the time-keeping TAL
// "+onset\x14\x14\x00" first (EDF+ §2.2.4), then one TAL per annotation that
// starts in the record, "+onset[\x15duration]\x14text\x14\x00" (§2.2.2).
func tals(r *Rendering) ([][]byte, error) {
	out := make([][]byte, r.Records)
	for i := range out {
		out[i] = []byte("+" + seconds(float64(i)*r.RecordDuration) + "\x14\x14\x00")
	}
	for _, a := range r.Annotations {
		if strings.ContainsAny(a.Text, "\x00\x14\x15") {
			return nil, specError("annotation %q: contains a TAL separator byte", a.Text)
		}
		rec := min(int(a.Onset/r.RecordDuration+1e-9), r.Records-1)
		tal := "+" + seconds(a.Onset)
		if a.Duration > 0 {
			tal += "\x15" + seconds(a.Duration)
		}
		tal += "\x14" + a.Text + "\x14\x00"
		out[rec] = append(out[rec], tal...)
	}
	return out, nil
}

// encode writes the header and the data records of r.
func encode(w io.Writer, s Spec, r *Rendering) error {
	bps := 2 // bytes per sample
	if s.isBDF() {
		bps = 3
	}
	var annot [][]byte
	annSamples := 0
	if s.hasAnnotations() {
		var err error
		if annot, err = tals(r); err != nil {
			return err
		}
		longest := 0
		for _, a := range annot {
			longest = max(longest, len(a))
		}
		annSamples = (longest + bps - 1) / bps
	}

	type signal struct {
		label, transducer, unit, pmin, pmax, dmin, dmax, prefilter string
		samples                                                    int
	}
	var sigs []signal
	for _, l := range r.Labels {
		sigs = append(sigs, signal{
			label: l, transducer: "AgAgCl electrode", unit: "uV",
			pmin: r.PhysicalMin, pmax: r.PhysicalMax,
			dmin: strconv.Itoa(r.DigitalMin), dmax: strconv.Itoa(r.DigitalMax),
			prefilter: s.Prefilter, samples: r.SamplesPerRecord,
		})
	}
	if annSamples > 0 {
		label := "EDF Annotations"
		if s.isBDF() {
			label = "BDF Annotations"
		}
		sigs = append(sigs, signal{
			label: label, pmin: "-1", pmax: "1",
			dmin: strconv.Itoa(r.DigitalMin), dmax: strconv.Itoa(r.DigitalMax), samples: annSamples,
		})
	}
	ns := len(sigs)

	start := s.startTime()
	version, reserved := "0", ""
	switch s.Format {
	case ingest.FormatEDFPlusC:
		reserved = "EDF+C"
	case ingest.FormatBDF:
		version, reserved = "\xffBIOSEMI", "24BIT"
	case ingest.FormatBDFPlusC:
		version, reserved = "\xffBIOSEMI", "BDF+C"
	}
	patient := s.PatientField
	if patient == "" {
		patient = "X X X X"
	}
	recording := s.RecordingField
	if recording == "" {
		equipment := s.Equipment
		if equipment == "" {
			equipment = "X"
		}
		recording = "Startdate " + strings.ToUpper(start.Format("02-Jan-2006")) + " X X " + strings.ReplaceAll(equipment, " ", "_")
	}

	var h bytes.Buffer
	put := func(text string, width int) {
		if len(text) > width {
			text = text[:width]
		}
		h.WriteString(text)
		h.WriteString(strings.Repeat(" ", width-len(text)))
	}
	put(version, 8)
	put(patient, 80)
	put(recording, 80)
	put(start.Format("02.01.06"), 8)
	put(start.Format("15.04.05"), 8)
	put(strconv.Itoa(256*(ns+1)), 8)
	put(reserved, 44)
	put(strconv.Itoa(r.Records), 8)
	rd, ok := headerNumber(s.RecordDuration)
	if !ok {
		return specError("record duration %v s does not fit the header", s.RecordDuration)
	}
	put(rd, 8)
	put(strconv.Itoa(ns), 4)
	for _, f := range []struct {
		width int
		get   func(signal) string
	}{
		{16, func(g signal) string { return g.label }},
		{80, func(g signal) string { return g.transducer }},
		{8, func(g signal) string { return g.unit }},
		{8, func(g signal) string { return g.pmin }},
		{8, func(g signal) string { return g.pmax }},
		{8, func(g signal) string { return g.dmin }},
		{8, func(g signal) string { return g.dmax }},
		{80, func(g signal) string { return g.prefilter }},
		{8, func(g signal) string { return strconv.Itoa(g.samples) }},
		{32, func(signal) string { return "" }},
	} {
		for _, g := range sigs {
			put(f.get(g), f.width)
		}
	}
	if h.Len() != 256*(ns+1) {
		return fmt.Errorf("synth: header is %d bytes, want %d", h.Len(), 256*(ns+1))
	}

	bw := bufio.NewWriterSize(w, 1<<20)
	if _, err := bw.Write(h.Bytes()); err != nil {
		return fmt.Errorf("synth: write header: %w", err)
	}
	spr := r.SamplesPerRecord
	rec := make([]byte, bps*(len(r.Digital)*spr+annSamples))
	for i := 0; i < r.Records; i++ {
		o := 0
		for _, ch := range r.Digital {
			for _, d := range ch[i*spr : (i+1)*spr] {
				rec[o] = byte(d)
				rec[o+1] = byte(d >> 8)
				if bps == 3 {
					rec[o+2] = byte(d >> 16)
				}
				o += bps
			}
		}
		if annSamples > 0 {
			n := copy(rec[o:], annot[i])
			clear(rec[o+n:])
		}
		if _, err := bw.Write(rec); err != nil {
			return fmt.Errorf("synth: write record %d: %w", i, err)
		}
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("synth: write: %w", err)
	}
	return nil
}
