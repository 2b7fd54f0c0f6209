package server

import (
	"strconv"
	"strings"

	"longwave/metrics"
	"longwave/trends"
)

// groupIntervalFlags folds the per-marker flags of the interval rule
// (trends.RuleIntervalWide, one per marker whose interval is too wide) into
// one flag for the screens, so that a short visit shows one finding listing
// its markers, not a screenful of them. The stored flags and the API keep
// one flag per marker. The folded flag stands where the first one stood.
func groupIntervalFlags(fs []metrics.Flag) []metrics.Flag {
	first, n := -1, 0
	for i, f := range fs {
		if f.Rule == trends.RuleIntervalWide {
			if first < 0 {
				first = i
			}
			n++
		}
	}
	if n < 2 {
		return fs
	}
	g := fs[first]
	g.Markers, g.Reason = nil, ""
	var reasons []string
	for _, f := range fs {
		if f.Rule == trends.RuleIntervalWide {
			g.Markers = append(g.Markers, f.Markers...)
			reasons = append(reasons, f.Reason)
		}
	}
	g.Reason = strconv.Itoa(n) + " markers have an interval too wide to compare across visits: " + strings.Join(reasons, "; ")
	out := make([]metrics.Flag, 0, len(fs)-n+1)
	for i, f := range fs {
		switch {
		case i == first:
			out = append(out, g)
		case f.Rule != trends.RuleIntervalWide:
			out = append(out, f)
		}
	}
	return out
}
