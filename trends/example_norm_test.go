package trends_test

import (
	"fmt"
	"math"

	"longwave/trends"
)

// A clinic's 24 controls with four yearly visits each, their norm, and a
// patient whose posterior dominant rhythm falls by 0.25 Hz a year over four
// visits. The values are invented.
func ExampleCompareSlope() {
	var obs []trends.ControlObservation
	for i := 0; i < 24; i++ {
		first := 56 + float64(i)
		level := 9.5 + 0.4*math.Sin(float64(i))
		slope := -0.02 + 0.03*math.Cos(float64(3*i))
		for j := 0; j < 4; j++ {
			age := first + float64(j)
			noise := 0.2 * math.Sin(float64(7*i+3*j))
			obs = append(obs, trends.ControlObservation{Person: fmt.Sprint("C", i), AgeYears: age, Value: level + slope*float64(j) + noise})
		}
	}
	norm := trends.FitControlNorm(obs, trends.NormOptions{Marker: "pdr_frequency", Region: "posterior", State: "closed", FittedOn: "2026-12-03"})
	fmt.Println(norm.Basis())
	lo, hi := norm.ControlSlopeRange()
	fmt.Printf("controls: %.3f Hz/y (95 %% CI %.3f to %.3f), a control's slope %.3f to %.3f, residual SD %.3f Hz\n",
		norm.PerYear.Value, norm.PerYear.CILow, norm.PerYear.CIHigh, lo, hi, norm.ResidualSD)

	patient := []trends.PatientVisit{{AgeYears: 71, Value: 9.4}, {AgeYears: 72, Value: 9.2}, {AgeYears: 73, Value: 8.9}, {AgeYears: 74, Value: 8.65}}
	p := trends.FitPatientSlope(patient, norm)
	v := trends.CompareSlope(p, norm, 72.5)
	fmt.Printf("patient: %.3f Hz/y (95 %% CI %.3f to %.3f)\n", p.PerYear, p.CILow, p.CIHigh)
	fmt.Printf("%s (worrying direction: %s)\n", v.Text, v.Worrying)
	// Output:
	// clinic controls: 24 persons, 96 visits, fitted 2026-12-03
	// controls: -0.010 Hz/y (95 % CI -0.025 to 0.006), a control's slope -0.024 to 0.005, residual SD 0.163 Hz
	// patient: -0.255 Hz/y (95 % CI -0.398 to -0.112)
	// declines faster than the clinic's controls (worrying direction: down)
}
