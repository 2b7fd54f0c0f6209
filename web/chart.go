package web

// Chart options are built with go-echarts' typed options and series (see
// echarts.go) and reach the page as JSON data. Nothing in them is a
// function: the tooltip text of a point travels as data (Point.Tip, lines of
// plain text) and our static script escapes it when it builds the tooltip.
// No option names a remote resource (no image symbols, no background
// images).

// Palette of longwave's charts: quiet blues and greys of our own, with a
// muted plum for visits that cannot be compared (no red/amber/green).
const (
	ColourLine       = "#2f5873" // comparable visits, spectra
	ColourApart      = "#7b4f6e" // visits that cannot be compared
	ColourApartGrey  = "#9b968c" // their spectra and band powers, drawn apart
	ColourBand       = "rgba(111, 145, 168, 0.18)"
	ColourBandEdge   = "rgba(111, 145, 168, 0.55)"
	ColourFit        = "#8c8577" // aperiodic fit
	ColourPeak       = "#1d3a4d"
	ColourTraceOpen  = "#4f6d5f"
	ColourScale      = "#222b30"
	ColourAxis       = "#5d6b73"
	ColourGridLine   = "#e2e0da"
	ColourTraceClose = "#2f5873"
)

// Colours of the trace viewer: kept windows on a pale blue-grey, rejected
// ones on a pale plum with their rule in words, eye states as a band along
// the top (closed darker than open).
const (
	ColourKept       = "rgba(111, 145, 168, 0.10)"
	ColourRejected   = "rgba(123, 79, 110, 0.16)"
	ColourWindowEdge = "rgba(93, 107, 115, 0.35)"
	ColourStateClose = "rgba(47, 88, 115, 0.55)"
	ColourStateOpen  = "rgba(79, 109, 95, 0.45)"
	ColourBadTrace   = "#a39e93"
)
