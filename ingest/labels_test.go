package ingest

import "testing"

func TestNormalizeLabel(t *testing.T) {
	// Spellings from issue 2 point 3 and FORMATS.md 3 (TUH "EEG FP1-REF",
	// EDF+ "EEG Fpz-Cz", PhysioNet eegmmidb dotted labels, Nihon Kohden
	// "EEG Fp2-Ref"/"POL E", eegmat "EEG T3" and "ECG ECG"); old-name
	// mapping per ACNS Guideline 2 (T3→T7, T4→T8, T5→P7, T6→P8).
	tests := []struct {
		label, transducer string
		name, ref         string
		kind              ChannelKind
		ok                bool
	}{
		{"EEG O1-REF", "", "O1", "REF", KindEEG, true},
		{"O1-A1", "", "O1", "A1", KindEEG, true},
		{"EEG O1", "", "O1", "", KindEEG, true},
		{"O1..", "", "O1", "", KindEEG, true},
		{"FP1", "", "Fp1", "", KindEEG, true},
		{"Fp1-LE", "", "Fp1", "LE", KindEEG, true},
		{"EEG FP1-LE", "", "Fp1", "LE", KindEEG, true},
		{"EEG Fp2-Ref", "", "Fp2", "REF", KindEEG, true},
		{"EEG C3-AR", "", "C3", "AR", KindEEG, true},
		{"EEG C3-AVG", "", "C3", "AVG", KindEEG, true},
		{"O2-M1", "", "O2", "M1", KindEEG, true},
		{"T3", "", "T7", "", KindEEG, true},
		{"EEG T4", "", "T8", "", KindEEG, true},
		{"T5-A1", "", "P7", "A1", KindEEG, true},
		{"EEG T6-REF", "", "P8", "REF", KindEEG, true},
		{"Fc5.", "", "FC5", "", KindEEG, true},
		{"Cpz.", "", "CPz", "", KindEEG, true},
		{"Af7.", "", "AF7", "", KindEEG, true},
		{"Po7.", "", "PO7", "", KindEEG, true},
		{"Oz..", "", "Oz", "", KindEEG, true},
		{"T9..", "", "T9", "", KindEEG, true},
		{"T10.", "", "T10", "", KindEEG, true},
		{"Iz..", "", "Iz", "", KindEEG, true},
		{"Fpz.", "", "Fpz", "", KindEEG, true},
		{"FCZ", "", "FCz", "", KindEEG, true},
		{"ffc1h", "", "FFC1h", "", KindEEG, true},
		{"  Cz  ", "", "Cz", "", KindEEG, true},
		// Bipolar derivations are not one position.
		{"FP1-F7", "", "FP1-F7", "F7", KindEEG, false},
		{"EEG Fpz-Cz", "", "Fpz-Cz", "Cz", KindEEG, false},
		{"T7-P7", "", "T7-P7", "P7", KindEEG, false},
		// Ears and mastoids keep their own names.
		{"EEG A2-A1", "", "A2", "A1", KindEEG, true},
		{"A1", "", "A1", "", KindEEG, true},
		// Other kinds.
		{"ECG ECG", "", "ECG", "", KindECG, false},
		{"EKG", "", "EKG", "", KindECG, false},
		{"EOG Left", "", "Left", "", KindEOG, false},
		{"LOC", "", "LOC", "", KindEOG, false},
		{"EMG Chin", "", "Chin", "", KindEMG, false},
		{"Chin1", "", "Chin1", "", KindEMG, false},
		{"POL E", "", "E", "", KindOther, false},
		{"POL $A1", "", "$A1", "", KindOther, false},
		{"Status", "", "Status", "", KindOther, false},
		{"sine 8 Hz", "trans1", "sine 8 Hz", "", KindOther, false},
		{"EEG Channel-1", "", "Channel-1", "", KindEEG, false},
		{"Ch1", "EEG electrode", "Ch1", "", KindEEG, false},
		{"X7", "ECG electrode", "X7", "", KindECG, false},
		{"", "", "", "", KindOther, false},
	}
	for _, tt := range tests {
		name, ref, kind, ok := NormalizeLabel(tt.label, tt.transducer)
		if name != tt.name || ref != tt.ref || kind != tt.kind || ok != tt.ok {
			t.Errorf("NormalizeLabel(%q, %q) = %q, %q, %s, %v; want %q, %q, %s, %v",
				tt.label, tt.transducer, name, ref, kind, ok, tt.name, tt.ref, tt.kind, tt.ok)
		}
	}
}

func TestStandard19AreCanonical(t *testing.T) {
	for _, p := range Standard19 {
		got, ok := canonicalPosition(p)
		if !ok || got != p {
			t.Errorf("canonicalPosition(%q) = %q, %v", p, got, ok)
		}
	}
}
