package trends

import (
	"strings"

	"longwave/metrics"
)

// markerSpan is the frequency span in Hz a marker's computation draws on,
// as DESIGN.md ("Markers", "Bands") defines it. It decides which markers a
// hardware filter or a low sampling rate affects. worrying is the marker's
// direction of change that reads as slowing (WorryingDirection).
type markerSpan struct {
	name     string
	lo, hi   float64
	worrying Direction
}

// markerSpans lists every marker name of package metrics with its span.
// Relative band powers are relative to the power over 1–30 Hz (their
// denominator, metrics.V1 Bands.Total), the aperiodic fit over 2–40 Hz, the PDR search over 5–14 Hz,
// the centre of gravity over 7–13 Hz, the bands delta 1–4, theta 4–8,
// alpha 8–13, beta 13–30 Hz. Source: longwave design (DESIGN.md). The
// worrying directions and their sources are WorryingDirection's.
var markerSpans = []markerSpan{
	{metrics.PDRFrequency, 5, 14, DirectionDown},
	{metrics.PDRCentroid, 7, 13, DirectionDown},
	{metrics.PDRLeft, 5, 14, DirectionDown},
	{metrics.PDRRight, 5, 14, DirectionDown},
	{metrics.PDRAsymmetry, 5, 14, DirectionUnknown},
	{metrics.AlphaReactivity, 8, 13, DirectionDown},
	{metrics.AlphaRatio, 8, 13, DirectionUp},
	{metrics.ThetaAlphaRatio, 4, 13, DirectionUp},
	{metrics.AperiodicExponent, 2, 40, DirectionUnknown},
	{metrics.AperiodicOffset, 2, 40, DirectionUnknown},
	{metrics.AperiodicR2, 2, 40, DirectionUnknown},
	{metrics.RelDelta, 1, 30, DirectionUp},
	{metrics.RelTheta, 1, 30, DirectionUp},
	{metrics.RelAlpha, 1, 30, DirectionDown},
	{metrics.RelBeta, 1, 30, DirectionDown},
	{metrics.SlowingRatio, 1, 30, DirectionUp},
	{metrics.FrontalPosteriorAlpha, 8, 13, DirectionUnknown},
	{metrics.DrowsinessIndex, 8, 13, DirectionUnknown},
}

// MarkerNames returns the marker names of package metrics in a fixed order.
func MarkerNames() []string {
	out := make([]string, len(markerSpans))
	for i, s := range markerSpans {
		out[i] = s.name
	}
	return out
}

// knownMarker reports whether name is one of package metrics' marker names.
func knownMarker(name string) bool {
	for _, s := range markerSpans {
		if s.name == name {
			return true
		}
	}
	return false
}

// markersAbove returns the markers whose span reaches above hz.
func markersAbove(hz float64) []string {
	var out []string
	for _, s := range markerSpans {
		if s.hi > hz {
			out = append(out, s.name)
		}
	}
	return out
}

// markersBelow returns the markers whose span reaches below hz.
func markersBelow(hz float64) []string {
	var out []string
	for _, s := range markerSpans {
		if s.lo < hz {
			out = append(out, s.name)
		}
	}
	return out
}

// markersExcept returns every marker name but the ones given.
func markersExcept(skip ...string) []string {
	var out []string
outer:
	for _, s := range markerSpans {
		for _, k := range skip {
			if s.name == k {
				continue outer
			}
		}
		out = append(out, s.name)
	}
	return out
}

// FlagAffects reports whether flag f concerns marker m. Flag.Markers entries
// are marker names ("pdr_frequency"), or a name and region
// ("theta_alpha_ratio/posterior"), or a full series key
// ("rel_alpha/posterior/closed"); an empty list concerns every marker.
func FlagAffects(f metrics.Flag, m metrics.Marker) bool {
	return affects(f.Markers, m.Name, m.Region, string(m.State))
}

func affects(list []string, name, region, state string) bool {
	if len(list) == 0 {
		return true
	}
	for _, e := range list {
		n, rest, hasRegion := strings.Cut(e, "/")
		if n != name {
			continue
		}
		if !hasRegion {
			return true
		}
		r, s, hasState := strings.Cut(rest, "/")
		if r != region {
			continue
		}
		if !hasState || s == state {
			return true
		}
	}
	return false
}

// seriesKey is the key of a marker series: name/region/state, as
// metrics.Marker.Key.
func seriesKey(name, region, state string) string {
	return name + "/" + region + "/" + state
}
