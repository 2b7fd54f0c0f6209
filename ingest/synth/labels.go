package synth

import "strings"

// oldNames maps the 10-10 names that the older 10-20 nomenclature spells
// differently (ACNS Guideline 2, 2016: T7=T3, T8=T4, P7=T5, P8=T6).
var oldNames = map[string]string{"T7": "T3", "T8": "T4", "P7": "T5", "P8": "T6"}

// spell writes the 10-10 name label in the given spelling.
func spell(label string, s Spelling) string {
	switch s {
	case SpellTypedRef:
		return "EEG " + strings.ToUpper(label) + "-REF"
	case SpellDotted:
		if len(label) < 4 {
			return label + strings.Repeat(".", 4-len(label))
		}
		return label
	case SpellOldNames:
		if o, ok := oldNames[label]; ok {
			return o
		}
		return label
	case SpellEarRef:
		return label + "-A1"
	default:
		return label
	}
}

// spellEOG writes an EOG label: with the EDF+ type prefix in the typed-ref
// spelling ("EOG VEOG"), else as it is ("VEOG"); the ingest label normaliser
// reads both as an EOG channel.
func spellEOG(label string, s Spelling) string {
	if s == SpellTypedRef {
		return "EOG " + label
	}
	return label
}
