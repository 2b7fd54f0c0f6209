package ingest

import "testing"

func TestParsePrefilter(t *testing.T) {
	k := func(hz float64) Frequency { return Frequency{Hz: hz, Known: true} }
	var u Frequency
	// Forms from the EDF+ spec (item 11), BioSemi's format table (semicolons,
	// comma decimals, DC, no Hz) and the shared data (eegmat "RF:50Hz",
	// eegmmidb "HP:0Hz LP:0Hz N:0Hz"), FORMATS.md 1.8.
	tests := []struct {
		text          string
		hp, lp, notch Frequency
	}{
		{"HP:0.1Hz LP:70Hz N:50Hz", k(0.1), k(70), k(50)},
		{"HP:0.1Hz LP:75Hz N:60Hz", k(0.1), k(75), k(60)},
		{"HP:DC; LP:410", k(0), k(410), u},
		{"HP:0,16; LP:500", k(0.16), k(500), u},
		{"HP:0.500000Hz LP:45.000000Hz RF:50Hz", k(0.5), k(45), k(50)},
		{"HP:0Hz LP:0Hz N:0Hz", u, u, u},
		{"HP:0Hz", k(0), u, u},
		{"HP:0Hz LP:70Hz", k(0), k(70), u},
		{"LP:0Hz", u, u, u},
		{"hp:1hz lp:30hz", k(1), k(30), u},
		{"HP: 0.3 Hz LP: 35 Hz", k(0.3), k(35), u},
		{"HP:0.1Hz,LP:100Hz,N:50Hz", k(0.1), k(100), k(50)},
		{"HP:0.1Hz;LP:1kHz", k(0.1), k(1000), u},
		{"Notch:50Hz", u, u, k(50)},
		{"HP:abc LP:70Hz", u, k(70), u},
		{"HP:-1Hz", u, u, u},
		{"", u, u, u},
		{"pre1", u, u, u},
		{"none", u, u, u},
	}
	for _, tt := range tests {
		got := ParsePrefilter(tt.text)
		if got.HighPass != tt.hp || got.LowPass != tt.lp || got.Notch != tt.notch {
			t.Errorf("ParsePrefilter(%q) = HP %+v LP %+v N %+v; want %+v %+v %+v",
				tt.text, got.HighPass, got.LowPass, got.Notch, tt.hp, tt.lp, tt.notch)
		}
		if got.Text != tt.text {
			t.Errorf("ParsePrefilter(%q).Text = %q", tt.text, got.Text)
		}
	}
}
