package trends

import (
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"longwave/metrics"
)

// The error rates of the whole verdict, by simulation: control cohorts and
// patients are drawn like a memory clinic's posterior dominant rhythm, the
// control norm is fitted (FitControlNorm), each patient's slope is fitted
// (FitPatientSlope) and judged (CompareSlope), exactly as a course does.
//
// How a simulated person is drawn (invented values, synthetic ground truth,
// each with the figure it was taken from):
//   - PDR at age 70: N(9.48, 0.57²) Hz, the healthy elderly of the 1989
//     study (REFERENCES.md section 1, abstract);
//   - yearly change: N(−0.016, 0.03²) Hz/y; the mean is longwave's
//     arithmetic on "about 1 Hz over the adult lifespan" (REFERENCES.md
//     section 2a); the between-person SD 0.03 Hz/y is invented (no
//     published figure);
//   - visit-to-visit noise: N(0, 0.2²) Hz beyond the within-visit error,
//     and a within-visit error of SE U(0.05, 0.15) Hz that the visit
//     reports, about 0.23 Hz together: the Jacobson–Truax SE
//     0.57·√(1 − 0.84) = 0.228 Hz of REFERENCES.md section 2 (arithmetic);
//   - first visit at an age U(55, 80) years, then visits a year apart
//     ± U(−0.1, 0.1) years; controls have 3–6 visits (uniform), 30 controls
//     to a clinic, a new clinic (and norm) for every simPatientsPerClinic
//     patients.
//
// A declining patient's yearly change is a healthy one's minus δ, the
// extra decline. A further 500 healthy patients have visit-to-visit noise
// 1.5 times the controls' (a patient less settled than a control): the
// verdict then leans on the patient's own residuals.
const (
	simControls          = 30
	simPatientsPerClinic = 20
	simHealthyPerVisits  = 500 // per number of visits 3, 4, 5, 6: 2,000 healthy courses
	simDecliningPerCell  = 200 // per number of visits and δ: 3,200 declining courses
	simNoisyPerVisits    = 125 // healthy patients noisier than the controls: 500 courses
	simNoise             = 0.2 // visit-to-visit SD beyond the within-visit error, Hz
	simNoisyFactor       = 1.5 // the noisier patients' visit-to-visit SD over the controls'
	simSeed1, simSeed2   = 20261203, 10
)

// simDeltas are the extra yearly declines of the declining patients, Hz/y.
var simDeltas = []float64{0.05, 0.1, 0.2, 0.3}

type simPerson struct{ visits []PatientVisit }

func simDraw(r *rand.Rand, visits int, delta, noise float64) simPerson {
	b0 := 9.48 + 0.57*r.NormFloat64()
	b1 := -0.016 + 0.03*r.NormFloat64() - delta
	age := 55 + 25*r.Float64()
	var p simPerson
	for j := 0; j < visits; j++ {
		if j > 0 {
			age += 1 + 0.2*(r.Float64()-0.5)
		}
		se := 0.05 + 0.1*r.Float64()
		v := b0 + b1*(age-70) + noise*r.NormFloat64() + se*r.NormFloat64()
		p.visits = append(p.visits, PatientVisit{AgeYears: age, Value: v, SE: se})
	}
	return p
}

func simClinic(r *rand.Rand, id int) ControlNorm {
	var obs []ControlObservation
	for i := 0; i < simControls; i++ {
		c := simDraw(r, 3+r.IntN(4), 0, simNoise)
		for _, v := range c.visits {
			obs = append(obs, ControlObservation{Person: fmt.Sprintf("k%d-%d", id, i), AgeYears: v.AgeYears, Value: v.Value, SE: v.SE})
		}
	}
	return FitControlNorm(obs, NormOptions{Marker: metrics.PDRFrequency})
}

// wilson is the Wilson score 95 % interval of x successes in n trials
// (Wilson EB (1927), J Am Stat Assoc 22:209–212; formula from memory):
// (p̂ + z²/2n ± z·√(p̂(1 − p̂)/n + z²/4n²)) / (1 + z²/n), z = 1.96.
func wilson(x, n int) (lo, hi float64) {
	const z = 1.96
	p, nf := float64(x)/float64(n), float64(n)
	d := 1 + z*z/nf
	c := (p + z*z/(2*nf)) / d
	h := z * math.Sqrt(p*(1-p)/nf+z*z/(4*nf*nf)) / d
	return math.Max(0, c-h), math.Min(1, c+h)
}

func TestWilson(t *testing.T) {
	// 0 of 10: the upper limit is z²/(n + z²) = 3.8416/13.8416 (arithmetic
	// on the formula); 5 of 10: symmetric about 1/2, half width
	// 1.96·√(0.025 + 0.009604)/1.38416 = 0.26341 (arithmetic).
	if lo, hi := wilson(0, 10); lo != 0 || !near(hi, 3.8416/13.8416, 1e-12) {
		t.Errorf("wilson(0, 10) = %v, %v", lo, hi)
	}
	if lo, hi := wilson(5, 10); !near(lo+hi, 1, 1e-12) || !near(hi-0.5, 1.96*math.Sqrt(0.025+3.8416/400)/1.38416, 1e-12) {
		t.Errorf("wilson(5, 10) = %v, %v", lo, hi)
	}
}

type simCount struct{ declines, rises, within, none, n int }

func (c *simCount) add(v SlopeVerdict) {
	c.n++
	switch {
	case !v.Known:
		c.none++
	case v.Text == SlopeDeclinesFaster:
		c.declines++
	case v.Text == SlopeRisesFaster:
		c.rises++
	default:
		c.within++
	}
}

func pct(x, n int) string { return fmt.Sprintf("%.1f %%", 100*float64(x)/float64(n)) }

func pctCI(x, n int) string {
	lo, hi := wilson(x, n)
	return fmt.Sprintf("%s (%.1f–%.1f %%)", pct(x, n), 100*lo, 100*hi)
}

// TestVerdictErrorRates simulates 2,000 healthy, 500 noisier healthy and
// 3,200 declining courses through the same code a course uses, checks that
// at most 5 % of the healthy are called "declines faster", and prints the
// Markdown table of the README's "How sure is a verdict?" (go test -v).
func TestVerdictErrorRates(t *testing.T) {
	r := rand.New(rand.NewPCG(simSeed1, simSeed2))
	var norm ControlNorm
	served, clinics, normsMissing := 0, 0, 0
	next := func() ControlNorm {
		if served%simPatientsPerClinic == 0 {
			norm = simClinic(r, clinics)
			clinics++
			if !norm.Known {
				normsMissing++
			}
		}
		served++
		return norm
	}
	judge := func(p simPerson, n ControlNorm) SlopeVerdict {
		var mean float64
		for _, v := range p.visits {
			mean += v.AgeYears
		}
		return CompareSlope(FitPatientSlope(p.visits, n), n, mean/float64(len(p.visits)))
	}
	visitCounts := []int{3, 4, 5, 6}
	healthy := map[int]*simCount{}
	var healthyAll simCount
	declining := map[[2]int]*simCount{}
	noisy := map[int]*simCount{}
	var noisyAll simCount
	for _, k := range visitCounts {
		healthy[k] = &simCount{}
		for i := 0; i < simHealthyPerVisits; i++ {
			n := next()
			v := judge(simDraw(r, k, 0, simNoise), n)
			healthy[k].add(v)
			healthyAll.add(v)
		}
		noisy[k] = &simCount{}
		for i := 0; i < simNoisyPerVisits; i++ {
			n := next()
			v := judge(simDraw(r, k, 0, simNoisyFactor*simNoise), n)
			noisy[k].add(v)
			noisyAll.add(v)
		}
		for d := range simDeltas {
			c := &simCount{}
			declining[[2]int{k, d}] = c
			for i := 0; i < simDecliningPerCell; i++ {
				n := next()
				c.add(judge(simDraw(r, k, simDeltas[d], simNoise), n))
			}
		}
	}
	if normsMissing > 0 {
		t.Fatalf("%d of %d simulated clinics had no norm", normsMissing, clinics)
	}
	if healthyAll.none > 0 {
		t.Fatalf("%d healthy courses got no verdict", healthyAll.none)
	}

	// The check: at most 5 % of healthy courses called "declines faster".
	share := float64(healthyAll.declines) / float64(healthyAll.n)
	lo, hi := wilson(healthyAll.declines, healthyAll.n)
	t.Logf("healthy called declines faster: %d of %d = %.2f %% (Wilson 95 %%: %.2f–%.2f %%)", healthyAll.declines, healthyAll.n, 100*share, 100*lo, 100*hi)
	if share > 0.05 {
		t.Errorf("%.2f %% of healthy courses called %q, above 5 %%", 100*share, SlopeDeclinesFaster)
	}
	// Detection must grow with the size of the decline and with the number
	// of visits; large declines over six visits must be found.
	for _, k := range visitCounts {
		for d := 1; d < len(simDeltas); d++ {
			if a, b := declining[[2]int{k, d - 1}].declines, declining[[2]int{k, d}].declines; b+5 < a {
				t.Errorf("%d visits: detection falls from %d to %d as the decline grows from %v to %v Hz/y", k, a, b, simDeltas[d-1], simDeltas[d])
			}
		}
	}
	if got := declining[[2]int{6, len(simDeltas) - 1}].declines; got < 80 {
		t.Errorf("6 visits, decline %v Hz/y: only %d of %d detected", simDeltas[len(simDeltas)-1], got, simDecliningPerCell)
	}

	var b strings.Builder
	fmt.Fprintf(&b, "Healthy courses called \"declines faster than the clinic's controls\" (wrongly) and \"rises faster\", with the Wilson 95 %% interval; %d simulated clinics of %d controls, a new one for every %d patients:\n\n", clinics, simControls, simPatientsPerClinic)
	b.WriteString("| visits | healthy courses | called \"declines faster\" | called \"rises faster\" |\n| ---: | ---: | ---: | ---: |\n")
	for _, k := range visitCounts {
		c := healthy[k]
		fmt.Fprintf(&b, "| %d | %d | %s | %s |\n", k, c.n, pctCI(c.declines, c.n), pctCI(c.rises, c.n))
	}
	fmt.Fprintf(&b, "| all | %d | %s | %s |\n", healthyAll.n, pctCI(healthyAll.declines, healthyAll.n), pctCI(healthyAll.rises, healthyAll.n))
	fmt.Fprintf(&b, "| all, visit-to-visit noise %.1f × the controls' | %d | %s | %s |\n", simNoisyFactor, noisyAll.n, pctCI(noisyAll.declines, noisyAll.n), pctCI(noisyAll.rises, noisyAll.n))
	fmt.Fprintf(&b, "\nDeclining courses (%d per cell) called \"declines faster\", by number of yearly visits and extra decline beyond healthy ageing:\n\n", simDecliningPerCell)
	b.WriteString("| visits |")
	for _, d := range simDeltas {
		fmt.Fprintf(&b, " −%.2f Hz/y |", d)
	}
	b.WriteString("\n| ---: |" + strings.Repeat(" ---: |", len(simDeltas)) + "\n")
	for _, k := range visitCounts {
		fmt.Fprintf(&b, "| %d |", k)
		for d := range simDeltas {
			c := declining[[2]int{k, d}]
			fmt.Fprintf(&b, " %s |", pct(c.declines, c.n))
		}
		b.WriteString("\n")
	}
	t.Log("\n" + b.String())

	// The README shows this table under "How sure is a verdict?": it must
	// not drift from what the code does.
	readme, err := os.ReadFile(filepath.Join(moduleRoot(t), "README.md"))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(readme), b.String()) {
		t.Errorf("README.md's table under \"How sure is a verdict?\" differs from the simulation: paste the table printed by go test ./trends/ -count=1 -run '^TestVerdictErrorRates$' -v")
	}
}
