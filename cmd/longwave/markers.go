package main

import (
	"encoding/json"
	"flag"
	"fmt"
	"strings"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/trends"
)

// markerHelp explains each marker in one sentence (issue 3, point 5); the
// definitions are those of DESIGN.md, "Markers".
var markerHelp = []struct{ name, text string }{
	{metrics.PDRFrequency, "posterior dominant rhythm: the frequency (Hz) of the largest peak in 5–14 Hz of the smoothed eyes-closed posterior spectrum, refined by parabolic interpolation, reported only where it stands clearly above the aperiodic fit."},
	{metrics.PDRCentroid, "alpha centre of gravity: the power-weighted mean frequency (Hz) of the eyes-closed posterior spectrum over 7–13 Hz."},
	{metrics.PDRLeft, "the dominant-rhythm peak frequency (Hz) found on O1 alone."},
	{metrics.PDRRight, "the dominant-rhythm peak frequency (Hz) found on O2 alone."},
	{metrics.PDRAsymmetry, "the difference of the left and right occipital peaks, O1 minus O2 (Hz)."},
	{metrics.AlphaReactivity, "alpha attenuation on eye opening: 1 − (posterior alpha power eyes open / eyes closed); needs both states."},
	{metrics.AlphaRatio, "the same comparison as a ratio: posterior alpha power eyes open over eyes closed."},
	{metrics.ThetaAlphaRatio, "absolute theta (4–8 Hz) power over absolute alpha (8–13 Hz) power, posterior and global; it rises as the background slows."},
	{metrics.AperiodicExponent, "the slope χ of the aperiodic (1/f-like) part of the eyes-closed global spectrum, fitted over 2–40 Hz after Donoghue et al. 2020 (fixed mode, no knee)."},
	{metrics.AperiodicOffset, "the offset of that aperiodic fit (log10 µV²/Hz at 1 Hz)."},
	{metrics.AperiodicR2, "how well the aperiodic-plus-peaks model fits the spectrum (R², 0–1)."},
	{metrics.RelDelta, "delta (1–4 Hz) power as a share of 1–45 Hz power, per region."},
	{metrics.RelTheta, "theta (4–8 Hz) power as a share of 1–45 Hz power, per region."},
	{metrics.RelAlpha, "alpha (8–13 Hz) power as a share of 1–45 Hz power, per region."},
	{metrics.RelBeta, "beta (13–30 Hz) power as a share of 1–45 Hz power, per region."},
	{metrics.SlowingRatio, "(delta + theta) over (alpha + beta) power: above 1 when slow activity dominates."},
	{metrics.FrontalPosteriorAlpha, "frontal over posterior alpha power, eyes closed; it rises when alpha spreads forward, as in drowsiness."},
	{metrics.DrowsinessIndex, "the share of clean eyes-closed epochs whose posterior alpha drops out, a sign of drowsiness."},
}

func markersMore() string {
	var b strings.Builder
	b.WriteString(`Reads one recording (EDF, EDF+ or BDF) whose eye-state periods come from its
annotations, or an eyes-closed and an eyes-open run of the same visit, and
prints one JSON object: settings {version, hash}; conditions (the recording
conditions, with "quality": what analysis found); markers [{name, region,
state, value, unit, computable, reason, uncertainty}]; flags [{rule,
severity, markers, reason, source}] from the recording's own quality.
uncertainty is the value's own interval {se, low, high, level, method,
resamples} from settings version 2 on, absent before and where the value is
not computable. A recording without eye
state is analysed as one period of state "unknown" and flagged. Nothing is
stored. A marker that cannot be had has computable false and a reason.

markers (regions posterior, global, left_occipital, right_occipital,
frontal; states closed, open):
`)
	for _, m := range markerHelp {
		fmt.Fprintf(&b, "  %-24s %s\n", m.name, wrap(m.text, 27, 79))
	}
	b.WriteString("\nEvery value is advisory: a reference for clinical judgement, not a diagnosis.\n")
	return b.String()
}

// wrap breaks text into lines of at most width columns, indenting
// continuation lines by indent.
func wrap(text string, indent, width int) string {
	var b strings.Builder
	col := indent
	for i, w := range strings.Fields(text) {
		if i > 0 && col+1+len([]rune(w)) > width {
			b.WriteString("\n" + strings.Repeat(" ", indent))
			col = indent
		} else if i > 0 {
			b.WriteByte(' ')
			col++
		}
		b.WriteString(w)
		col += len([]rune(w))
	}
	return b.String()
}

// markerJSON is a marker as printed: reason always present.
type markerJSON struct {
	Name       string          `json:"name"`
	Region     string          `json:"region"`
	State      ingest.EyeState `json:"state"`
	Value      float64         `json:"value"`
	Unit       string          `json:"unit"`
	Computable bool            `json:"computable"`
	Reason     string          `json:"reason"`
	// Uncertainty: the marker's interval (settings v2 onward).
	Uncertainty *metrics.Uncertainty `json:"uncertainty,omitempty"`
}

// conditionsJSON is ingest.Conditions with the quality figures beside.
type conditionsJSON struct {
	ingest.Conditions
	Quality metrics.Quality `json:"quality"`
}

type markersOutput struct {
	Settings struct {
		Version string `json:"version"`
		Hash    string `json:"hash"`
	} `json:"settings"`
	Conditions conditionsJSON `json:"conditions"`
	Markers    []markerJSON   `json:"markers"`
	Flags      []metrics.Flag `json:"flags"`
}

func init() {
	register(&command{
		name:    "markers",
		args:    "[FILE]",
		summary: "Compute the markers of one recording and print them as JSON, without storing anything.",
		more:    markersMore(),
		setup: func(fs *flag.FlagSet, e *env) func([]string) error {
			closed := fs.String("closed", "", "eyes-closed run `FILE` of the visit")
			open := fs.String("open", "", "eyes-open run `FILE` of the visit")
			state := fs.String("state", "", "eye `STATE` of the whole FILE when it has no annotations: closed or open")
			return func(args []string) error {
				single := ""
				switch len(args) {
				case 0:
				case 1:
					single = args[0]
				default:
					return usagef("one recording file at most, got %d", len(args))
				}
				if single == "" && *closed == "" && *open == "" {
					return usagef("give a recording FILE, or --closed and/or --open runs")
				}
				if single != "" && (*closed != "" || *open != "") {
					return usagef("give a FILE or --closed/--open runs, not both")
				}
				declared, err := parseState(*state)
				if err != nil {
					return err
				}
				settings := metrics.V1()
				rec, err := decodeForMarkers(single, *closed, *open, declared)
				if err != nil {
					return err
				}
				res, err := metrics.Compute(rec, settings)
				if err != nil {
					return fmt.Errorf("%s: %w", rec.Name, err)
				}
				var out markersOutput
				out.Settings.Version, out.Settings.Hash = settings.Version, settings.Hash()
				out.Conditions = conditionsJSON{Conditions: res.Conditions, Quality: res.Quality}
				out.Markers = make([]markerJSON, 0, len(res.Markers))
				for _, m := range res.Markers {
					out.Markers = append(out.Markers, markerJSON(m))
				}
				out.Flags = trends.CheckVisit(trends.VisitQuality{Conditions: res.Conditions, Quality: res.Quality, Markers: res.Markers})
				if out.Flags == nil {
					out.Flags = []metrics.Flag{}
				}
				enc := json.NewEncoder(e.stdout)
				enc.SetIndent("", "  ")
				return enc.Encode(out)
			}
		},
	})
}

func parseState(s string) (ingest.EyeState, error) {
	switch s {
	case "":
		return "", nil
	case "closed":
		return ingest.EyesClosed, nil
	case "open":
		return ingest.EyesOpen, nil
	}
	return "", usagef("--state %q: want closed or open", s)
}

// decodeForMarkers decodes one file, or the runs joined by ingest.Combine;
// one run alone is taken as a file of that run's state.
func decodeForMarkers(single, closed, open string, declared ingest.EyeState) (*ingest.Recording, error) {
	if single != "" {
		return ingest.ReadFile(single, ingest.Options{DeclaredState: declared})
	}
	if declared != "" {
		return nil, usagef("--state applies to a single FILE; runs carry their own state")
	}
	var c, o *ingest.Recording
	var err error
	if closed != "" {
		if c, err = ingest.ReadFile(closed, ingest.Options{DeclaredState: ingest.EyesClosed}); err != nil {
			return nil, err
		}
	}
	if open != "" {
		if o, err = ingest.ReadFile(open, ingest.Options{DeclaredState: ingest.EyesOpen}); err != nil {
			return nil, err
		}
	}
	switch {
	case c == nil:
		return o, nil
	case o == nil:
		return c, nil
	}
	rec, err := ingest.Combine(c, o)
	if err != nil {
		return nil, fmt.Errorf("join %s and %s: %w", c.Name, o.Name, err)
	}
	return rec, nil
}
