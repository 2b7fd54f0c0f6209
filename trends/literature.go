package trends

import "longwave/metrics"

// Published ageing figures, as advisory notes beside the clinic norm: only
// what REFERENCES.md section 2a allows, and only in the way it allows.

// LiteratureNote is one published figure on ageing, shown beside the clinic
// norm. It is advisory context, never a norm a patient is judged by.
type LiteratureNote struct {
	Marker string `json:"marker"`
	// Text is what may be shown, in the form REFERENCES.md section 2a
	// allows; Population and Source name where it comes from; Status is
	// REFERENCES.md's ("abstract").
	Text       string `json:"text"`
	Population string `json:"population"`
	Source     string `json:"source"`
	Status     string `json:"status"`
	// HasPerYear is true where a per-year figure may be shown; PerYear is
	// then longwave's arithmetic on the source's figure, PerYearNote says so.
	HasPerYear  bool    `json:"has_per_year"`
	PerYear     float64 `json:"per_year"`
	PerYearNote string  `json:"per_year_note,omitempty"`
	Advisory    string  `json:"advisory"`
}

// AdvisoryAgeingNote is shown with every literature note.
const AdvisoryAgeingNote = "advisory: published context on ageing from other populations and methods, not a norm for this clinic's markers and not a diagnosis"

// lifespanSlowingPerYear is longwave's arithmetic on "about 1 Hz over the
// adult lifespan" (20–81 y): −1 Hz / 61 y ≈ −0.0164 Hz per year.
const lifespanSlowingPerYear = -1.0 / (81 - 20)

// Sources as REFERENCES.md section 2a names them.
const (
	sourceKnyazeva = "Knyazeva MG et al. (2018). Neurobiol Aging 69:261 (title and end page from memory). doi:10.1016/j.neurobiolaging.2018.05.018 (abstract)"
	sourceAurlien  = "Aurlien H et al. (2004). Clin Neurophysiol 115:665 (abstract; title and end page from memory)"
	sourceKondacs  = "Kondacs A, Szabó M (1999). Clin Neurophysiol 110:1708 (abstract; journal and pages from memory)"
	sourceVoytek   = "Voytek B, Kramer MA, Case J, et al. (2015). Age-related changes in 1/f neural electrophysiological noise. J Neurosci 35(38):13257–13265. doi:10.1523/JNEUROSCI.2332-14.2015 (abstract); Donoghue T et al. (2020). Nat Neurosci 23(12):1655–1665 (abstract)"
)

// LiteratureNotes returns the published ageing notes for a marker (none for
// markers REFERENCES.md section 2a says nothing of). The alpha-frequency
// notes go with the posterior dominant rhythm and its centre of gravity and
// occipital peaks; the figure of 1 Hz over the lifespan is of source-space
// alpha components, not of the scalp PDR, and its per-year form is
// longwave's arithmetic, labelled so. The aperiodic exponent gets the
// direction only.
func LiteratureNotes(marker string) []LiteratureNote {
	switch marker {
	case metrics.PDRFrequency, metrics.PDRCentroid, metrics.PDRLeft, metrics.PDRRight:
		return []LiteratureNote{
			{
				Marker: marker, Text: "alpha-band components slow by about 1 Hz over the adult lifespan",
				Population: "60 healthy adults aged 20–81 years; source-space alpha components, not the scalp posterior dominant rhythm",
				Source:     sourceKnyazeva, Status: "abstract",
				HasPerYear: true, PerYear: lifespanSlowingPerYear,
				PerYearNote: "about −0.016 Hz per year is longwave's arithmetic (1 Hz over 61 years), not the source's figure",
				Advisory:    AdvisoryAgeingNote,
			},
			{
				Marker: marker, Text: "alpha rhythm frequency declines from about age 45 (direction and onset only, no rate)",
				Population: "4,651 consecutive clinical EEGs, visual reading",
				Source:     sourceAurlien, Status: "abstract", Advisory: AdvisoryAgeingNote,
			},
			{
				Marker: marker, Text: "within a healthy adult, alpha mean frequency varies less over years than it differs between adults, and the variation does not grow past 25 months: noise measured on the clinic's own controls is the fitting yardstick (no coefficient to quote)",
				Population: "45 healthy adults followed for 25–62 months",
				Source:     sourceKondacs, Status: "abstract", Advisory: AdvisoryAgeingNote,
			},
		}
	case metrics.AperiodicExponent:
		return []LiteratureNote{{
			Marker: marker, Text: "the aperiodic exponent is flatter (smaller) with age (direction only; absolute values differ widely with the fitting range)",
			Population: "several studies of healthy adults of different ages",
			Source:     sourceVoytek, Status: "abstract", Advisory: AdvisoryAgeingNote,
		}}
	}
	return nil
}
