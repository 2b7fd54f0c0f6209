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

// Plan lays out the invented clinic: 24 patients with 3 to 8 yearly visits
// over up to 8 years, the last visits falling between about 2 and 20 months
// before today so that some patients are due and some overdue. The same
// today gives the same plan.
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
	for i := 0; i < 24; i++ {
		p := Patient{Code: fmt.Sprintf("LMC-%03d", 101+i)}
		switch {
		case i < 5:
			p.Group, p.Course = "control", HealthyAgeing
		case i < 13:
			p.Group, p.Course = "patient", HealthyAgeing
		default:
			p.Group, p.Course = "patient", SteadySlowing
		}
		if rng.IntN(2) == 0 {
			p.Sex = "F"
		} else {
			p.Sex = "M"
		}
		nVisits := 3 + rng.IntN(6) // 3..8
		lastAgo := 60 + rng.IntN(540)
		last := today.AddDate(0, 0, -lastAgo)
		first := last.AddDate(-(nVisits - 1), 0, 0)
		ageAtFirst := 58 + rng.IntN(20)
		p.BirthYear = first.Year() - ageAtFirst
		alpha0 := 9.4 + rng.Float64()*1.0
		for v := 0; v < nVisits; v++ {
			years := float64(v)
			date := first.AddDate(v, 0, rng.IntN(41)-20)
			if v == nVisits-1 {
				date = last
			}
			vis := Visit{
				Date:     date,
				Context:  contexts[rng.IntN(len(contexts))],
				Seed:     uint64(1000*i + v + 1),
				Exponent: 1.4 + 0.1*rng.Float64(),
			}
			switch p.Course {
			case HealthyAgeing:
				vis.AlphaHz = alpha0 - 0.03*years + 0.05*(rng.Float64()-0.5)
				vis.AlphaPower = 90
				vis.ThetaPower = 6
				vis.Attenuation = 0.65
			case SteadySlowing:
				vis.AlphaHz = alpha0 - 0.3*years + 0.05*(rng.Float64()-0.5)
				vis.AlphaPower = 90 - 6*years
				vis.ThetaPower = 6 + 3*years
				vis.Attenuation = math.Max(0.65-0.07*years, 0.1)
			}
			p.Visits = append(p.Visits, vis)
		}
		out = append(out, p)
	}
	// One oddity each on a middle or late visit of a patient with enough
	// visits, spread over both courses.
	k := 0
	for i := range out {
		if k == len(oddities) {
			break
		}
		if len(out[i].Visits) < 4 && i%3 != 0 {
			continue
		}
		at := len(out[i].Visits) - 2
		if at < 1 {
			at = 1
		}
		out[i].Visits[at].Oddity = oddities[k]
		k++
	}
	return out
}

// Spec returns the synthetic recording of a planned visit. The recording is
// 4 minutes at 250 Hz: eyes closed 0–100 s, open 100–160 s, closed 160–220 s,
// open 220–240 s, unless the visit's oddity changes it.
func (p Patient) Spec(v Visit) synth.Spec {
	s := synth.Default()
	s.Seed = v.Seed
	s.Duration = 240
	s.Periods = []ingest.Period{
		{State: ingest.EyesClosed, Start: 0, End: 100},
		{State: ingest.EyesOpen, Start: 100, End: 160},
		{State: ingest.EyesClosed, Start: 160, End: 220},
		{State: ingest.EyesOpen, Start: 220, End: 240},
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

// olderSettings is the processing of OldSettings visits: version 1, the
// settings before metrics.Current, so the course shows a visit whose
// numbers were made by an older version (until `longwave reprocess`).
func olderSettings() metrics.Settings { return metrics.V1() }

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
