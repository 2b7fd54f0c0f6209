package ingest

import (
	"reflect"
	"testing"
)

func TestParseTALs(t *testing.T) {
	// Examples from the EDF+ specification §2.2 (Kemp & Olivan 2003) and the
	// quirks of the shared files (MB0400FU's missing 0x00, test_utf8's UTF-8).
	tests := []struct {
		name  string
		in    string
		want  []tal
		unter bool
		err   string // field of the expected error
	}{
		{"spec lights off", "+180\x14Lights off\x14Close door\x14\x00",
			[]tal{{Onset: 180, Texts: []string{"Lights off", "Close door"}}}, false, ""},
		{"spec apnea", "+1800.2\x1525.5\x14Apnea\x14\x00",
			[]tal{{Onset: 1800.2, Duration: 25.5, HasDuration: true, Texts: []string{"Apnea"}}}, false, ""},
		{"time keeping then event", "+567\x14\x14\x00+3456.789\x14\x14R-wave\x14\x00\x00\x00",
			[]tal{{Onset: 567, Texts: []string{""}}, {Onset: 3456.789, Texts: []string{"", "R-wave"}}}, false, ""},
		{"negative onset", "-0.5\x14\x14\x00", []tal{{Onset: -0.5, Texts: []string{""}}}, false, ""},
		{"missing 0x00 (MB0400FU)", "+0.000000\x14\x14+0.000000\x14Segment: REC START\x14\x00",
			[]tal{{Onset: 0, Texts: []string{""}}, {Onset: 0, Texts: []string{"Segment: REC START"}}}, true, ""},
		{"utf-8 text", "+120\x14\u4e2d\u6587\x14\x00", []tal{{Onset: 120, Texts: []string{"\u4e2d\u6587"}}}, false, ""},
		{"latin-1 text", "+1\x14caf\xe9\x14\x00", []tal{{Onset: 1, Texts: []string{"caf\u00e9"}}}, false, ""},
		{"slot ends after 0x14", "+1\x14x\x14", []tal{{Onset: 1, Texts: []string{"x"}}}, false, ""},
		{"all zero", "\x00\x00\x00", nil, false, ""},
		{"no sign", "12\x14\x14\x00", nil, false, "TAL onset"},
		{"letter in onset", "+1a\x14\x14\x00", nil, false, "TAL onset"},
		{"two dots", "+1.2.3\x14\x14\x00", nil, false, "TAL onset"},
		{"sign only", "+\x14\x14\x00", nil, false, "TAL onset"},
		{"bad duration", "+1\x15x\x14\x00", nil, false, "TAL duration"},
		{"text not ended", "+1\x14abc\x00", nil, false, "TAL annotation"},
		{"onset runs out", "+123", nil, false, "TAL onset"},
	}
	for _, tt := range tests {
		got, unter, err := parseTALs([]byte(tt.in))
		if tt.err != "" {
			if err == nil || err.Field != tt.err {
				t.Errorf("%s: parseTALs(%q) error %v, want field %q", tt.name, tt.in, err, tt.err)
			}
			continue
		}
		if err != nil {
			t.Errorf("%s: parseTALs(%q): %v", tt.name, tt.in, err)
			continue
		}
		if !reflect.DeepEqual(got, tt.want) || unter != tt.unter {
			t.Errorf("%s: parseTALs(%q) = %+v, %v; want %+v, %v", tt.name, tt.in, got, unter, tt.want, tt.unter)
		}
	}
}
