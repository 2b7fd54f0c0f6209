package bids

import (
	"errors"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"longwave/ingest"
	"longwave/ingest/synth"
)

// put writes files under root, creating folders.
func put(t *testing.T, root string, files map[string]string) {
	t.Helper()
	for rel, content := range files {
		p := filepath.Join(root, filepath.FromSlash(rel))
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, []byte(content), 0o644); err != nil {
			t.Fatal(err)
		}
	}
}

// recording returns the bytes of a synthetic run: plain EDF or BDF (no
// annotations of its own), seconds long.
func recording(t *testing.T, seed uint64, format ingest.Format, seconds float64, edit func(*synth.Spec)) string {
	t.Helper()
	s := synth.Default()
	s.Seed = seed
	s.Format = format
	s.Duration = seconds
	s.Periods = nil
	if edit != nil {
		edit(&s)
	}
	b, err := synth.Bytes(s)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// syntheticDataset lays out a BIDS folder that exercises every rule: events
// in one session, two runs named by task in another, two runs named by acq
// without sessions, broken TSVs, unsupported formats and a participants.tsv
// with impossible values.
func syntheticDataset(t *testing.T) string {
	root := t.TempDir()
	put(t, root, map[string]string{
		"dataset_description.json": `{"Name": "longwave synthetic clinic", "BIDSVersion": "1.9.0"}`,
		"participants.tsv": "participant_id\tage\tsex\n" +
			"sub-01\t71\tF\n" +
			"sub-02\tn/a\tmale\n" +
			"sub-03\tabc\tF\n" + // line 4: age not a number
			"sub-04\t68\tX\n" + // line 5: sex unknown
			"sub-05\t-3\tother\n", // line 6: impossible age
		"sub-01/sub-01_sessions.tsv": "session_id\tacq_time\n" +
			"ses-1\t2021-03-04T10:00:00\n" +
			"ses-2\t2022-03-05T09:30:00.5+01:00\n",

		// sub-01 ses-1: one file, eye state from events.tsv.
		"sub-01/ses-1/eeg/sub-01_ses-1_task-rest_eeg.edf": recording(t, 1, ingest.FormatEDF, 60, nil),
		"sub-01/ses-1/eeg/sub-01_ses-1_task-rest_events.tsv": "onset\tduration\ttrial_type\n" +
			"0\t30\teyes closed\n" +
			"12.5\t0\tbutton press\n" +
			"30\t30\tEyes Open\n",
		"sub-01/ses-1/eeg/sub-01_ses-1_task-rest_eeg.json": `{"TaskName": "rest", "SamplingFrequency": 250,
			"PowerLineFrequency": 50, "EEGReference": "Cz", "SoftwareFilters": "n/a",
			"HardwareFilters": {"HighpassFilter": {"CutoffFrequency": 0.5}, "LowpassFilter": {"CutoffFrequency": 70}},
			"Manufacturer": "Acme", "ManufacturersModelName": "Cap-19"}`,
		"sub-01/ses-1/eeg/sub-01_ses-1_task-rest_channels.tsv": "name\ttype\tunits\tstatus\n" +
			"Fp1\tEEG\tuV\tgood\nT7\tEEG\tuV\tbad\nO1\tEEG\tuV\tn/a\n",
		"sub-01/ses-1/eeg/sub-01_ses-1_task-other_eeg.set": "EEGLAB",
		"sub-01/ses-1/eeg/sub-01_ses-1_task-other_eeg.fdt": "EEGLAB data",

		// sub-01 ses-2: an eyes-closed and an eyes-open BDF run, state from
		// the task label; the closed run's sidecar states the wrong rate.
		"sub-01/ses-2/eeg/sub-01_ses-2_task-restEC_eeg.bdf": recording(t, 2, ingest.FormatBDF, 40, func(s *synth.Spec) { s.UVPerStep = 0.03125 }),
		"sub-01/ses-2/eeg/sub-01_ses-2_task-restEO_eeg.bdf": recording(t, 3, ingest.FormatBDF, 20, func(s *synth.Spec) { s.UVPerStep = 0.03125 }),
		"sub-01/ses-2/eeg/sub-01_ses-2_task-restEC_eeg.json": `{"TaskName": "restEC", "SamplingFrequency": 256, "PowerLineFrequency": "n/a",
			"SoftwareFilters": {"Notch": {"frequency (Hz)": 50}}}`,

		// sub-02, no session: runs named by acq, filters from channels.tsv.
		"sub-02/eeg/sub-02_task-rest_acq-EO_run-1_eeg.edf": recording(t, 4, ingest.FormatEDF, 30, func(s *synth.Spec) { s.Prefilter = "" }),
		"sub-02/eeg/sub-02_task-rest_acq-EC_run-2_eeg.edf": recording(t, 5, ingest.FormatEDF, 50, func(s *synth.Spec) { s.Prefilter = "" }),
		"sub-02/eeg/sub-02_task-rest_acq-EC_run-2_channels.tsv": "name\ttype\tunits\tlow_cutoff\thigh_cutoff\n" +
			"Fp1\tEEG\tuV\t0.3\t45\nFp2\tEOG\tuV\t0.1\t100\n",

		// sub-03: a row with the wrong number of fields (line 3).
		"sub-03/eeg/sub-03_task-rest_eeg.edf":    recording(t, 6, ingest.FormatEDF, 10, nil),
		"sub-03/eeg/sub-03_task-rest_events.tsv": "onset\tduration\ttrial_type\n0\t5\teyes closed\n5\t5\n",
		// sub-04: a number that does not parse (line 2).
		"sub-04/eeg/sub-04_task-rest_eeg.edf":      recording(t, 7, ingest.FormatEDF, 10, nil),
		"sub-04/eeg/sub-04_task-rest_channels.tsv": "name\ttype\tunits\tlow_cutoff\nFp1\tEEG\tuV\tfast\n",
		// sub-05: BrainVision only.
		"sub-05/eeg/sub-05_task-rest_eeg.vhdr": "Brain Vision Data Exchange Header File Version 1.0",
		"sub-05/eeg/sub-05_task-rest_eeg.eeg":  "data",
		"sub-05/eeg/sub-05_task-rest_eeg.vmrk": "markers",
	})
	return root
}

func TestReadSynthetic(t *testing.T) {
	root := syntheticDataset(t)
	d, err := Read(root, ingest.Options{})
	if err != nil {
		t.Fatal(err)
	}

	wantPart := []Participant{
		{ID: "sub-01", Age: 71, AgeKnown: true, Sex: "F"},
		{ID: "sub-02", Sex: "M"},
		{ID: "sub-03", Sex: "F"},
		{ID: "sub-04", Age: 68, AgeKnown: true},
		{ID: "sub-05", Sex: "O"},
	}
	if !slices.Equal(d.Participants, wantPart) {
		t.Errorf("participants %+v, want %+v", d.Participants, wantPart)
	}

	// Every problem, by path and the words and line its error must carry.
	wantProblems := []struct{ path, text string }{
		{"participants.tsv", `"abc" is not an age in years (line 4)`},
		{"participants.tsv", `"X": want male, female, other or n/a (line 5)`},
		{"participants.tsv", `-3 is not a possible age in years (line 6)`},
		{"sub-01/ses-1/eeg/sub-01_ses-1_task-other_eeg.set", "unsupported format: .set data"},
		{"sub-03/eeg/sub-03_task-rest_events.tsv", "sub-03_task-rest_events.tsv: 2 fields, the header has 3 (line 3)"},
		{"sub-04/eeg/sub-04_task-rest_channels.tsv", `low_cutoff: "fast" is not a frequency in Hz (line 2)`},
		{"sub-05/eeg/sub-05_task-rest_eeg.vhdr", "unsupported format: .vhdr data"},
	}
	if len(d.Problems) != len(wantProblems) {
		t.Errorf("%d problems, want %d: %v", len(d.Problems), len(wantProblems), d.Problems)
	}
	for _, w := range wantProblems {
		if !slices.ContainsFunc(d.Problems, func(p Problem) bool { return p.Path == w.path && strings.Contains(p.Err.Error(), w.text) }) {
			t.Errorf("no problem %s: %q among %v", w.path, w.text, d.Problems)
		}
	}
	for _, p := range d.Problems {
		if strings.HasSuffix(p.Path, ".set") || strings.HasSuffix(p.Path, ".vhdr") {
			if !errors.Is(p.Err, ingest.ErrUnsupported) {
				t.Errorf("%s: %v does not match ingest.ErrUnsupported", p.Path, p.Err)
			}
		}
	}

	type visitKey struct{ sub, ses string }
	var keys []visitKey
	visits := map[visitKey]Visit{}
	for _, v := range d.Visits {
		k := visitKey{v.Subject, v.Session}
		keys = append(keys, k)
		visits[k] = v
	}
	wantKeys := []visitKey{{"sub-01", "ses-1"}, {"sub-01", "ses-2"}, {"sub-02", ""}, {"sub-03", ""}, {"sub-04", ""}}
	if !slices.Equal(keys, wantKeys) {
		t.Fatalf("visits %v, want %v", keys, wantKeys)
	}
	if got := visits[visitKey{"sub-01", "ses-1"}].AcqTime; got != "2021-03-04T10:00:00" {
		t.Errorf("ses-1 acq_time %q", got)
	}
	if got := visits[visitKey{"sub-01", "ses-2"}].AcqTime; got != "2022-03-05T09:30:00.5+01:00" {
		t.Errorf("ses-2 acq_time %q", got)
	}

	t.Run("events", func(t *testing.T) {
		v := visits[visitKey{"sub-01", "ses-1"}]
		if len(v.Files) != 1 || v.Files[0].State != "" || v.Files[0].StateFrom != "events" {
			t.Fatalf("files %+v: want one mixed file with state from events", v.Files)
		}
		rec, err := v.Load(ingest.Options{})
		if err != nil {
			t.Fatal(err)
		}
		c := rec.Conditions
		wantPer := []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 30}, {State: ingest.EyesOpen, Start: 30, End: 60}}
		if c.PeriodSource != ingest.FromEvents || !slices.Equal(rec.Periods, wantPer) {
			t.Errorf("periods %v from %q, want %v from events", rec.Periods, c.PeriodSource, wantPer)
		}
		if len(rec.Annotations) != 2 {
			t.Errorf("annotations %v: want only the two eye-state events kept", rec.Annotations)
		}
		if c.LineFrequency != 50 || c.Reference != "Cz" || c.Equipment != "Acme Cap-19" {
			t.Errorf("line %v Hz, reference %q, equipment %q; want 50, Cz, Acme Cap-19", c.LineFrequency, c.Reference, c.Equipment)
		}
		if c.Filters.HighPass != (ingest.Frequency{Hz: 0.5, Known: true}) || c.Filters.LowPass != (ingest.Frequency{Hz: 70, Known: true}) {
			t.Errorf("filters %+v, want the sidecar's HP 0.5 Hz, LP 70 Hz", c.Filters)
		}
		if !slices.Equal(c.BadChannels, []string{"T7"}) {
			t.Errorf("bad channels %v, want [T7]", c.BadChannels)
		}
		if len(c.Cautions) != 0 {
			t.Errorf("cautions %v, want none", c.Cautions)
		}
	})

	t.Run("runs by task", func(t *testing.T) {
		v := visits[visitKey{"sub-01", "ses-2"}]
		var states []ingest.EyeState
		for _, f := range v.Files {
			states = append(states, f.State)
		}
		if !slices.Equal(states, []ingest.EyeState{ingest.EyesClosed, ingest.EyesOpen}) {
			t.Errorf("states %v, want [closed open]", states)
		}
		rec, err := v.Load(ingest.Options{})
		if err != nil {
			t.Fatal(err)
		}
		c := rec.Conditions
		if c.Format != ingest.FormatCombined || c.PeriodSource != ingest.FromRuns || c.Duration != 60 {
			t.Errorf("format %q, source %q, duration %v; want combined, separate runs, 60 s", c.Format, c.PeriodSource, c.Duration)
		}
		wantPer := []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 40}, {State: ingest.EyesOpen, Start: 40, End: 60}}
		if !slices.Equal(rec.Periods, wantPer) {
			t.Errorf("periods %v, want %v", rec.Periods, wantPer)
		}
		if c.Bits != 24 || c.LineFrequency != 0 {
			t.Errorf("bits %d, line frequency %v; want 24 and 0 (n/a)", c.Bits, c.LineFrequency)
		}
		var codes []string
		for _, k := range c.Cautions {
			codes = append(codes, k.Code)
		}
		for _, want := range []string{"bids_sampling_frequency_differs", "bids_software_filters"} {
			if !slices.Contains(codes, want) {
				t.Errorf("cautions %v lack %q", codes, want)
			}
		}
	})

	t.Run("runs by acq, filters from channels.tsv", func(t *testing.T) {
		v := visits[visitKey{"sub-02", ""}]
		rec, err := v.Load(ingest.Options{})
		if err != nil {
			t.Fatal(err)
		}
		c := rec.Conditions
		wantPer := []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 50}, {State: ingest.EyesOpen, Start: 50, End: 80}}
		if c.PeriodSource != ingest.FromRuns || !slices.Equal(rec.Periods, wantPer) {
			t.Errorf("periods %v from %q, want %v from runs", rec.Periods, c.PeriodSource, wantPer)
		}
		// The closed run's channels.tsv: EEG Fp1 0.3–45 Hz (Fp2 is typed EOG
		// there and does not count).
		if c.Filters.HighPass != (ingest.Frequency{Hz: 0.3, Known: true}) || c.Filters.LowPass != (ingest.Frequency{Hz: 45, Known: true}) {
			t.Errorf("filters %+v, want HP 0.3 Hz, LP 45 Hz from channels.tsv", c.Filters)
		}
	})

	t.Run("broken sidecars refuse the file", func(t *testing.T) {
		for sub, want := range map[string]string{"sub-03": "(line 3)", "sub-04": "(line 2)"} {
			_, err := visits[visitKey{sub, ""}].Load(ingest.Options{})
			if err == nil || !strings.Contains(err.Error(), want) || !errors.Is(err, ingest.ErrInvalid) {
				t.Errorf("%s: Load error %v, want ErrInvalid naming %s", sub, err, want)
			}
		}
	})
}

func TestStateFromLabel(t *testing.T) {
	tests := []struct {
		label string
		want  ingest.EyeState
		ok    bool
	}{
		{"eyesclosed", ingest.EyesClosed, true},
		{"restEC", ingest.EyesClosed, true},
		{"RestingStateEyesOpen", ingest.EyesOpen, true},
		{"EO", ingest.EyesOpen, true},
		{"eyesopenrest", ingest.EyesOpen, true},
		{"rest", "", false},
		{"oddball", "", false},
		{"recording", "", false},
		{"", "", false},
	}
	for _, tt := range tests {
		got, ok := stateFromLabel(tt.label)
		if got != tt.want || ok != tt.ok {
			t.Errorf("stateFromLabel(%q) = %q, %v; want %q, %v", tt.label, got, ok, tt.want, tt.ok)
		}
	}
}

func TestHardwareFilters(t *testing.T) {
	tests := []struct {
		json   string
		hp, lp float64 // 0: unknown
		notch  float64
	}{
		{`"n/a"`, 0, 0, 0},
		{`{"Anti-aliasing filter": {"half-amplitude cutoff (Hz)": 500, "Roll-off": "6dB/Octave"}}`, 0, 500, 0},
		{`{"HighpassFilter": {"CutoffFrequency": 0.16}, "LowpassFilter": {"CutoffFrequency": 250}, "NotchFilter": {"CutoffFrequency": 60}}`, 0.16, 250, 60},
		{`{"High-pass": 0.1, "Low-pass": 70}`, 0.1, 70, 0},
		{`{"Some filter": {"Order": 4}}`, 0, 0, 0},
	}
	for _, tt := range tests {
		f, _, err := parseFilters([]byte(tt.json))
		if err != nil {
			t.Errorf("%s: %v", tt.json, err)
			continue
		}
		check := func(name string, got ingest.Frequency, want float64) {
			if (want == 0) == got.Known || got.Known && got.Hz != want {
				t.Errorf("%s: %s %+v, want %v (0 = unknown)", tt.json, name, got, want)
			}
		}
		check("high-pass", f.HighPass, tt.hp)
		check("low-pass", f.LowPass, tt.lp)
		check("notch", f.Notch, tt.notch)
	}
	if _, _, err := parseFilters([]byte(`"everything"`)); err == nil {
		t.Error(`HardwareFilters "everything": no error`)
	}
}

func TestReadNotAFolder(t *testing.T) {
	p := filepath.Join(t.TempDir(), "file.txt")
	put(t, filepath.Dir(p), map[string]string{"file.txt": "x"})
	if _, err := Read(p, ingest.Options{}); err == nil {
		t.Error("Read of a file: no error")
	}
	if _, err := Read(filepath.Join(t.TempDir(), "absent"), ingest.Options{}); err == nil {
		t.Error("Read of a missing folder: no error")
	}
}

// TestScansAcqTime: each file's acq_time from its session's scans.tsv
// (BIDS: filename relative to the session folder, acq_time optional;
// FORMATS.md §2.5), the earliest of a visit's files, and a bad time
// reported with its line.
func TestScansAcqTime(t *testing.T) {
	root := t.TempDir()
	edf := recording(t, 1, ingest.FormatEDF, 10, nil)
	put(t, root, map[string]string{
		"sub-01/ses-01/eeg/sub-01_ses-01_task-eyesclosed_eeg.edf": edf,
		"sub-01/ses-01/eeg/sub-01_ses-01_task-eyesopen_eeg.edf":   edf,
		"sub-01/ses-01/sub-01_ses-01_scans.tsv": "filename\tacq_time\n" +
			"eeg/sub-01_ses-01_task-eyesopen_eeg.edf\t2023-05-02T09:20:00\n" +
			"eeg/sub-01_ses-01_task-eyesclosed_eeg.edf\t2023-05-02T09:10:00\n",
		"sub-01/ses-02/eeg/sub-01_ses-02_task-rest_eeg.edf": edf,
		"sub-01/ses-02/sub-01_ses-02_scans.tsv":             "filename\tacq_time\neeg/sub-01_ses-02_task-rest_eeg.edf\t02.05.2024\n",
		"sub-02/eeg/sub-02_task-rest_eeg.edf":               edf,
		"sub-02/sub-02_scans.tsv":                           "filename\tacq_time\neeg/sub-02_task-rest_eeg.edf\t2022-01-03T08:00:00+01:00\n",
	})
	d, err := Read(root, ingest.Options{})
	if err != nil {
		t.Fatal(err)
	}
	got := map[string]string{}
	for _, v := range d.Visits {
		got[v.Subject+"/"+v.Session] = v.FirstScanTime()
	}
	want := map[string]string{"sub-01/ses-01": "2023-05-02T09:10:00", "sub-01/ses-02": "", "sub-02/": "2022-01-03T08:00:00+01:00"}
	if len(got) != len(want) {
		t.Fatalf("visits %v, want %v", got, want)
	}
	for k, w := range want {
		if got[k] != w {
			t.Errorf("%s: first scan %q, want %q", k, got[k], w)
		}
	}
	found := false
	for _, p := range d.Problems {
		var fe *ingest.FormatError
		if p.Path == "sub-01/ses-02/sub-01_ses-02_scans.tsv" && errors.As(p.Err, &fe) && fe.Line == 2 && fe.Field == "acq_time" {
			found = true
		}
	}
	if !found {
		t.Errorf("bad acq_time not reported with its file and line: %v", d.Problems)
	}
}
