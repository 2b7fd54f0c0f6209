package bids

import (
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"strings"

	"longwave/ingest"
)

// ErrNoRecording is returned by Load for a visit without a usable file.
var ErrNoRecording = errors.New("bids: visit has no readable recording")

// sampleRateTolerance: a sidecar SamplingFrequency within this relative
// difference of the file's rate agrees with it (rates are written with a
// few decimals).
const sampleRateTolerance = 1e-6

// Load decodes the visit's recording and applies its sidecars. Which files:
//
//   - one file: that file; its periods from its events (PeriodSource
//     FromEvents) when they name eye states, else from the file's own
//     annotations, else — when its name or sidecar names one state — one
//     period of that state over the whole file (PeriodSource FromRuns: the
//     run's declared state), else unknown;
//   - several files: the first eyes-closed run and the first eyes-open run
//     (by file name) joined by ingest.Combine; the other files are named in
//     a caution. Without such a pair, the first file whose periods are known
//     (events) is used alone, else the first file, with the same caution.
//
// opt is passed to the decoder (phrases for annotations and events;
// DeclaredState applies to a single-file visit only, and there wins over its
// events). A file whose sidecar is broken is
// refused with the sidecar's error (file and line), so nothing is half
// applied.
func (v Visit) Load(opt ingest.Options) (*ingest.Recording, error) {
	if len(v.Files) == 0 {
		return nil, fmt.Errorf("%w: %s %s", ErrNoRecording, v.Subject, v.Session)
	}
	if len(v.Files) == 1 {
		return v.Files[0].load(opt)
	}
	closed, open := -1, -1
	for i, f := range v.Files {
		switch {
		case f.State == ingest.EyesClosed && closed < 0:
			closed = i
		case f.State == ingest.EyesOpen && open < 0:
			open = i
		}
	}
	runOpt := opt
	runOpt.DeclaredState = ""
	var rec *ingest.Recording
	used := map[int]bool{}
	if closed >= 0 && open >= 0 {
		c, err := v.Files[closed].load(runOpt)
		if err != nil {
			return nil, err
		}
		o, err := v.Files[open].load(runOpt)
		if err != nil {
			return nil, err
		}
		if rec, err = ingest.Combine(c, o); err != nil {
			return nil, fmt.Errorf("bids: %s %s: %w", v.Subject, v.Session, err)
		}
		used[closed], used[open] = true, true
	} else {
		pick := 0
		for i, f := range v.Files {
			if len(f.periods) > 0 {
				pick = i
				break
			}
		}
		var err error
		if rec, err = v.Files[pick].load(runOpt); err != nil {
			return nil, err
		}
		used[pick] = true
	}
	var unused []string
	for i, f := range v.Files {
		if !used[i] {
			unused = append(unused, filepath.Base(f.Path))
		}
	}
	if len(unused) > 0 {
		rec.Conditions.Cautions = append(rec.Conditions.Cautions, ingest.Caution{Code: "bids_runs_not_used",
			Text: "other recordings of this visit were not used: " + strings.Join(unused, ", ")})
	}
	return rec, nil
}

// load decodes one file and applies its sidecars.
func (f File) load(opt ingest.Options) (*ingest.Recording, error) {
	if f.err != nil {
		return nil, f.err
	}
	rec, err := ingest.ReadFile(f.Path, opt)
	if err != nil {
		return nil, err
	}
	c := &rec.Conditions
	if sc := f.sidecar; sc != nil {
		if sc.SamplingFrequency > 0 && math.Abs(sc.SamplingFrequency-c.SampleRate) > sampleRateTolerance*sc.SamplingFrequency {
			c.Cautions = append(c.Cautions, ingest.Caution{Code: "bids_sampling_frequency_differs",
				Text: fmt.Sprintf("the sidecar says %g Hz, the file holds %g Hz; the file's rate is used", sc.SamplingFrequency, c.SampleRate)})
		}
		c.LineFrequency = sc.PowerLineFrequency
		if sc.EEGReference != "" {
			c.Reference = sc.EEGReference
		}
		if sc.Equipment != "" {
			c.Equipment = sc.Equipment
		}
		if sc.HardwareText != "" {
			c.Filters = overlayFilters(c.Filters, sc.Hardware, "BIDS HardwareFilters: "+sc.HardwareText)
		}
		if sc.SoftwareText != "" {
			c.Cautions = append(c.Cautions, ingest.Caution{Code: "bids_software_filters",
				Text: "the sidecar lists software filters already applied: " + sc.SoftwareText})
		}
	}
	if f.channels != nil {
		applyChannels(rec, f.channels, f.sidecar == nil || f.sidecar.HardwareText == "")
	}
	switch {
	case len(f.periods) > 0 && opt.DeclaredState == "":
		phrases := ingest.DefaultEyePhrases()
		if opt.Phrases != nil {
			phrases = *opt.Phrases
		}
		total := c.Duration
		rec.Periods = ingest.PeriodsFromEvents(f.events, total, phrases)
		rec.Annotations = nil
		for _, a := range f.events {
			if _, ok := phrases.Match(a.Text); ok {
				rec.Annotations = append(rec.Annotations, a)
			}
		}
		c.PeriodSource = ingest.FromEvents
	case c.PeriodSource == ingest.FromNothing && opt.DeclaredState == "" &&
		(f.State == ingest.EyesClosed || f.State == ingest.EyesOpen):
		rec.Periods = []ingest.Period{{State: f.State, Start: 0, End: c.Duration}}
		c.PeriodSource = ingest.FromRuns
	}
	ingest.FinishConditions(rec)
	return rec, nil
}

// overlayFilters replaces the edges that the sidecar states.
func overlayFilters(base, side ingest.Filters, text string) ingest.Filters {
	if side.HighPass.Known {
		base.HighPass = side.HighPass
	}
	if side.LowPass.Known {
		base.LowPass = side.LowPass
	}
	if side.Notch.Known {
		base.Notch = side.Notch
	}
	base.Text = text
	return base
}

// applyChannels marks bad channels and sets kinds from channels.tsv rows
// (matched by normalised name); when fillFilters, its EEG rows' cut-offs
// fill the edges still unknown (the strictest across rows: highest
// high-pass, lowest low-pass).
func applyChannels(rec *ingest.Recording, rows []channelRow, fillFilters bool) {
	var hp, lp ingest.Frequency
	for _, r := range rows {
		name, _, _, _ := ingest.NormalizeLabel(r.Name, "")
		var ch *ingest.Channel
		for i := range rec.Channels {
			if c := &rec.Channels[i]; c.Original == r.Name || c.Label == name {
				ch = c
				break
			}
		}
		if ch == nil {
			continue
		}
		if r.Bad {
			ch.Bad = true
		}
		if k, ok := kindOf(r.Type); ok {
			ch.Kind = k
		}
		if ch.Kind != ingest.KindEEG {
			continue
		}
		if r.HighPass.Known && (!hp.Known || r.HighPass.Hz > hp.Hz) {
			hp = r.HighPass
		}
		if r.LowPass.Known && (!lp.Known || r.LowPass.Hz < lp.Hz) {
			lp = r.LowPass
		}
	}
	if !fillFilters {
		return
	}
	f := &rec.Conditions.Filters
	var parts []string
	if !f.HighPass.Known && hp.Known {
		f.HighPass = hp
		parts = append(parts, fmt.Sprintf("low_cutoff %g Hz", hp.Hz))
	}
	if !f.LowPass.Known && lp.Known {
		f.LowPass = lp
		parts = append(parts, fmt.Sprintf("high_cutoff %g Hz", lp.Hz))
	}
	if len(parts) > 0 {
		t := "BIDS channels.tsv: " + strings.Join(parts, ", ")
		if f.Text != "" {
			t = f.Text + "; " + t
		}
		f.Text = t
	}
}
