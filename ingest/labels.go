package ingest

import (
	"strings"
)

// Electrode names. The 10-10 set is the 81 positions of the extended 10-20
// system as named by the ACNS (Acharya et al., J Clin Neurophysiol
// 2016;33:308–311) and Oostenveld & Praamstra (Clin Neurophysiol
// 2001;112:713–719); the 10-5 intermediate rows (AFF, FFC, FCC, CCP, CPP,
// PPO, POO, FFT, FTT, TTP, TPP, AFp, OI) with their "h" half positions follow
// Oostenveld & Praamstra's naming scheme [row letters and ranges from memory].
// Canonical case (FORMATS.md 3): upper-case row letters except the "p" of
// "Fp"/"AFp", lower-case "z" for the midline and "h" for half positions.
var positionIndex = buildPositionIndex()

// oldNames maps the old 10-20 temporal names to their 10-10 names (ACNS
// Guideline 2; FORMATS.md 3: T3→T7, T4→T8, T5→P7, T6→P8).
var oldNames = map[string]string{"T3": "T7", "T4": "T8", "T5": "P7", "T6": "P8"}

// referenceTokens are reference parts of a label that name no scalp site:
// "REF" (common reference), "LE"/"RE" (linked or left/right ear), "AR"/"AVG"
// (average), "A1"/"A2"/"M1"/"M2" and their links (FORMATS.md 3, TUH and
// clinical exports; common practice).
var referenceTokens = map[string]string{
	"REF": "REF", "LE": "LE", "RE": "RE", "AR": "AR", "AV": "AVG", "AVG": "AVG", "CAR": "AVG",
	"A1": "A1", "A2": "A2", "M1": "M1", "M2": "M2", "A1A2": "A1A2", "A12": "A1A2", "M1M2": "M1M2",
	"LINKED": "LE", "EARS": "LE",
}

// kindPrefixes are the type words that EDF+ puts before a label
// ("EEG Fpz-Cz", Kemp & Olivan 2003 §2.1.3.1) and exporters use.
var kindPrefixes = map[string]ChannelKind{
	"EEG": KindEEG, "EOG": KindEOG, "ECG": KindECG, "EKG": KindECG, "EMG": KindEMG,
	"RESP": KindOther, "POL": KindOther, "SPO2": KindOther, "TEMP": KindOther, "MISC": KindOther,
	"PHOTIC": KindOther, "STATUS": KindOther, "TRIG": KindOther, "EVENT": KindOther,
}

// kindWords are whole labels (after prefix removal) that say the kind.
var kindWords = map[string]ChannelKind{
	"ECG": KindECG, "EKG": KindECG, "ECG1": KindECG, "ECG2": KindECG,
	"EOG": KindEOG, "LOC": KindEOG, "ROC": KindEOG, "HEOG": KindEOG, "VEOG": KindEOG,
	"EOGL": KindEOG, "EOGR": KindEOG, "LEOG": KindEOG, "REOG": KindEOG,
	"EMG": KindEMG, "CHIN": KindEMG, "CHIN1": KindEMG, "CHIN2": KindEMG,
}

func buildPositionIndex() map[string]string {
	idx := map[string]string{}
	add := func(name string) { idx[strings.ToUpper(name)] = name }
	// 10-10 rows: lateral numbers 1..10 on each side (odd left, even right),
	// "z" midline; not every row has every number in practice, but a name
	// from the pattern is an electrode name all the same.
	rows := []struct {
		prefix string
		max    int
		mid    bool
	}{
		{"Fp", 2, true}, {"AF", 10, true}, {"F", 10, true}, {"FC", 6, true}, {"FT", 10, false},
		{"C", 6, true}, {"T", 10, false}, {"CP", 6, true}, {"TP", 10, false},
		{"P", 10, true}, {"PO", 10, true}, {"O", 10, true}, {"I", 2, true},
		// 10-5 intermediate rows
		{"AFp", 10, true}, {"AFF", 10, true}, {"FFC", 10, true}, {"FFT", 10, false}, {"FCC", 10, true},
		{"FTT", 10, false}, {"CCP", 10, true}, {"TTP", 10, false}, {"CPP", 10, true}, {"TPP", 10, false},
		{"PPO", 10, true}, {"POO", 10, true}, {"OI", 10, true},
	}
	for _, r := range rows {
		if r.mid {
			add(r.prefix + "z")
		}
		for n := 1; n <= r.max; n++ {
			num := itoa(n)
			add(r.prefix + num)
			if len(r.prefix) >= 2 && r.prefix != "Fp" {
				add(r.prefix + num + "h")
			}
		}
	}
	// Temporal row names of the 10-10 system beyond FT/TP are T7..T10 (T1,
	// T2 are anterior temporal sites of some montages); C5/C6 exist, C7+ do
	// not but are harmless.
	for _, n := range []string{"Nz", "Iz", "A1", "A2", "M1", "M2", "T1", "T2"} {
		add(n)
	}
	for old := range oldNames {
		add(old)
	}
	return idx
}

func itoa(n int) string {
	if n < 10 {
		return string(rune('0' + n))
	}
	return "1" + string(rune('0'+n-10))
}

// canonicalPosition returns the canonical 10-10/10-5 name of s
// (case-insensitive), with the old temporal names mapped to the new ones.
func canonicalPosition(s string) (string, bool) {
	name, ok := positionIndex[strings.ToUpper(s)]
	if !ok {
		return "", false
	}
	if n, old := oldNames[name]; old {
		name = n
	}
	return name, true
}

// NormalizeLabel maps an EDF signal label (and its transducer field) to a
// 10-10 electrode name, the reference named in the label, and the channel
// kind. ok is true when the label names one electrode position.
//
// Steps (FORMATS.md 3): trim; remove a type prefix ("EEG ", "EOG ", "POL ");
// strip trailing dots ("O1..", "Fc5."); split "active-reference" on '-';
// drop a reference token (REF, LE, AR, AVG, A1, A2, M1, M2 …) into
// reference; match the active part case-insensitively against the 10-10 and
// 10-5 names and re-case it canonically ("FP1"→"Fp1", "CPZ"→"CPz",
// "Af7"→"AF7"); map T3/T4/T5/T6 to T7/T8/P7/P8.
//
// A bipolar label whose second part is another scalp site ("FP1-F7",
// "Fpz-Cz") is not one position: name is the cleaned label, reference is the
// second site, kind is EEG and ok is false. A1/A2 and M1/M2 are kept as
// names of their own (ears and mastoids are not conflated).
func NormalizeLabel(label, transducer string) (name, reference string, kind ChannelKind, ok bool) {
	s := strings.TrimSpace(strings.Trim(label, "\x00"))
	kind = ""
	if sp := strings.IndexByte(s, ' '); sp > 0 {
		if k, found := kindPrefixes[strings.ToUpper(s[:sp])]; found {
			kind = k
			s = strings.TrimSpace(s[sp+1:])
		}
	}
	s = strings.TrimRight(s, ".")
	s = strings.TrimSpace(s)
	name = s
	active, ref := s, ""
	if i := strings.IndexByte(s, '-'); i > 0 && i < len(s)-1 && strings.Count(s, "-") == 1 {
		active, ref = strings.TrimSpace(s[:i]), strings.TrimSpace(strings.TrimRight(s[i+1:], "."))
	}
	pos, isPos := canonicalPosition(active)
	switch {
	case ref == "" && isPos:
		name, ok = pos, true
	case ref != "" && isPos:
		if tok, isRef := referenceTokens[strings.ToUpper(ref)]; isRef {
			name, reference, ok = pos, tok, true
		} else if refPos, refIsPos := canonicalPosition(ref); refIsPos {
			// Bipolar derivation between two sites: not one position.
			reference = refPos
		}
	}
	if kind == "" {
		kind = kindFrom(s, active, isPos, transducer)
	}
	return name, reference, kind, ok
}

// kindFrom infers the channel kind when no type prefix says it: a label
// word (ECG, EOG, LOC, Chin …), an electrode name (EEG), or the transducer
// field naming a kind; else other.
func kindFrom(s, active string, isPos bool, transducer string) ChannelKind {
	u := strings.ToUpper(strings.NewReplacer(" ", "", "_", "", "-", "").Replace(s))
	if k, found := kindWords[u]; found {
		return k
	}
	ua := strings.ToUpper(active)
	for _, p := range []string{"ECG", "EKG"} {
		if strings.HasPrefix(ua, p) {
			return KindECG
		}
	}
	for _, p := range []string{"EOG", "EMG"} {
		if strings.HasPrefix(ua, p) {
			return kindPrefixes[p]
		}
	}
	if isPos {
		return KindEEG
	}
	t := strings.ToUpper(transducer)
	switch {
	case strings.Contains(t, "EEG"):
		return KindEEG
	case strings.Contains(t, "EOG"):
		return KindEOG
	case strings.Contains(t, "ECG") || strings.Contains(t, "EKG"):
		return KindECG
	case strings.Contains(t, "EMG"):
		return KindEMG
	}
	return KindOther
}
