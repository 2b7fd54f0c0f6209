package ingest

import (
	"reflect"
	"testing"
)

func TestFinishConditions(t *testing.T) {
	ch := func(label, ref string, kind ChannelKind, rate float64, n int, step float64, dmin, dmax int) Channel {
		return Channel{Label: label, Reference: ref, Kind: kind, SampleRate: rate, Samples: make([]float32, n),
			UVPerStep: step, DigitalMin: dmin, DigitalMax: dmax}
	}
	rec := &Recording{Channels: []Channel{
		ch("Fp1", "A1", KindEEG, 256, 2560, 0.1, -32768, 32767),
		ch("O1", "A1", KindEEG, 256, 2560, 0.5, -2048, 2047), // coarsest at the EEG rate: 12 bits
		ch("O2", "A1", KindEEG, 512, 5120, 2.0, -100, 100),   // other rate: not counted for the step
		ch("Cz", "a1", KindEEG, 256, 2304, 0.1, -32768, 32767),
		ch("FC5", "REF", KindEEG, 256, 2560, 9.0, -10, 10), // not of the 19: not counted
		ch("ECG", "", KindECG, 256, 2560, 50, -10, 10),
	}}
	rec.Channels[3].Bad = true
	FinishConditions(rec)
	c := rec.Conditions
	if c.SampleRate != 256 {
		t.Errorf("SampleRate %v, want 256 (3 of 4 core channels)", c.SampleRate)
	}
	if c.UVPerStep != 0.5 || c.Bits != 12 {
		t.Errorf("UVPerStep %v Bits %d, want 0.5 and 12", c.UVPerStep, c.Bits)
	}
	if !reflect.DeepEqual(c.ChannelsFound, []string{"Fp1", "Cz", "O1", "O2"}) || len(c.ChannelsMissing) != 15 {
		t.Errorf("found %v missing %v", c.ChannelsFound, c.ChannelsMissing)
	}
	if !reflect.DeepEqual(c.BadChannels, []string{"Cz"}) {
		t.Errorf("bad %v", c.BadChannels)
	}
	if c.Duration != 10 {
		t.Errorf("Duration %v, want 10 (longest at the EEG rate)", c.Duration)
	}
	if c.Reference != "A1" {
		t.Errorf("Reference %q, want A1", c.Reference)
	}
	// A declared reference (BIDS EEGReference) is kept.
	rec.Conditions.Reference = "linked mastoids"
	FinishConditions(rec)
	if rec.Conditions.Reference != "linked mastoids" {
		t.Errorf("declared reference overwritten: %q", rec.Conditions.Reference)
	}
	// Mixed references give none.
	rec.Conditions.Reference = ""
	rec.Channels[0].Reference = "REF"
	FinishConditions(rec)
	if rec.Conditions.Reference != "" {
		t.Errorf("mixed references gave %q", rec.Conditions.Reference)
	}
	// Only non-core EEG channels: their rate counts; ties go to the higher rate.
	rec = &Recording{Channels: []Channel{
		ch("Channel-1", "", KindEEG, 250, 10, 1, -1, 1), ch("Channel-2", "", KindEEG, 500, 10, 1, -1, 1),
	}}
	FinishConditions(rec)
	if rec.Conditions.SampleRate != 500 || len(rec.Conditions.ChannelsMissing) != 19 {
		t.Errorf("non-core: rate %v missing %d", rec.Conditions.SampleRate, len(rec.Conditions.ChannelsMissing))
	}
}

func TestBitsOf(t *testing.T) {
	tests := []struct{ dmin, dmax, want int }{
		{-32768, 32767, 16}, {-8092, 8092, 14}, {-2048, 2047, 12}, {-2048, 2048, 13}, {-8388608, 8388607, 24}, {-100, 1000, 11}, {0, 1, 1},
	}
	for _, tt := range tests {
		if got := bitsOf(tt.dmin, tt.dmax); got != tt.want {
			t.Errorf("bitsOf(%d, %d) = %d, want %d", tt.dmin, tt.dmax, got, tt.want)
		}
	}
}

func TestStartTime(t *testing.T) {
	tests := []struct{ in, want string }{
		{"16.15.00", "16:15:00"}, {"00.00.00", "00:00:00"}, {"23.59.59", "23:59:59"},
		{"26.00.99", ""}, {"12.60.00", ""}, {"12:05:48", ""}, {"1.2.3", ""}, {"", ""}, {"ab.cd.ef", ""},
	}
	for _, tt := range tests {
		if got := parseStartTime([]byte(tt.in)); got != tt.want {
			t.Errorf("parseStartTime(%q) = %q, want %q", tt.in, got, tt.want)
		}
	}
}
