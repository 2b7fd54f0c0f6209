package trends_test

import (
	"fmt"

	"longwave/trends"
)

// The reliable change of a PDR falling from 9.5 to 8.8 Hz with the
// provisional default SD 0.57 Hz and r = 0.84 (REFERENCES.md section 2).
func ExampleReliableChangeIndex() {
	rel := trends.DefaultReliability()[0]
	rc := trends.ReliableChangeIndex(9.5, 8.8, rel)
	fmt.Printf("S_diff %.5f Hz, smallest reliable change %.5f Hz\n", rc.SDiff, rc.Threshold)
	fmt.Printf("RC %.2f, reliable %v, provisional %v\n", rc.RC, rc.Reliable, rc.Provisional)
	// Output:
	// S_diff 0.32244 Hz, smallest reliable change 0.63198 Hz
	// RC -2.17, reliable true, provisional true
}

// A yearly slope with its 95 % confidence interval from Student's t.
func ExampleFitSlope() {
	s := trends.FitSlope([]float64{0, 1, 2, 3}, []float64{10, 9.8, 9.7, 9.3})
	fmt.Printf("%.3f Hz/year, 95 %% CI %.3f to %.3f (t %.3f, %d df)\n", s.PerYear, s.CILow, s.CIHigh, s.T, s.DF)
	// Output:
	// -0.220 Hz/year, 95 % CI -0.403 to -0.037 (t 4.303, 2 df)
}
