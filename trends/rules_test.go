package trends

import (
	"slices"
	"strings"
	"testing"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/metrics/clinic"
)

func rulesOf(flags []metrics.Flag) []string {
	var out []string
	for _, f := range flags {
		out = append(out, f.Rule)
	}
	return out
}

func TestCheckVisitGoodVisitHasNoFlags(t *testing.T) {
	got := CheckVisit(VisitQuality{Conditions: goodConditions(), Quality: goodQuality()})
	if len(got) != 0 {
		t.Errorf("CheckVisit(good visit) = %v, want no flags", rulesOf(got))
	}
}

// Sampling rate against the analysed band up to 45 Hz: Nyquist 2 × 45 = 90 Hz
// (Principles of digital sampling, 1993), three times 45 = 135 Hz (ACNS
// Guideline 4), the IFCN minimum 200 Hz (Nuwer et al. 1998): below, at and
// above each.
func TestCheckVisitSampleRate(t *testing.T) {
	sampling := []string{RuleSampleRateUnknown, RuleSampleRateNyquist, RuleSampleRateBelow3x, RuleSampleRateIFCN}
	tests := []struct {
		rate float64
		want []string
	}{
		{0, []string{RuleSampleRateUnknown}},
		{89.9, []string{RuleSampleRateNyquist}},
		{90, []string{RuleSampleRateNyquist}},
		{90.1, []string{RuleSampleRateBelow3x, RuleSampleRateIFCN}},
		{128, []string{RuleSampleRateBelow3x, RuleSampleRateIFCN}},
		{134.9, []string{RuleSampleRateBelow3x, RuleSampleRateIFCN}},
		{135, []string{RuleSampleRateIFCN}},
		{135.1, []string{RuleSampleRateIFCN}},
		{199.9, []string{RuleSampleRateIFCN}},
		{200, nil},
		{200.1, nil},
		{256, nil},
	}
	for _, tt := range tests {
		c := goodConditions()
		c.SampleRate = tt.rate
		var got []string
		for _, r := range rulesOf(CheckVisit(VisitQuality{Conditions: c, Quality: goodQuality()})) {
			if slices.Contains(sampling, r) {
				got = append(got, r)
			}
		}
		if !slices.Equal(got, tt.want) {
			t.Errorf("sample rate %v Hz: rules %v, want %v", tt.rate, got, tt.want)
		}
	}
}

func TestSampleRateFlagDetails(t *testing.T) {
	c := goodConditions()
	c.SampleRate = 128
	flags := CheckVisit(VisitQuality{Conditions: c, Quality: goodQuality()})
	f, ok := hasRule(flags, RuleSampleRateBelow3x)
	if !ok {
		t.Fatal("128 Hz: no below-3x flag")
	}
	if f.Severity != metrics.NotComparable {
		t.Errorf("128 Hz: severity %s, want not_comparable", f.Severity)
	}
	if !strings.Contains(f.Reason, "sampled at 128 Hz: below 3 × 45 Hz") {
		t.Errorf("128 Hz: reason %q lacks the values", f.Reason)
	}
	// A third of 128 Hz is 42.67 Hz: no marker draws on power above it (the
	// aperiodic fit stops at 40 Hz), but epoch rejection does: all markers,
	// and none named.
	if len(f.Markers) != 0 || strings.Contains(f.Reason, "markers drawing") {
		t.Errorf("128 Hz: markers %v reason %q, want all and none named", f.Markers, f.Reason)
	}
	c.SampleRate = 100
	f, _ = hasRule(CheckVisit(VisitQuality{Conditions: c, Quality: goodQuality()}), RuleSampleRateBelow3x)
	if !strings.Contains(f.Reason, "markers drawing on that power: aperiodic_exponent, aperiodic_offset, aperiodic_r2") {
		t.Errorf("100 Hz (a third 33.3 Hz): reason %q should name the aperiodic fit", f.Reason)
	}
	c.SampleRate = 90
	f, _ = hasRule(CheckVisit(VisitQuality{Conditions: c, Quality: goodQuality()}), RuleSampleRateNyquist)
	if f.Severity != metrics.NotComparable || len(f.Markers) != 0 {
		t.Errorf("90 Hz: severity %s markers %v, want not_comparable for all", f.Severity, f.Markers)
	}
}

// Hardware low-pass: inside the analysed band (< 45 Hz) not comparable, below
// the routine 70 Hz (ACNS Guideline 1) a caution; the markers affected are
// those drawing on power above half the cut-off.
func TestCheckVisitLowPass(t *testing.T) {
	tests := []struct {
		hz       float64
		known    bool
		rule     string
		severity metrics.Severity
		has, not []string
	}{
		// One octave: the PDR search reaches 14 Hz, so a low-pass at 28 Hz
		// (edge 14 Hz) leaves it alone and one at 27.9 Hz does not.
		{27.9, true, RuleLowPassInBand, metrics.NotComparable, []string{metrics.PDRFrequency}, nil},
		{28, true, RuleLowPassInBand, metrics.NotComparable, []string{metrics.AperiodicExponent}, []string{metrics.PDRFrequency}},
		{28.1, true, RuleLowPassInBand, metrics.NotComparable, []string{metrics.AperiodicExponent}, []string{metrics.PDRFrequency}},
		{20, true, RuleLowPassInBand, metrics.NotComparable, []string{metrics.PDRFrequency, metrics.AperiodicExponent, metrics.AlphaReactivity}, nil},
		{44.9, true, RuleLowPassInBand, metrics.NotComparable, []string{metrics.AperiodicExponent, metrics.RelBeta, metrics.SlowingRatio}, []string{metrics.PDRFrequency, metrics.ThetaAlphaRatio}},
		{45, true, RuleLowPassBelowRoutine, metrics.Caution, []string{metrics.AperiodicExponent, metrics.SlowingRatio}, []string{metrics.PDRFrequency}},
		{45.1, true, RuleLowPassBelowRoutine, metrics.Caution, []string{metrics.AperiodicExponent}, []string{metrics.PDRFrequency}},
		{59.9, true, RuleLowPassBelowRoutine, metrics.Caution, []string{metrics.AperiodicExponent, metrics.RelDelta, metrics.SlowingRatio}, []string{metrics.PDRFrequency}},
		{60, true, RuleLowPassBelowRoutine, metrics.Caution, []string{metrics.AperiodicExponent}, []string{metrics.RelDelta, metrics.SlowingRatio}},
		{69.9, true, RuleLowPassBelowRoutine, metrics.Caution, []string{metrics.AperiodicExponent}, []string{metrics.SlowingRatio, metrics.RelDelta}},
		{70, true, "", "", nil, nil},
		{70.1, true, "", "", nil, nil},
		{30, false, "", "", nil, nil}, // not stated: never guessed
	}
	for _, tt := range tests {
		c := goodConditions()
		c.Filters.LowPass = ingest.Frequency{Hz: tt.hz, Known: tt.known}
		flags := CheckVisit(VisitQuality{Conditions: c, Quality: goodQuality()})
		_, inBand := hasRule(flags, RuleLowPassInBand)
		_, routine := hasRule(flags, RuleLowPassBelowRoutine)
		if tt.rule == "" {
			if inBand || routine {
				t.Errorf("LP %v Hz (known %v): flags %v, want none", tt.hz, tt.known, rulesOf(flags))
			}
			continue
		}
		f, ok := hasRule(flags, tt.rule)
		if !ok {
			t.Errorf("LP %v Hz: flags %v, want %s", tt.hz, rulesOf(flags), tt.rule)
			continue
		}
		if f.Severity != tt.severity {
			t.Errorf("LP %v Hz: severity %s, want %s", tt.hz, f.Severity, tt.severity)
		}
		for _, m := range tt.has {
			if !slices.Contains(f.Markers, m) {
				t.Errorf("LP %v Hz: markers %v lack %s", tt.hz, f.Markers, m)
			}
		}
		for _, m := range tt.not {
			if slices.Contains(f.Markers, m) {
				t.Errorf("LP %v Hz: markers %v include %s", tt.hz, f.Markers, m)
			}
		}
	}
}

// Hardware high-pass above 1 Hz (ACNS Guideline 1): markers drawing on power
// below twice the cut-off are not comparable.
func TestCheckVisitHighPass(t *testing.T) {
	tests := []struct {
		hz       float64
		fires    bool
		has, not []string
	}{
		{0.99, false, nil, nil},
		{1, false, nil, nil},
		{1.01, true, []string{metrics.RelDelta, metrics.SlowingRatio, metrics.AperiodicExponent}, []string{metrics.ThetaAlphaRatio, metrics.PDRFrequency}},
		// One octave: the PDR search starts at 5 Hz.
		{2.49, true, []string{metrics.ThetaAlphaRatio}, []string{metrics.PDRFrequency}},
		{2.5, true, []string{metrics.ThetaAlphaRatio}, []string{metrics.PDRFrequency}},
		{2.51, true, []string{metrics.ThetaAlphaRatio, metrics.PDRFrequency}, []string{metrics.PDRCentroid, metrics.AlphaReactivity}},
	}
	for _, tt := range tests {
		c := goodConditions()
		c.Filters.HighPass = ingest.Frequency{Hz: tt.hz, Known: true}
		f, ok := hasRule(CheckVisit(VisitQuality{Conditions: c, Quality: goodQuality()}), RuleHighPassAbove1Hz)
		if ok != tt.fires {
			t.Errorf("HP %v Hz: fired %v, want %v", tt.hz, ok, tt.fires)
			continue
		}
		if !ok {
			continue
		}
		if f.Severity != metrics.NotComparable {
			t.Errorf("HP %v Hz: severity %s", tt.hz, f.Severity)
		}
		for _, m := range tt.has {
			if !slices.Contains(f.Markers, m) {
				t.Errorf("HP %v Hz: markers %v lack %s", tt.hz, f.Markers, m)
			}
		}
		for _, m := range tt.not {
			if slices.Contains(f.Markers, m) {
				t.Errorf("HP %v Hz: markers %v include %s", tt.hz, f.Markers, m)
			}
		}
	}
}

// Amplitude resolution: 0.5 µV per step (Nuwer et al. 1998).
func TestCheckVisitResolution(t *testing.T) {
	for _, tt := range []struct {
		q     float64
		fires bool
	}{{0.49, false}, {0.5, false}, {0.51, true}, {1.2, true}} {
		c := goodConditions()
		c.UVPerStep = tt.q
		f, ok := hasRule(CheckVisit(VisitQuality{Conditions: c, Quality: goodQuality()}), RuleCoarseResolution)
		if ok != tt.fires {
			t.Errorf("%v µV/step: fired %v, want %v", tt.q, ok, tt.fires)
		}
		if ok && (f.Severity != metrics.Caution || !strings.Contains(f.Reason, "µV²/Hz")) {
			t.Errorf("%v µV/step: %+v", tt.q, f)
		}
	}
}

// Good positions: 15 of 19 (longwave design), and O1/O2.
func TestCheckVisitPositions(t *testing.T) {
	without := func(bad ...string) metrics.Quality {
		q := goodQuality()
		q.UsedChannels = nil
		for _, p := range ingest.Standard19 {
			if !slices.Contains(bad, p) {
				q.UsedChannels = append(q.UsedChannels, p)
			}
		}
		q.BadChannels = bad
		return q
	}
	tests := []struct {
		bad       []string
		few       bool
		occipital bool
		left      bool
		right     bool
	}{
		{nil, false, false, false, false},
		{[]string{"Fp1", "Fp2", "F7"}, false, false, false, false},            // 16 good
		{[]string{"Fp1", "Fp2", "F7", "F8"}, false, false, false, false},      // 15 good
		{[]string{"Fp1", "Fp2", "F7", "F8", "T7"}, true, false, false, false}, // 14 good
		{[]string{"O1"}, false, true, true, false},                            // left occipital
		{[]string{"O2"}, false, true, false, true},                            // right occipital
		{[]string{"O1", "O2", "Fp1", "Fp2", "F7"}, true, true, true, true},    // both, and 14 good
		{[]string{"Fp1", "Fp2", "F7", "F8", "T7", "T8"}, true, false, false, false},
	}
	for _, tt := range tests {
		flags := CheckVisit(VisitQuality{Conditions: goodConditions(), Quality: without(tt.bad...)})
		_, few := hasRule(flags, RuleFewGoodPositions)
		occ, isOcc := hasRule(flags, RuleOccipitalMissing)
		if few != tt.few || isOcc != tt.occipital {
			t.Errorf("bad %v: few %v occipital %v, want %v %v", tt.bad, few, isOcc, tt.few, tt.occipital)
			continue
		}
		if !isOcc {
			continue
		}
		if got := slices.Contains(occ.Markers, metrics.PDRLeft); got != tt.left {
			t.Errorf("bad %v: pdr_left affected %v, want %v", tt.bad, got, tt.left)
		}
		if got := slices.Contains(occ.Markers, metrics.PDRRight); got != tt.right {
			t.Errorf("bad %v: pdr_right affected %v, want %v", tt.bad, got, tt.right)
		}
		for _, m := range []string{metrics.PDRFrequency, metrics.PDRAsymmetry} {
			if !slices.Contains(occ.Markers, m) {
				t.Errorf("bad %v: markers %v lack %s", tt.bad, occ.Markers, m)
			}
		}
		if got := slices.Contains(occ.Markers, metrics.RelAlpha+"/"+metrics.RegionLeftOccipital); got != tt.left {
			t.Errorf("bad %v: rel_alpha/left_occipital affected %v, want %v", tt.bad, got, tt.left)
		}
		if slices.Contains(occ.Markers, metrics.AperiodicExponent) {
			t.Errorf("bad %v: the global aperiodic exponent should not be affected", tt.bad)
		}
	}
	// Channels missing from the file count as not good, as do those a
	// sidecar marks bad, when metrics reports no used channels.
	c := goodConditions()
	c.ChannelsFound = slices.DeleteFunc(slices.Clone(c.ChannelsFound), func(s string) bool { return s == "O2" })
	c.ChannelsMissing = []string{"O2"}
	q := goodQuality()
	q.UsedChannels = nil
	if _, ok := hasRule(CheckVisit(VisitQuality{Conditions: c, Quality: q}), RuleOccipitalMissing); !ok {
		t.Error("O2 missing from the file: no occipital flag")
	}
	c = goodConditions()
	c.BadChannels = []string{"O1"}
	if _, ok := hasRule(CheckVisit(VisitQuality{Conditions: c, Quality: q}), RuleOccipitalMissing); !ok {
		t.Error("O1 marked bad by a sidecar: no occipital flag")
	}
}

// Eye states: 60 s clean eyes-closed, an eyes-open period, a known eye state,
// drowsiness index 0.25 (all longwave design).
func TestCheckVisitEyeStates(t *testing.T) {
	tests := []struct {
		name   string
		edit   func(*ingest.Conditions, *metrics.Quality)
		fires  []string
		absent []string
	}{
		{"closed 59.9 s", func(c *ingest.Conditions, q *metrics.Quality) { q.CleanSeconds[ingest.EyesClosed] = 59.9 }, []string{RuleLittleCleanClosed}, nil},
		{"closed 60 s", func(c *ingest.Conditions, q *metrics.Quality) { q.CleanSeconds[ingest.EyesClosed] = 60 }, nil, []string{RuleLittleCleanClosed}},
		{"closed 60.1 s", func(c *ingest.Conditions, q *metrics.Quality) { q.CleanSeconds[ingest.EyesClosed] = 60.1 }, nil, []string{RuleLittleCleanClosed}},
		{"no quality at all", func(c *ingest.Conditions, q *metrics.Quality) { q.CleanSeconds = nil }, []string{RuleLittleCleanClosed, RuleNoEyesOpen}, nil},
		{"open 0 s", func(c *ingest.Conditions, q *metrics.Quality) { q.CleanSeconds[ingest.EyesOpen] = 0 }, []string{RuleNoEyesOpen}, nil},
		{"open 0.1 s", func(c *ingest.Conditions, q *metrics.Quality) { q.CleanSeconds[ingest.EyesOpen] = 0.1 }, nil, []string{RuleNoEyesOpen}},
		{"open 4 s", func(c *ingest.Conditions, q *metrics.Quality) { q.CleanSeconds[ingest.EyesOpen] = 4 }, nil, []string{RuleNoEyesOpen}},
		{"state unknown", func(c *ingest.Conditions, q *metrics.Quality) {
			c.PeriodSource = ingest.FromNothing
			q.CleanSeconds = map[ingest.EyeState]float64{ingest.EyesUnknown: 300}
		}, []string{RuleEyeStateUnknown, RuleLittleCleanClosed, RuleNoEyesOpen}, nil},
		{"drowsy 0.24", func(c *ingest.Conditions, q *metrics.Quality) { q.Drowsiness = 0.24 }, nil, []string{RuleDrowsy}},
		{"drowsy 0.25", func(c *ingest.Conditions, q *metrics.Quality) { q.Drowsiness = 0.25 }, nil, []string{RuleDrowsy}},
		{"drowsy 0.26", func(c *ingest.Conditions, q *metrics.Quality) { q.Drowsiness = 0.26 }, []string{RuleDrowsy}, nil},
		{"drowsiness unknown", func(c *ingest.Conditions, q *metrics.Quality) { q.Drowsiness, q.DrowsinessKnown = 0.9, false }, nil, []string{RuleDrowsy}},
	}
	for _, tt := range tests {
		c, q := goodConditions(), goodQuality()
		tt.edit(&c, &q)
		got := rulesOf(CheckVisit(VisitQuality{Conditions: c, Quality: q}))
		for _, r := range tt.fires {
			if !slices.Contains(got, r) {
				t.Errorf("%s: rules %v lack %s", tt.name, got, r)
			}
		}
		for _, r := range tt.absent {
			if slices.Contains(got, r) {
				t.Errorf("%s: rules %v include %s", tt.name, got, r)
			}
		}
	}
	q := goodQuality()
	q.CleanSeconds[ingest.EyesOpen] = 0
	f, _ := hasRule(CheckVisit(VisitQuality{Conditions: goodConditions(), Quality: q}), RuleNoEyesOpen)
	if !slices.Equal(f.Markers, []string{metrics.AlphaReactivity, metrics.AlphaRatio}) {
		t.Errorf("no eyes open: markers %v, want reactivity only", f.Markers)
	}
	q = goodQuality()
	q.Drowsiness = 0.4
	f, _ = hasRule(CheckVisit(VisitQuality{Conditions: goodConditions(), Quality: q}), RuleDrowsy)
	if slices.Contains(f.Markers, metrics.DrowsinessIndex) || !slices.Contains(f.Markers, metrics.PDRFrequency) {
		t.Errorf("drowsy: markers %v, want all but the drowsiness index", f.Markers)
	}
	if !strings.Contains(f.Reason, "0.4") || !strings.Contains(f.Reason, "0.25") {
		t.Errorf("drowsy: reason %q lacks the values", f.Reason)
	}
}

func TestCheckSettings(t *testing.T) {
	v := visitRec(1, "2024-01-10", 70, 9.5)
	tests := []struct {
		version, hash       string // stored
		curVersion, curHash string
		fires               bool
	}{
		{testVersion, testHash, testVersion, testHash, false},
		{"v0", testHash, testVersion, testHash, true},
		{testVersion, "0000", testVersion, testHash, true},
		{testVersion, "0000", testVersion, "", false}, // no current hash: version only
		{"", "", testVersion, testHash, true},
	}
	for _, tt := range tests {
		v.SettingsVersion, v.SettingsHash = tt.version, tt.hash
		got := CheckSettings(v, tt.curVersion, tt.curHash)
		if (len(got) > 0) != tt.fires {
			t.Errorf("stored %q/%q current %q/%q: flags %v, want fired %v", tt.version, tt.hash, tt.curVersion, tt.curHash, rulesOf(got), tt.fires)
		}
		if len(got) > 0 && (got[0].Severity != metrics.NotComparable || got[0].Rule != RuleOtherSettings) {
			t.Errorf("settings flag %+v", got[0])
		}
	}
}

func TestCompareVisits(t *testing.T) {
	tests := []struct {
		name string
		edit func(prev, cur *clinic.VisitRecord)
		want []string
	}{
		{"same", func(p, c *clinic.VisitRecord) {}, nil},
		{"line 50→60", func(p, c *clinic.VisitRecord) { c.Quality.LineFrequency = 60 }, []string{RuleLineFrequencyChange}},
		{"line 50→50.9", func(p, c *clinic.VisitRecord) { c.Quality.LineFrequency = 50.9 }, nil},
		{"line 50→51 (at tolerance)", func(p, c *clinic.VisitRecord) { c.Quality.LineFrequency = 51 }, nil},
		{"line 50→51.1", func(p, c *clinic.VisitRecord) { c.Quality.LineFrequency = 51.1 }, []string{RuleLineFrequencyChange}},
		{"line from sidecar", func(p, c *clinic.VisitRecord) { c.Quality.LineFrequency = 0; c.Conditions.LineFrequency = 60 }, []string{RuleLineFrequencyChange}},
		{"line unknown", func(p, c *clinic.VisitRecord) { c.Quality.LineFrequency = 0; c.Conditions.LineFrequency = 0 }, nil},
		{"reference case", func(p, c *clinic.VisitRecord) { c.Conditions.Reference = "ref" }, nil},
		{"reference Cz", func(p, c *clinic.VisitRecord) { c.Conditions.Reference = "Cz" }, []string{RuleReferenceChange}},
		{"reference unstated", func(p, c *clinic.VisitRecord) { c.Conditions.Reference = "" }, nil},
		{"equipment", func(p, c *clinic.VisitRecord) { c.Conditions.Equipment = "Amp-9" }, []string{RuleEquipmentChange}},
		{"rate 256→256.1", func(p, c *clinic.VisitRecord) { c.Conditions.SampleRate = 256.1 }, nil},
		{"rate 256→256.3 (0.12 %)", func(p, c *clinic.VisitRecord) { c.Conditions.SampleRate = 256.3 }, []string{RuleSampleRateChange}},
		{"rate 256→512", func(p, c *clinic.VisitRecord) { c.Conditions.SampleRate = 512 }, []string{RuleSampleRateChange}},
		{"high-pass 0.5→0.505", func(p, c *clinic.VisitRecord) { c.Conditions.Filters.HighPass.Hz = 0.505 }, nil},
		{"high-pass 0.5→0.52", func(p, c *clinic.VisitRecord) { c.Conditions.Filters.HighPass.Hz = 0.52 }, []string{RuleFiltersChange}},
		{"high-pass 0.5→0.16", func(p, c *clinic.VisitRecord) { c.Conditions.Filters.HighPass.Hz = 0.16 }, []string{RuleFiltersChange}},
		{"low-pass unknown now", func(p, c *clinic.VisitRecord) { c.Conditions.Filters.LowPass.Known = false }, nil},
		{"several", func(p, c *clinic.VisitRecord) {
			c.Quality.LineFrequency = 60
			c.Conditions.Equipment = "Amp-9"
			c.Conditions.Reference = "A1"
		}, []string{RuleLineFrequencyChange, RuleReferenceChange, RuleEquipmentChange}},
	}
	for _, tt := range tests {
		p, c := visitRec(1, "2023-01-10", 70, 9.5), visitRec(2, "2024-01-10", 71, 9.4)
		tt.edit(&p, &c)
		flags := CompareVisits(p, c)
		if got := rulesOf(flags); !slices.Equal(got, tt.want) {
			t.Errorf("%s: rules %v, want %v", tt.name, got, tt.want)
		}
		for _, f := range flags {
			if f.Severity != metrics.Caution || !strings.Contains(f.Reason, "2023-01-10") {
				t.Errorf("%s: flag %+v: want a caution naming the previous visit", tt.name, f)
			}
		}
	}
}

func TestFlagAffects(t *testing.T) {
	m := metrics.Marker{Name: metrics.ThetaAlphaRatio, Region: metrics.RegionPosterior, State: ingest.EyesClosed}
	tests := []struct {
		markers []string
		want    bool
	}{
		{nil, true},
		{[]string{metrics.ThetaAlphaRatio}, true},
		{[]string{metrics.ThetaAlphaRatio + "/posterior"}, true},
		{[]string{metrics.ThetaAlphaRatio + "/global"}, false},
		{[]string{metrics.ThetaAlphaRatio + "/posterior/closed"}, true},
		{[]string{metrics.ThetaAlphaRatio + "/posterior/open"}, false},
		{[]string{metrics.PDRFrequency, metrics.AperiodicExponent}, false},
	}
	for _, tt := range tests {
		if got := FlagAffects(metrics.Flag{Markers: tt.markers}, m); got != tt.want {
			t.Errorf("FlagAffects(%v, %s) = %v, want %v", tt.markers, m.Key(), got, tt.want)
		}
	}
}

func TestRulesCatalogue(t *testing.T) {
	seen := map[string]bool{}
	for _, r := range Rules() {
		if r.Name == "" || r.Source == "" || r.Threshold == "" || r.Markers == "" {
			t.Errorf("rule %+v: a field is empty", r)
		}
		if r.Severity != metrics.Caution && r.Severity != metrics.NotComparable {
			t.Errorf("rule %s: severity %q", r.Name, r.Severity)
		}
		if seen[r.Name] {
			t.Errorf("rule %s twice", r.Name)
		}
		seen[r.Name] = true
	}
	// Every flag the checks emit belongs to the catalogue.
	c := goodConditions()
	c.SampleRate, c.UVPerStep = 100, 2
	c.Filters.LowPass.Hz, c.Filters.HighPass.Hz = 30, 2
	c.PeriodSource = ingest.FromNothing
	q := metrics.Quality{Drowsiness: 0.9, DrowsinessKnown: true}
	flags := CheckVisit(VisitQuality{Conditions: c, Quality: q})
	for _, f := range flags {
		if !seen[f.Rule] {
			t.Errorf("flag rule %s not in Rules()", f.Rule)
		}
		if f.Source == "" || f.Reason == "" {
			t.Errorf("flag %s: empty source or reason", f.Rule)
		}
	}
	if len(flags) < 8 {
		t.Errorf("a visit breaking every gate got only %v", rulesOf(flags))
	}
}
