package bids

import (
	"errors"
	"testing"

	"longwave/ingest"
)

// FuzzSidecars feeds arbitrary bytes to the TSV and JSON sidecar parsers: a
// FormatError is fine, a panic or an error of another kind is a failure.
func FuzzSidecars(f *testing.F) {
	for _, seed := range []string{
		"onset\tduration\ttrial_type\n0\t30\teyes closed\n30\tn/a\teyes open\n",
		"name\ttype\tunits\tstatus\tlow_cutoff\thigh_cutoff\nFp1\tEEG\tuV\tbad\t0.1\t70\n",
		"participant_id\tGender\tAge\nsub-044\tn/a\tM\n",
		"onset\tduration\n0\t5\t7\n",
		"\n\n",
		`{"SamplingFrequency": 250, "PowerLineFrequency": "n/a", "HardwareFilters": {"HighpassFilter": {"CutoffFrequency": 0.5}}}`,
		`{"SoftwareFilters": {"a": 1}, "EEGReference": 3}`,
		`{"SamplingFrequency": `,
	} {
		f.Add([]byte(seed))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		check := func(what string, err error) {
			var fe *ingest.FormatError
			if err != nil && !errors.As(err, &fe) {
				t.Errorf("%s: error %v is not a FormatError", what, err)
			}
		}
		if tab, err := parseTable("x.tsv", data); err != nil {
			check("table", err)
		} else {
			_, err := channelsOf(tab)
			check("channels", err)
			_, err = eventsOf(tab)
			check("events", err)
			readParticipantsTable(tab, func(err error) { check("participants", err) })
		}
		_, err := parseEEGJSON("x.json", data)
		check("json", err)
	})
}
