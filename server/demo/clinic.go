// Package demo builds the demo database: an invented memory clinic whose
// patients, visits and recordings are all made up. Every recording is written
// by the synthetic writer (package ingest/synth) and runs through the same
// pipeline as a real visit (package server/intake), so the demo shows the
// whole job: decoding, markers, quality rules, course and cohort.
//
// Nothing here is a reference value or a real person: the trajectories are
// chosen to show healthy ageing, steady slowing and visits that cannot be
// compared, each for a named reason.
package demo

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"sync"
	"time"

	"longwave/ingest"
	"longwave/ingest/synth"
	"longwave/metrics"
	"longwave/metrics/clinic"
	"longwave/server/intake"
)

// ClinicName is the invented clinic the demo is set in; pages say that every
// name and number in it is invented.
const ClinicName = "Larchmere Memory Clinic (invented for the demo)"

// Cohort is the cohort every demo patient belongs to.
const Cohort = "Larchmere follow-up"

// Course is the kind of trajectory an invented patient follows.
type Course string

// Demo trajectories.
const (
	// HealthyAgeing: a steady rhythm that slows by a few hundredths of a
	// hertz a year (invented; the literature gives no trustworthy rate).
	HealthyAgeing Course = "healthy ageing"
	// SteadySlowing: the posterior rhythm falls about 0.3 Hz a year, theta
	// rises against alpha and reactivity to eye opening fades.
	SteadySlowing Course = "steady slowing"
)

// Oddity is something about one visit's recording that makes it not
// comparable (or worth a caution), so that every rule of package trends is
// seen firing in the demo.
type Oddity string

// Oddities, each applied to one visit.
const (
	Plain            Oddity = ""
	LowSampleRate    Oddity = "sampled at 128 Hz"
	HardwareLowPass  Oddity = "30 Hz hardware low-pass"
	HighHighPass     Oddity = "1.6 Hz hardware high-pass"
	NoEyesOpen       Oddity = "no eyes-open period"
	Drowsy           Oddity = "drowsy recording"
	MissingO2        Oddity = "O2 missing"
	ShortClean       Oddity = "under a minute of clean eyes-closed data"
	CoarseResolution Oddity = "1 µV per step"
	FewChannels      Oddity = "only 13 of the 19 positions"
	UnknownEyeState  Oddity = "no eye-state annotations"
	LineChange       Oddity = "recorded at a 60 Hz site"
	NewEquipment     Oddity = "new amplifier"
	EarReference     Oddity = "ear reference"
	OldSettings      Oddity = "made by an older processing version"
)

// Patient is one invented patient of the plan.
type Patient struct {
	Code      string
	Sex       string
	BirthYear int
	Group     string // "control" or "patient"
	Course    Course
	Visits    []Visit
}

// Visit is one planned visit: its date, the invented truth behind its
// recording, and its oddity.
type Visit struct {
	Date    time.Time
	Context string
	Oddity  Oddity
	// Truth of the synthetic recording.
	AlphaHz, AlphaPower, ThetaPower, Attenuation, Exponent float64
	Seed                                                   uint64
}

// Plan lays out the invented clinic: 19 patients with 3 to 8 yearly visits
// over up to 8 years (8 who age healthily, 11 whose rhythm slows steadily)
// and ControlCount control participants with 3 to 6 yearly visits, aged
// about 55 to 85, the clinic's own norm. The last visits fall between about
// 2 and 20 months before today so that some people are due and some
// overdue. The same today gives the same plan.
func Plan(today time.Time) []Patient {
	rng := rand.New(rand.NewPCG(20261201, 7))
	today = time.Date(today.Year(), today.Month(), today.Day(), 0, 0, 0, 0, time.UTC)
	// Oddities handed out across the clinic, one visit each.
	oddities := []Oddity{
		LowSampleRate, HardwareLowPass, NoEyesOpen, Drowsy, MissingO2, ShortClean,
		HighHighPass, CoarseResolution, FewChannels, UnknownEyeState, LineChange,
		NewEquipment, EarReference, OldSettings,
	}
	contexts := []string{
		"", "", "", "slept poorly the night before", "started a new sleep medication",
		"", "came straight from a long drive", "", "mild cold", "",
	}
	var out []Patient
	for i := 0; i < patientCount+ControlCount; i++ {
		var p Patient
		var nVisits, ageAtFirst int
		switch {
		case i < patientCount:
			p.Code = fmt.Sprintf("LMC-%03d", 101+i)
			p.Group, p.Course = "patient", HealthyAgeing
			if i >= healthyPatients {
				p.Course = SteadySlowing
			}
			nVisits = 3 + rng.IntN(6) // 3..8
			ageAtFirst = 58 + rng.IntN(20)
		default:
			p.Code = fmt.Sprintf("LMC-%03d", 201+i-patientCount)
			p.Group, p.Course = clinic.ControlGroup, HealthyAgeing
			nVisits = 3 + rng.IntN(4)                   // 3..6
			ageAtFirst = 55 + rng.IntN(85-55-nVisits+1) // last visit at 84 at most
		}
		if rng.IntN(2) == 0 {
			p.Sex = "F"
		} else {
			p.Sex = "M"
		}
		lastAgo := 60 + rng.IntN(540)
		last := today.AddDate(0, 0, -lastAgo)
		first := last.AddDate(-(nVisits - 1), 0, 0)
		p.BirthYear = first.Year() - ageAtFirst
		who := drawPerson(rng, p.Course, float64(ageAtFirst))
		for v := 0; v < nVisits; v++ {
			date := first.AddDate(v, 0, rng.IntN(41)-20)
			if v == nVisits-1 {
				date = last
			}
			vis := Visit{
				Date:    date,
				Context: contexts[rng.IntN(len(contexts))],
				Seed:    uint64(1000*i + v + 1),
			}
			who.visit(rng, &vis, float64(v))
			p.Visits = append(p.Visits, vis)
		}
		out = append(out, p)
	}
	// One oddity each on a middle or late visit of a patient with enough
	// visits, spread over both courses; controls only when patients run out.
	k := 0
	for i := range out {
		if k == len(oddities) {
			break
		}
		if len(out[i].Visits) < 4 && i%3 != 0 {
			continue
		}
		at := max(len(out[i].Visits)-2, 1)
		out[i].Visits[at].Oddity = oddities[k]
		k++
	}
	return out
}

// The shape of the plan.
const (
	// ControlCount is the number of control participants: more than the 20
	// the local ranges need, and enough persons for the control model.
	ControlCount    = 26
	patientCount    = 19
	healthyPatients = 8
)

// Healthy ageing as the demo draws it, per person and per visit. These are
// invented figures for an invented clinic, chosen to look like a memory
// clinic's healthy older controls (values from memory, not a reference):
// the posterior rhythm about 10 Hz at 55, lower by about 0.02 Hz per year of
// age, 0.45 Hz between persons; each person's own yearly change drawn around
// −0.02 Hz/year with an SD of 0.03 Hz/year; and 0.12 Hz visit-to-visit
// variation on top of the recording's own measurement noise. The other
// markers vary by person and visit in the same spirit.
const (
	healthyPDRAt55       = 10.0  // Hz
	healthyPDRPerYearAge = -0.02 // Hz per year of age, between persons
	healthyPDRPersonSD   = 0.45  // Hz
	healthySlopeMean     = -0.02 // Hz per year, within a person
	healthySlopeSD       = 0.03  // Hz per year
	healthyVisitSD       = 0.12  // Hz
	// The invented slowing of SteadySlowing, in Hz per year.
	slowingPerYear = -0.3
)

// person is the drawn truth of one invented person: levels at the first
// visit and yearly changes.
type person struct {
	course                                Course
	alpha0, alphaSlope                    float64
	power0, theta0, attenuation0, expo0   float64
	powerSlope, thetaSlope, attenSlope    float64
	exponentSlope, thetaNoise, attenNoise float64
}

func drawPerson(rng *rand.Rand, c Course, ageAtFirst float64) person {
	w := person{course: c}
	switch c {
	case HealthyAgeing:
		w.alpha0 = healthyPDRAt55 + healthyPDRPerYearAge*(ageAtFirst-55) + healthyPDRPersonSD*rng.NormFloat64()
		w.alphaSlope = healthySlopeMean + healthySlopeSD*rng.NormFloat64()
		w.power0 = 90 + 10*rng.NormFloat64()
		w.theta0 = 6 + 0.8*rng.NormFloat64()
		w.attenuation0 = 0.65 + 0.06*rng.NormFloat64()
		w.expo0 = 1.45 + 0.06*rng.NormFloat64()
		w.powerSlope, w.thetaSlope, w.attenSlope, w.exponentSlope = -0.5, 0.05, -0.004, -0.004
		w.thetaNoise, w.attenNoise = 0.4, 0.03
	case SteadySlowing:
		w.alpha0 = 9.4 + rng.Float64()*1.0
		w.alphaSlope = slowingPerYear
		w.power0, w.theta0, w.attenuation0, w.expo0 = 90, 6, 0.65, 1.45
		w.powerSlope, w.thetaSlope, w.attenSlope = -6, 3, -0.07
	}
	return w
}

// visit fills the truth of the visit years after the person's first.
func (w person) visit(rng *rand.Rand, v *Visit, years float64) {
	switch w.course {
	case HealthyAgeing:
		v.AlphaHz = w.alpha0 + w.alphaSlope*years + healthyVisitSD*rng.NormFloat64()
		v.AlphaPower = math.Max(w.power0+w.powerSlope*years+5*rng.NormFloat64(), 30)
		v.ThetaPower = math.Max(w.theta0+w.thetaSlope*years+w.thetaNoise*rng.NormFloat64(), 1)
		v.Attenuation = math.Min(math.Max(w.attenuation0+w.attenSlope*years+w.attenNoise*rng.NormFloat64(), 0.1), 0.9)
		v.Exponent = w.expo0 + w.exponentSlope*years + 0.03*rng.NormFloat64()
	case SteadySlowing:
		v.AlphaHz = w.alpha0 + w.alphaSlope*years + 0.05*(rng.Float64()-0.5)
		v.AlphaPower = w.power0 + w.powerSlope*years
		v.ThetaPower = w.theta0 + w.thetaSlope*years
		v.Attenuation = math.Max(w.attenuation0+w.attenSlope*years, 0.1)
		v.Exponent = 1.4 + 0.1*rng.Float64()
	}
}

// Spec returns the synthetic recording of a planned visit. A patient's
// recording is 4 minutes at 250 Hz: eyes closed 0–100 s, open 100–160 s,
// closed 160–220 s, open 220–240 s, unless the visit's oddity changes it. A
// control's is shorter, so that the demo's 26 controls do not double its
// start-up: 150 s, eyes closed 0–75 s, open 75–105 s, closed 105–135 s,
// open 135–150 s (still about 100 s of eyes-closed data, well above the 60 s
// a visit needs; every visit of a control is recorded alike, so their
// courses stay comparable).
func (p Patient) Spec(v Visit) synth.Spec {
	s := synth.Default()
	s.Seed = v.Seed
	s.Duration, s.Periods = closedThenOpen(0, 100, 160, 220, 240)
	if p.Group == clinic.ControlGroup {
		s.Duration, s.Periods = closedThenOpen(0, 75, 105, 135, 150)
	}
	s.AlphaHz = v.AlphaHz
	s.AlphaPower = v.AlphaPower
	s.ThetaPower = v.ThetaPower
	s.AlphaOpenAttenuation = v.Attenuation
	s.AperiodicExponent = v.Exponent
	s.Start = time.Date(v.Date.Year(), v.Date.Month(), v.Date.Day(), 9, 30, 0, 0, time.UTC)
	s.Equipment = "LMC-amp-1"
	s.Spelling = synth.SpellTypedRef
	switch v.Oddity {
	case LowSampleRate:
		s.SampleRate = 128
		s.Prefilter = "HP:0.1Hz LP:40Hz"
	case HardwareLowPass:
		s.LowPassHz = 30
		s.Prefilter = "HP:0.1Hz LP:30Hz"
	case HighHighPass:
		s.Prefilter = "HP:1.6Hz LP:70Hz"
	case NoEyesOpen:
		s.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 240}}
	case Drowsy:
		s.Drowsiness = 0.6
	case MissingO2:
		s = s.WithoutChannels("O2")
	case ShortClean:
		s.Duration = 120
		s.Periods = []ingest.Period{
			{State: ingest.EyesClosed, Start: 0, End: 45},
			{State: ingest.EyesOpen, Start: 45, End: 120},
		}
	case CoarseResolution:
		s.UVPerStep = 1
	case FewChannels:
		s = s.WithoutChannels("F7", "F8", "T7", "T8", "P7", "P8")
	case UnknownEyeState:
		s.Format = ingest.FormatEDF
	case LineChange:
		s.LineHz = 60
	case NewEquipment:
		s.Equipment = "LMC-amp-2"
	case EarReference:
		s.Spelling = synth.SpellEarRef
	}
	return s
}

// closedThenOpen returns the periods between successive bounds (seconds),
// eyes closed first and then alternating, and the last bound as the
// recording's duration.
func closedThenOpen(bounds ...float64) (float64, []ingest.Period) {
	var out []ingest.Period
	for i := 1; i < len(bounds); i++ {
		state := ingest.EyesClosed
		if i%2 == 0 {
			state = ingest.EyesOpen
		}
		out = append(out, ingest.Period{State: state, Start: bounds[i-1], End: bounds[i]})
	}
	return bounds[len(bounds)-1], out
}

// Options of Build.
type Options struct {
	// Today anchors the plan's dates (time.Now when zero).
	Today time.Time
	// Workers decode and analyse visits in parallel (2 when zero).
	Workers int
}

// Summary says what Build made.
type Summary struct {
	Patients, Visits int
	Elapsed          time.Duration
}

// olderSettings is the processing of OldSettings visits: version 1 with a
// longer epoch, labelled as an earlier version, so the course shows a visit
// whose numbers were made by other settings (until `longwave reprocess`).
func olderSettings() metrics.Settings {
	s := metrics.V1()
	s.Version = "0.9-demo"
	s.EpochSeconds = 2
	return s
}

// Build writes every planned visit through the pipeline. progress, when not
// nil, is called after each visit with the count done and the total.
func Build(ctx context.Context, pipe *intake.Pipeline, opt Options, progress func(done, total int)) (Summary, error) {
	start := time.Now()
	if opt.Today.IsZero() {
		opt.Today = time.Now()
	}
	if opt.Workers <= 0 {
		opt.Workers = 2
	}
	plan := Plan(opt.Today)
	type job struct {
		p Patient
		v Visit
	}
	var jobs []job
	for _, p := range plan {
		for _, v := range p.Visits {
			jobs = append(jobs, job{p, v})
		}
	}
	old := &intake.Pipeline{Store: pipe.Store, Settings: olderSettings(), Phrases: pipe.Phrases}

	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	next := make(chan job)
	var (
		mu       sync.Mutex
		done     int
		firstErr error
		wg       sync.WaitGroup
	)
	for w := 0; w < opt.Workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for j := range next {
				err := buildVisit(ctx, pipe, old, j.p, j.v)
				mu.Lock()
				if err != nil && firstErr == nil {
					firstErr = err
					cancel()
				}
				done++
				if progress != nil {
					progress(done, len(jobs))
				}
				mu.Unlock()
			}
		}()
	}
feed:
	for _, j := range jobs {
		select {
		case next <- j:
		case <-ctx.Done():
			break feed
		}
	}
	close(next)
	wg.Wait()
	if firstErr != nil {
		return Summary{}, firstErr
	}
	if err := ctx.Err(); err != nil {
		return Summary{}, err
	}
	return Summary{Patients: len(plan), Visits: len(jobs), Elapsed: time.Since(start)}, nil
}

func buildVisit(ctx context.Context, pipe, old *intake.Pipeline, p Patient, v Visit) error {
	data, err := synth.Bytes(p.Spec(v))
	if err != nil {
		return fmt.Errorf("demo: %s %s: %w", p.Code, v.Date.Format(time.DateOnly), err)
	}
	use := pipe
	if v.Oddity == OldSettings {
		use = old
	}
	req := intake.Request{
		PatientCode: p.Code,
		Date:        v.Date.Format(time.DateOnly),
		BirthYear:   p.BirthYear,
		Sex:         p.Sex,
		Group:       p.Group,
		Cohort:      Cohort,
		Context:     v.Context,
		Single:      &intake.File{Data: data, Name: fmt.Sprintf("%s_%s.edf", p.Code, v.Date.Format("20060102"))},
	}
	if _, err := use.IngestVisit(ctx, req); err != nil {
		return fmt.Errorf("demo: %s %s: %w", p.Code, req.Date, err)
	}
	return nil
}
