package ingest

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"longwave/ingest/testenv"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// sharedDataDir returns ../shared/data beside the module root, or skips the
// test when it is absent (fails instead under LONGWAVE_REQUIRE_DATA=1, as
// CI sets it; DEVELOPERS.md "Checks").
func sharedDataDir(tb testing.TB) string {
	tb.Helper()
	return testenv.SharedData(tb)
}

// sharedFile opens one shared file, checks its sha256 against the value in
// its PROVENANCE.md, and decodes it (allowing files without EEG).
func sharedFile(t *testing.T, rel, sha string, opt Options) (*Recording, string) {
	t.Helper()
	path := filepath.Join(sharedDataDir(t), rel)
	b, err := os.ReadFile(path)
	if err != nil {
		testenv.Missing(t, testenv.RequireDataVar, "%s: %v (needs the shared data file)", rel, err)
	}
	sum := sha256.Sum256(b)
	if got := hex.EncodeToString(sum[:]); got != sha {
		t.Fatalf("%s: sha256 %s, PROVENANCE.md says %s", rel, got, sha)
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rec, err := decode(f, int64(len(b)), filepath.Base(path), opt, false)
	if err != nil {
		t.Fatalf("%s: %v", rel, err)
	}
	return rec, path
}

func labelsOf(rec *Recording) []string {
	var out []string
	for _, c := range rec.Channels {
		out = append(out, c.Label)
	}
	return out
}

func checkChannel(t *testing.T, rec *Recording, label string, kind ChannelKind, rate float64, n int) *Channel {
	t.Helper()
	ch := rec.Channel(label)
	if ch == nil {
		t.Errorf("%s: no channel %q among %v", rec.Name, label, labelsOf(rec))
		return nil
	}
	if ch.Kind != kind || ch.SampleRate != rate || len(ch.Samples) != n {
		t.Errorf("%s %s: kind %s rate %v samples %d; want %s %v %d", rec.Name, label, ch.Kind, ch.SampleRate, len(ch.Samples), kind, rate, n)
	}
	return ch
}

// TestEEGMMIDB checks the facts of eegmmidb/PROVENANCE.md: EDF+C, 61 × 1 s
// records, 64 EEG channels at 160 Hz with dotted labels, 1 µV per step,
// "HP:0Hz LP:0Hz N:0Hz" (no information), equipment BCI2000, start 16.15.00,
// and the zero-padded last record (9632 or 9616 samples with data).
func TestEEGMMIDB(t *testing.T) {
	files := []struct {
		name, sha string
		samples   int
	}{
		{"S001R01.edf", "4743b736131a7e147c150e8b37711029b6cda5e356c4b3e8261a03cdcaaf8b0c", 9632},
		{"S001R02.edf", "31a95e0a880e6c3d89960d9d62c144f24cc4e9f5d7e93c7f864ef61cd49e847e", 9632},
		{"S002R01.edf", "d542689b31c977838f20b1a2062865b98ecf10a7e9702f56f101000d47f2ec68", 9616},
		{"S002R02.edf", "666a9299341ece77522df050b1ddd128179a540548d82642ba975a65b4f6d84e", 9616},
		{"S003R01.edf", "2af68afa8d4f158a7ae7f3903b66f0947925880639b7a8b5b6bb13b0c6c50f96", 9632},
		{"S003R02.edf", "41044fea497e05650c4b1f4009011b44a50a6cefd55d5afa9e1d1b7988afd6e5", 9632},
		{"S004R01.edf", "23e9645f492488d2376ac3a606d177043efc6e5fb00281c2d6648e4b06a6ce62", 9632},
		{"S004R02.edf", "32134f3ce7056fd6487855552636b8f93ea2d67631ef1da6f6474eda6040162f", 9632},
		{"S038R01.edf", "cf352ddee891d1f3f6c6aa3fb4e947ae0c89b9dcb2edd0cb2c75defa5c5eb2e1", 9632},
		{"S038R02.edf", "7af50c7caa2b873015cabd726bc47ac5dc57de2ae61d151e278dd2613aca3681", 9632},
		{"S040R01.edf", "45423b0cfc992bee8cede102265968d424d3731a6a7f2c8fb4a714f4ba3dfe61", 9632},
		{"S040R02.edf", "3f9cb083e7c2677528a1f4d23243a062c3ea3498fde899803ae752fd29f9c2db", 9632},
	}
	wantLabels := strings.Fields(`FC5 FC3 FC1 FCz FC2 FC4 FC6 C5 C3 C1 Cz C2 C4 C6 CP5 CP3 CP1 CPz CP2 CP4 CP6
		Fp1 Fpz Fp2 AF7 AF3 AFz AF4 AF8 F7 F5 F3 F1 Fz F2 F4 F6 F8 FT7 FT8 T7 T8 T9 T10 TP7 TP8
		P7 P5 P3 P1 Pz P2 P4 P6 P8 PO7 PO3 POz PO4 PO8 O1 Oz O2 Iz`)
	for _, f := range files {
		t.Run(f.name, func(t *testing.T) {
			rec, _ := sharedFile(t, filepath.Join("eegmmidb", f.name), f.sha, Options{})
			c := rec.Conditions
			if got := strings.Join(labelsOf(rec), " "); got != strings.Join(wantLabels, " ") {
				t.Errorf("labels %s", got)
			}
			for _, ch := range rec.Channels {
				if ch.Kind != KindEEG || ch.SampleRate != 160 || len(ch.Samples) != f.samples || ch.Unit != "uV" {
					t.Errorf("%s: kind %s rate %v samples %d unit %q", ch.Label, ch.Kind, ch.SampleRate, len(ch.Samples), ch.Unit)
				}
			}
			if ch := rec.Channel("Oz"); ch == nil || ch.Original != "Oz.." {
				t.Errorf("Oz original label not kept")
			}
			wantDur := float64(f.samples) / 160
			if c.Format != FormatEDFPlusC || c.SampleRate != 160 || math.Abs(c.Duration-wantDur) > 1e-9 ||
				c.UVPerStep != 1 || c.Bits != 14 || len(c.ChannelsMissing) != 0 || c.Equipment != "BCI2000" ||
				c.StartTimeOfDay != "16:15:00" || c.Filters.HighPass.Known || c.Filters.LowPass.Known || c.Filters.Notch.Known ||
				c.PeriodSource != FromNothing {
				t.Errorf("conditions %+v", c)
			}
			if len(rec.Segments) != 1 || rec.Segments[0].Count != f.samples || !hasCaution(rec, "zero_padding_cut") {
				t.Errorf("segments %v cautions %v", rec.Segments, c.Cautions)
			}
			if len(rec.Annotations) != 0 {
				t.Errorf("the free-text T0 annotation was kept: %v", rec.Annotations)
			}
		})
	}
}

// TestEEGMAT checks eegmat/PROVENANCE.md: EDF+C, 22 signals (19 EEG with old
// temporal names, A2-A1, ECG in mV, annotations), 500 Hz, 182/170/62 records
// of 1 s, prefilter "HP:0.500000Hz LP:45.000000Hz RF:50Hz" only in Subject00_1.
func TestEEGMAT(t *testing.T) {
	files := []struct {
		name, sha string
		records   int
		filtered  bool
	}{
		{"Subject00_1.edf", "8b23c443f2f5f733f8ccc31a54377898009c28c7563d1107692a8735212d2f15", 182, true},
		{"Subject04_1.edf", "0c96ec8a36767673772d35c1c8e8328c6a51f18e83b806f5776d02f388c65a73", 170, false},
		{"Subject04_2.edf", "4455d8e910ac8f5a18a5c050e2b544d147b092458cd135c04e3030f2ee63f90f", 62, false},
	}
	want := "Fp1 Fp2 F3 F4 F7 F8 T7 T8 C3 C4 P7 P8 P3 P4 O1 O2 Fz Cz Pz A2 ECG"
	for _, f := range files {
		t.Run(f.name, func(t *testing.T) {
			rec, _ := sharedFile(t, filepath.Join("eegmat", f.name), f.sha, Options{})
			c := rec.Conditions
			if got := strings.Join(labelsOf(rec), " "); got != want {
				t.Errorf("labels %s", got)
			}
			n := f.records * 500
			checkChannel(t, rec, "T7", KindEEG, 500, n)
			if ch := rec.Channel("T7"); ch != nil && ch.Original != "EEG T3" {
				t.Errorf("T7 original %q", ch.Original)
			}
			if ch := checkChannel(t, rec, "A2", KindEEG, 500, n); ch != nil && ch.Reference != "A1" {
				t.Errorf("A2-A1 reference %q", ch.Reference)
			}
			if ch := checkChannel(t, rec, "ECG", KindECG, 500, n); ch != nil && ch.Unit != "mV" {
				t.Errorf("ECG unit %q", ch.Unit)
			}
			if c.Format != FormatEDFPlusC || c.SampleRate != 500 || c.Duration != float64(f.records) || len(c.ChannelsFound) != 19 ||
				c.Equipment != "NeuroCom_Professional_3.0.0" || c.StartTimeOfDay != "00:00:00" || c.Bits != 16 {
				t.Errorf("conditions %+v", c)
			}
			fl := c.Filters
			if f.filtered {
				if fl.HighPass != (Frequency{0.5, true}) || fl.LowPass != (Frequency{45, true}) || fl.Notch != (Frequency{50, true}) {
					t.Errorf("filters %+v", fl)
				}
			} else if fl.HighPass.Known || fl.LowPass.Known || fl.Notch.Known {
				t.Errorf("blank prefilter gave %+v", fl)
			}
			if len(c.Cautions) != 0 {
				t.Errorf("cautions on a clean file: %v", c.Cautions)
			}
		})
	}
}

// TestMB0400FU checks mne-testing-data/PROVENANCE.md: EDF+D with contiguous
// onsets (one segment), 25 ordinary signals at 200 Hz, 29 s, "-Ref" labels,
// $A1/$A2 in mV, the unterminated time-keeping TALs and the two annotations.
func TestMB0400FU(t *testing.T) {
	phrases := EyePhrases{Closed: []string{"rec start"}, Open: []string{"off"}}
	rec, _ := sharedFile(t, "mne-testing-data/MB0400FU.EDF", "6e722e183253d158eb29fd044102929befb0d8cfa7eaff40f3ccc14902c9d19e", Options{Phrases: &phrases})
	c := rec.Conditions
	want := "Fp2 Fp1 F4 F3 C4 C3 P4 P3 O2 O1 F8 F7 T8 T7 P8 P7 Fz Cz Pz E A2 A1 X1 $A2 $A1"
	if got := strings.Join(labelsOf(rec), " "); got != want {
		t.Errorf("labels %s", got)
	}
	for _, ch := range rec.Channels {
		if ch.SampleRate != 200 || len(ch.Samples) != 29*200 {
			t.Errorf("%s: rate %v samples %d", ch.Label, ch.SampleRate, len(ch.Samples))
		}
	}
	if ch := rec.Channel("$A1"); ch == nil || ch.Unit != "mV" || ch.Kind != KindOther || ch.PhysicalMin != -12002.9 {
		t.Errorf("$A1 channel %+v", ch)
	}
	if ch := rec.Channel("Fp2"); ch == nil || ch.PhysicalMin != -1191.40 || ch.DigitalMin != -12200 || ch.DigitalMax != 12009 || ch.Reference != "REF" {
		t.Errorf("Fp2 channel ranges wrong")
	}
	if c.Format != FormatEDFPlusD || c.Duration != 29 || len(rec.Segments) != 1 || rec.Segments[0] != (Segment{0, 0, 5800}) ||
		c.Equipment != "NKC-EEG-1100C" || c.StartTimeOfDay != "16:00:16" || c.Reference != "REF" || !hasCaution(rec, "unterminated_tal") {
		t.Errorf("conditions %+v segments %v", c, rec.Segments)
	}
	if len(rec.Annotations) != 2 || rec.Annotations[0].Text != "Segment: REC START ALLE EEG" || rec.Annotations[0].Onset != 0 ||
		rec.Annotations[1].Text != "A1+A2 OFF" || rec.Annotations[1].Onset != 1.14 {
		t.Errorf("annotations %v", rec.Annotations)
	}
}

// TestBDFStim checks test_bdf_stim_channel.bdf: plain BDF, 10 × 1 s, C3 C4 Cz
// and Status at 500 Hz, physical ±187470 over the full 24-bit range.
func TestBDFStim(t *testing.T) {
	rec, _ := sharedFile(t, "mne-testing-data/test_bdf_stim_channel.bdf", "d555c9550069c0402835092ac3b2136ac238c8b8996069e11594350826d765a3", Options{})
	for _, l := range []string{"C3", "C4", "Cz"} {
		checkChannel(t, rec, l, KindEEG, 500, 5000)
	}
	checkChannel(t, rec, "Status", KindOther, 500, 5000)
	c := rec.Conditions
	wantStep := 374940.0 / 16777215
	if c.Format != FormatBDF || c.SampleRate != 500 || c.Duration != 10 || c.Bits != 24 || math.Abs(c.UVPerStep-wantStep) > 1e-12 ||
		len(c.ChannelsFound) != 3 || c.StartTimeOfDay != "08:04:01" {
		t.Errorf("conditions %+v", c)
	}
}

// TestPyEDFlibGenerator checks the synthetic generator files: no EEG
// (Decode refuses them), 11 signals at 200 Hz for 600 s (EDF+C), and the BDF+C
// files with per-signal rates including 975/999 and 487.5/499.5 Hz.
func TestPyEDFlibGenerator(t *testing.T) {
	marks := EyePhrases{Closed: []string{"recording starts"}, Open: []string{"recording ends"}}
	rec, path := sharedFile(t, "pyedflib-testdata/test_generator.edf", "720f653a24996b3158fc8baede136dfe4f5f162933af44891b594ff5c6437bb1", Options{Phrases: &marks})
	if len(rec.Channels) != 11 || rec.Conditions.Format != FormatEDFPlusC || rec.Conditions.Equipment != "test_generator" {
		t.Errorf("test_generator.edf: %d channels, format %s, equipment %q", len(rec.Channels), rec.Conditions.Format, rec.Conditions.Equipment)
	}
	for _, ch := range rec.Channels {
		if ch.SampleRate != 200 || len(ch.Samples) != 120000 || ch.Kind != KindOther || ch.PhysicalMin != -1000 {
			t.Errorf("%s: rate %v samples %d kind %s", ch.Label, ch.SampleRate, len(ch.Samples), ch.Kind)
		}
	}
	if len(rec.Annotations) != 2 || rec.Annotations[0].Onset != 0 || rec.Annotations[1].Onset != 600 {
		t.Errorf("annotations %v", rec.Annotations)
	}
	if _, err := ReadFile(path, Options{}); !errors.Is(err, ErrUnsupported) {
		t.Errorf("ReadFile(test_generator.edf) = %v, want ErrUnsupported (no EEG channel)", err)
	}
	bdfs := []struct {
		name, sha string
		rates     []float64
		seconds   float64
	}{
		{"test_generator.bdf", "1c3fc0aeb9dee32b4a3bc2b850df28fdaa99bc6f10a8ad11bd2fd00f1adbe2ca", []float64{1000, 800, 500, 975, 999}, 30},
		{"test_generator_datarec_generator_2.bdf", "a16295aa263eb3ab8909cd6457dc3180660f26063efab5a38a238beb3b09f9e7", []float64{500, 400, 250, 487.5, 499.5}, 30},
	}
	for _, f := range bdfs {
		rec, _ := sharedFile(t, "pyedflib-testdata/"+f.name, f.sha, Options{})
		if rec.Conditions.Format != FormatBDFPlusC || len(rec.Channels) != len(f.rates) {
			t.Errorf("%s: format %s, %d channels", f.name, rec.Conditions.Format, len(rec.Channels))
			continue
		}
		for i, ch := range rec.Channels {
			if ch.SampleRate != f.rates[i] || math.Abs(ch.Duration()-f.seconds) > 1e-9 || ch.PhysicalMax != 3000 {
				t.Errorf("%s %s: rate %v duration %v", f.name, ch.Label, ch.SampleRate, ch.Duration())
			}
		}
	}
}

// TestSubsecondAndUTF8 checks test_subsecond.edf and test_utf8.edf: Fp1 at
// 128 Hz for 698 s with the inverted physical range 8711…−8711, the first
// record starting 0.3945312 s after the header time, and the annotations
// (onsets here are seconds after the first sample).
func TestSubsecondAndUTF8(t *testing.T) {
	const start = 0.3945312
	files := []struct {
		name, sha string
		texts     []string
		onsets    []float64
	}{
		{"test_subsecond.edf", "ac1cc70b0b9b345c7b5006f0f27d98656b1d891c2c02505b6c18ed399f077379",
			[]string{"XLSpike", "Clip Note", "XLEvent", "XLSpike"}, []float64{2.3457031, 3.8867187, 290.8964843, 583.9667968}},
		{"test_utf8.edf", "8c45e762c5ef9887ba88f98cb9d0de0707591857ab389f29a496a3e9560910fe",
			[]string{"XLSpike", "Clip Note", "中文测试八个字", "XLEvent", "XLSpike"}, []float64{1.9511719, 3.4921875, 120, 290.5019531, 583.5722656}},
	}
	for _, f := range files {
		all := EyePhrases{Closed: []string{"xlspike", "clip note", "xlevent", "中文测试八个字"}}
		rec, _ := sharedFile(t, "pyedflib-testdata/"+f.name, f.sha, Options{Phrases: &all})
		ch := checkChannel(t, rec, "Fp1", KindEEG, 128, 698*128)
		if ch != nil && (ch.PhysicalMin != 8711 || ch.PhysicalMax != -8711) {
			t.Errorf("%s: physical range %v…%v", f.name, ch.PhysicalMin, ch.PhysicalMax)
		}
		if ch != nil && ch.UVPerStep <= 0 {
			t.Errorf("%s: step %v must be positive with an inverted range", f.name, ch.UVPerStep)
		}
		if rec.Conditions.StartTimeOfDay != "04:05:56" || rec.Conditions.Format != FormatEDFPlusC {
			t.Errorf("%s: conditions %+v", f.name, rec.Conditions)
		}
		if len(rec.Annotations) != len(f.texts) {
			t.Errorf("%s: annotations %v", f.name, rec.Annotations)
			continue
		}
		for i, a := range rec.Annotations {
			if a.Text != f.texts[i] || math.Abs(a.Onset-(f.onsets[i]-start)) > 1e-9 {
				t.Errorf("%s: annotation %d = %+v, want %q at %v", f.name, i, a, f.texts[i], f.onsets[i]-start)
			}
		}
	}
}

// TestEDFjl checks edfjl-testdata/PROVENANCE.md: test_uneven_samp.edf is plain
// EDF, 11 × 10 s, a 100 Hz channel in V and a 12.8 Hz channel with digital
// −100…1000, an invalid start time, one extra byte; bdf_test.bdf is BDF
// flagged EDF+C without annotations, 8 "EEG Channel-n" at 250 Hz, 73 s.
func TestEDFjl(t *testing.T) {
	rec, path := sharedFile(t, "edfjl-testdata/test_uneven_samp.edf", "2daecb85c563560a6a4f1ba4db1342580da561c13d0a0e34482c7aed82c2b45c", Options{})
	if len(rec.Channels) != 2 || rec.Conditions.Format != FormatEDF || rec.Conditions.StartTimeOfDay != "" || !hasCaution(rec, "trailing_bytes") {
		t.Errorf("test_uneven_samp: %d channels, %+v", len(rec.Channels), rec.Conditions)
	} else {
		a, b := rec.Channels[0], rec.Channels[1]
		if a.SampleRate != 100 || len(a.Samples) != 11000 || a.Unit != "V" || a.UVPerStep != 20e6/4096 {
			t.Errorf("3 Hz channel: rate %v samples %d unit %q step %v", a.SampleRate, len(a.Samples), a.Unit, a.UVPerStep)
		}
		if b.SampleRate != 12.8 || len(b.Samples) != 1408 || b.DigitalMin != -100 || b.DigitalMax != 1000 {
			t.Errorf("12.8 Hz channel: rate %v samples %d digital %d…%d", b.SampleRate, len(b.Samples), b.DigitalMin, b.DigitalMax)
		}
		// The 3 Hz sine "+5/-5 V" peaks at ±5 V = ±5e6 µV.
		lo, hi := minMax(a.Samples)
		if math.Abs(float64(hi)-5e6) > 0.01*5e6 || math.Abs(float64(lo)+5e6) > 0.01*5e6 {
			t.Errorf("3 Hz sine spans %v…%v µV, want ±5e6", lo, hi)
		}
	}
	if _, err := ReadFile(path, Options{}); !errors.Is(err, ErrUnsupported) {
		t.Errorf("ReadFile(test_uneven_samp.edf) = %v, want ErrUnsupported", err)
	}
	rec, _ = sharedFile(t, "edfjl-testdata/bdf_test.bdf", "06c47ba7651f762e4f8f881890e5e5559448256ba46d333daff5e6d53bae2b76", Options{})
	c := rec.Conditions
	if len(rec.Channels) != 8 || c.Format != FormatBDF || !hasCaution(rec, "plus_flag_without_annotations") || c.SampleRate != 250 ||
		c.Duration != 73 || len(c.ChannelsMissing) != 19 || c.Equipment != "" || c.StartTimeOfDay != "02:20:20" {
		t.Errorf("bdf_test: %d channels, %+v", len(rec.Channels), c)
	}
	for i, ch := range rec.Channels {
		if ch.Kind != KindEEG || ch.Label != "Channel-"+string(rune('1'+i)) || len(ch.Samples) != 73*250 {
			t.Errorf("bdf_test channel %d: %q %s %d", i, ch.Label, ch.Kind, len(ch.Samples))
		}
	}
}

// TestSleepEDFHypnogram checks SC4001EC-Hypnogram.edf: one annotation-only
// record of duration 0, 154 annotated intervals after the time-keeping TAL.
func TestSleepEDFHypnogram(t *testing.T) {
	stages := EyePhrases{Closed: []string{"sleep stage"}}
	rec, path := sharedFile(t, "sleep-edfx/SC4001EC-Hypnogram.edf", "a4cf67694ade1b52a0ddd06d5817fd45d2d3e8bac5302f640f3e9cfbbf12a996", Options{Phrases: &stages})
	if len(rec.Channels) != 0 || rec.Conditions.Format != FormatEDFPlusC || rec.Conditions.SampleRate != 0 {
		t.Errorf("hypnogram: %d channels %+v", len(rec.Channels), rec.Conditions)
	}
	a := rec.Annotations
	if len(a) != 154 {
		t.Fatalf("%d annotations, want 154", len(a))
	}
	if a[0] != (Annotation{0, 30630, "Sleep stage W"}) || a[153] != (Annotation{79500, 6900, "Sleep stage ?"}) {
		t.Errorf("first %+v last %+v", a[0], a[153])
	}
	_, err := ReadFile(path, Options{})
	var fe *FormatError
	if !errors.As(err, &fe) || !errors.Is(err, ErrUnsupported) {
		t.Errorf("ReadFile(hypnogram) = %v, want ErrUnsupported", err)
	}
}

func minMax(x []float32) (lo, hi float32) {
	lo, hi = float32(math.Inf(1)), float32(math.Inf(-1))
	for _, v := range x {
		lo, hi = min(lo, v), max(hi, v)
	}
	return lo, hi
}
