package synth

import (
	"cmp"
	"hash/fnv"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"slices"

	"gonum.org/v1/gonum/integrate/quad"

	"longwave/ingest"
)

// The signal model. Every EEG channel c (not flat) is, in µV,
//
//	x_c(t) = B_shared(t) + B_c(t)                          aperiodic background
//	       + wα(c)·g(t)·R_α(t) + wθ(c)·R_θ(t)              rhythms (one source each)
//	       + L_c(t)                                        line noise
//	       + wblink(c)·blinks(t) + wmuscle(c)·muscle(t)    transient artefacts
//
// with these generating one-sided spectral densities (µV²/Hz, 0 < f < fs/2):
//
//	aperiodic  S_ap(f) = A · max(f, f0)^(−χ) · H²(f),   f0 = AperiodicFloorHz
//	           B_shared has ρ·S_ap, each B_c has (1−ρ)·S_ap (ρ = SharedAperiodic),
//	           so every channel's background density is S_ap.
//	beta       S_β,c(f) = wβ(c)² · Pβ · N(f; μβ, σβ) · H²(f), independent per
//	           channel (N the normal density), added to B_c.
//	low-pass   H²(f) = 1 / (1 + (f/fc)^8) when LowPassHz = fc > 0, else 1.
//
// Both noises are drawn in the frequency domain (complex Gaussian coefficients
// with E|X_m|² = N·fs·S(f_m)/2, inverse real FFT of a length N ≥ n with only
// factors 2, 3, 5, truncated to n), so their expected power in [lo, hi) is
// ∫ S df up to the bin spacing fs/N.
//
// A rhythm of frequency f and power P is a fixed-frequency sinusoid with a
// slow amplitude modulation (waxing and waning):
//
//	R(t) = H(f) · √(2P) · k · (1 + b1·cos(2π m1 t + ψ1) + b2·cos(2π m2 t + ψ2)) · sin(2π f t + θ)
//
// with b1 = 0.3, b2 = 0.2, m1 ∈ [0.06, 0.12) Hz, m2 ∈ [0.13, 0.25) Hz and
// k = 1/√(1 + (b1² + b2²)/2). Its spectrum is five lines: P·k²·H²(f) at f and
// P·k²·bi²/4·H²(f) at f ± mi, summing to P·H²(f). Its frequency is exact, so
// the posterior dominant rhythm is a narrow peak that a Welch spectrum with
// parabolic refinement recovers to a small fraction of a bin.
//
// g(t) is the alpha rhythm's amplitude gain: 1 with eyes closed (and outside
// every period), √(1 − AlphaOpenAttenuation) with eyes open, 0 in the
// drowsiness dropout stretches. Line noise is L_c(t) = a_c·H(fL)·sin(2π fL t
// + φ_c), a_c = LineAmplitude·u_c, u_c ∈ [0.5, 1.5). Blinks and muscle bursts
// are transients to be corrected or rejected; they are left out of
// ExpectedBandPower, so the blink-free file of the same seed is the ground
// truth of a correction.
//
// An EOG channel e (Spec.EOG) is
//
//	x_e(t) = 0.2·B_shared(t) + 0.5·B_e(t) + L_e(t) + wblink(e)·blinks(t)
//
// with B_e its own background of density (1−ρ)·S_ap and wblink 1.6 (VEOG) or
// 0.15 (HEOG): it carries the blink source and a little of the brain's
// background, as a real EOG derivation does.

// AperiodicFloorHz is f0 of the aperiodic density: below it the density is
// flat, so the background's variance stays finite for any exponent.
const AperiodicFloorHz = 0.1

// dropoutLead is the offset of the 4-s dropout grid from each eyes-closed
// period's start: the marker engine skips the first 2 s after a change of
// state (DESIGN.md, "Periods"), so dropout stretches line up with its epochs.
const (
	dropoutLead   = 2.0
	dropoutLength = 4.0
)

// Modulation depths of the rhythms' slow amplitude modulation.
const (
	modDepth1 = 0.3
	modDepth2 = 0.2
)

// Electrode weights (synthetic topographies, invented for ground truth).
// Unknown labels get the default of each table.
var (
	alphaWeights = weights(0.3, map[string]float64{
		"Fp1": 0.1, "Fp2": 0.1, "F7": 0.15, "F8": 0.15, "F3": 0.2, "F4": 0.2, "Fz": 0.2,
		"T7": 0.3, "T8": 0.3, "C3": 0.35, "C4": 0.35, "Cz": 0.35,
		"P7": 0.65, "P8": 0.65, "P3": 0.75, "P4": 0.75, "Pz": 0.8,
		"O1": 1, "O2": 1, "Oz": 1, "POz": 0.9, "PO3": 0.85, "PO4": 0.85, "PO7": 0.8, "PO8": 0.8,
	})
	thetaWeights = weights(0.7, map[string]float64{
		"Fp1": 0.5, "Fp2": 0.5, "F7": 0.65, "F8": 0.65, "F3": 0.75, "F4": 0.75, "Fz": 0.85,
		"T7": 0.7, "T8": 0.7, "C3": 0.9, "C4": 0.9, "Cz": 1,
		"P7": 0.7, "P8": 0.7, "P3": 0.85, "P4": 0.85, "Pz": 0.9, "O1": 0.6, "O2": 0.6, "Oz": 0.6,
	})
	betaWeights = weights(0.6, map[string]float64{
		"Fp1": 0.6, "Fp2": 0.6, "F7": 0.8, "F8": 0.8, "F3": 1, "F4": 1, "Fz": 1,
		"T7": 0.7, "T8": 0.7, "C3": 1, "C4": 1, "Cz": 1,
		"P7": 0.7, "P8": 0.7, "P3": 0.7, "P4": 0.7, "Pz": 0.7, "O1": 0.5, "O2": 0.5,
	})
	blinkWeights = weights(0.04, map[string]float64{
		"Fp1": 1, "Fp2": 1, "Fpz": 1, "F7": 0.5, "F8": 0.5, "F3": 0.45, "F4": 0.45, "Fz": 0.45,
		"T7": 0.12, "T8": 0.12, "C3": 0.12, "C4": 0.12, "Cz": 0.12,
		"P7": 0.05, "P8": 0.05, "P3": 0.05, "P4": 0.05, "Pz": 0.05,
		"O1": 0.03, "O2": 0.03,
	})
	muscleWeights = weights(0.1, map[string]float64{
		"T7": 1, "T8": 1, "F7": 0.7, "F8": 0.7, "P7": 0.6, "P8": 0.6,
		"Fp1": 0.3, "Fp2": 0.3, "O1": 0.2, "O2": 0.2,
	})
)

// EOG channels (Spec.EOG): the blink's weight at each, relative to Fp1/Fp2,
// and the amplitude gains of the shared and of the channel's own aperiodic
// background (synthetic, invented for ground truth: a vertical EOG pair
// straddles the eye and sees the blink larger than Fp1 does; a horizontal
// pair at the outer canthi sees little of it).
var eogBlinkWeight = map[string]float64{"VEOG": 1.6, "HEOG": 0.15}

const (
	eogSharedGain  = 0.2
	eogPrivateGain = 0.5
)

type weightTable struct {
	def float64
	by  map[string]float64
}

func weights(def float64, by map[string]float64) weightTable { return weightTable{def, by} }

func (w weightTable) of(label string) float64 {
	if v, ok := w.by[label]; ok {
		return v
	}
	return w.def
}

// Random stream identifiers (the PCG "seq" argument), one per purpose; per-
// channel streams mix in a hash of the label so that omitting a channel leaves
// every other channel's samples unchanged.
const (
	streamShared  uint64 = 0x5348415245440001
	streamAlpha   uint64 = 0x414c504841000002
	streamTheta   uint64 = 0x5448455441000003
	streamBlinks  uint64 = 0x424c494e4b000004
	streamMuscle  uint64 = 0x4d55534c45000005
	streamDrowsy  uint64 = 0x44524f5753000006
	streamPrivate uint64 = 0x5052495600000007
	streamLine    uint64 = 0x4c494e4500000008
)

func labelStream(label string, purpose uint64) uint64 {
	h := fnv.New64a()
	h.Write([]byte(label))
	return h.Sum64() ^ purpose
}

func newRand(seed, stream uint64) *rand.Rand { return rand.New(rand.NewPCG(seed, stream)) }

// rhythm is one modulated sinusoid (see the model above).
type rhythm struct {
	hz, power float64
	modHz     [2]float64
	modPhase  [2]float64
	phase     float64
}

func newRhythm(seed, stream uint64, hz, power float64) rhythm {
	r := newRand(seed, stream)
	return rhythm{
		hz: hz, power: power,
		modHz:    [2]float64{0.06 + 0.06*r.Float64(), 0.13 + 0.12*r.Float64()},
		modPhase: [2]float64{2 * math.Pi * r.Float64(), 2 * math.Pi * r.Float64()},
		phase:    2 * math.Pi * r.Float64(),
	}
}

// modNorm is k² of the model: 1/(1 + (b1² + b2²)/2).
const modNorm = 1 / (1 + (modDepth1*modDepth1+modDepth2*modDepth2)/2)

// linePower returns the rhythm's power in [lo, hi) before the low-pass and
// the electrode weight: the sum of its lines that fall in the band.
func (r rhythm) linePower(lo, hi float64) float64 {
	if r.power == 0 {
		return 0
	}
	in := func(f float64) bool { return f >= lo && f < hi }
	p := 0.0
	if in(r.hz) {
		p += r.power * modNorm
	}
	for i, b := range []float64{modDepth1, modDepth2} {
		side := r.power * modNorm * b * b / 4
		if in(r.hz - r.modHz[i]) {
			p += side
		}
		if in(r.hz + r.modHz[i]) {
			p += side
		}
	}
	return p
}

// wave writes the rhythm's samples (before weight and low-pass) into dst.
func (r rhythm) wave(dst []float64, fs float64) {
	if r.power == 0 {
		clear(dst)
		return
	}
	amp := math.Sqrt(2 * r.power * modNorm) // √(2P)·k
	w := 2 * math.Pi * r.hz / fs
	w1 := 2 * math.Pi * r.modHz[0] / fs
	w2 := 2 * math.Pi * r.modHz[1] / fs
	for k := range dst {
		t := float64(k)
		env := 1 + modDepth1*math.Cos(w1*t+r.modPhase[0]) + modDepth2*math.Cos(w2*t+r.modPhase[1])
		dst[k] = amp * env * math.Sin(w*t+r.phase)
	}
}

// model holds everything of a Spec that both the generator and
// ExpectedBandPower need, drawn from the seed.
type model struct {
	s                Spec
	records, perRec  int
	n                int     // samples per channel
	total            float64 // seconds
	present, flat    map[string]bool
	alpha, theta     rhythm
	lineAmp, linePhi map[string]float64
	periods          []ingest.Period // the model's periods (one closed period when the spec has none)
	dropouts         []ingest.Period
}

func newModel(s Spec) (*model, error) {
	records, perRec, err := s.check()
	if err != nil {
		return nil, err
	}
	m := &model{
		s: s, records: records, perRec: perRec, n: records * perRec,
		total:   float64(records) * s.RecordDuration,
		present: map[string]bool{}, flat: map[string]bool{},
		lineAmp: map[string]float64{}, linePhi: map[string]float64{},
	}
	for _, c := range s.Channels {
		m.present[c] = true
	}
	for _, c := range s.Flat {
		m.flat[c] = true
	}
	m.alpha = newRhythm(s.Seed, streamAlpha, s.AlphaHz, s.AlphaPower)
	m.theta = newRhythm(s.Seed, streamTheta, s.ThetaHz, s.ThetaPower)
	for _, c := range append(slices.Clip(s.Channels), s.EOG...) {
		r := newRand(s.Seed, labelStream(c, streamLine))
		m.lineAmp[c] = s.LineAmplitude * (0.5 + r.Float64())
		m.linePhi[c] = 2 * math.Pi * r.Float64()
	}
	for _, p := range s.Periods {
		if p.Start >= m.total {
			continue
		}
		p.End = min(p.End, m.total)
		m.periods = append(m.periods, p)
	}
	if len(s.Periods) == 0 {
		m.periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: m.total}}
	}
	m.dropouts = m.drawDropouts()
	return m, nil
}

// drawDropouts picks round(Drowsiness · closed seconds / 4) stretches of the
// 4-s grid that starts dropoutLead seconds into each eyes-closed period.
func (m *model) drawDropouts() []ingest.Period {
	if m.s.Drowsiness == 0 {
		return nil
	}
	var grid []ingest.Period
	closed := 0.0
	for _, p := range m.periods {
		if p.State != ingest.EyesClosed {
			continue
		}
		closed += p.End - p.Start
		for t := p.Start + dropoutLead; t+dropoutLength <= p.End+1e-9; t += dropoutLength {
			grid = append(grid, ingest.Period{State: ingest.EyesClosed, Start: t, End: t + dropoutLength})
		}
	}
	k := min(int(math.Round(m.s.Drowsiness*closed/dropoutLength)), len(grid))
	perm := newRand(m.s.Seed, streamDrowsy).Perm(len(grid))[:k]
	out := make([]ingest.Period, 0, k)
	for _, i := range perm {
		out = append(out, grid[i])
	}
	slices.SortFunc(out, func(a, b ingest.Period) int { return cmp.Compare(a.Start, b.Start) })
	return out
}

// AlphaDropouts returns the stretches of eyes-closed time in which the alpha
// rhythm is absent (drowsiness), sorted; nil when Drowsiness is 0 or the spec
// is invalid. They are 4 s long on a grid starting 2 s into each eyes-closed
// period, round(Drowsiness × closed seconds / 4) of them (as many as fit).
func (s Spec) AlphaDropouts() []ingest.Period {
	m, err := newModel(s)
	if err != nil {
		return nil
	}
	return m.dropouts
}

// alphaGain returns g² of the model averaged over the time of a state: the
// factor on alpha power. EyesUnknown averages over the whole recording.
func (m *model) alphaGain(state ingest.EyeState) float64 {
	open := 1 - m.s.AlphaOpenAttenuation
	dropped := float64(len(m.dropouts)) * dropoutLength
	var closedSecs, openSecs float64
	for _, p := range m.periods {
		switch p.State {
		case ingest.EyesClosed:
			closedSecs += p.End - p.Start
		case ingest.EyesOpen:
			openSecs += p.End - p.Start
		}
	}
	switch state {
	case ingest.EyesClosed:
		if closedSecs == 0 {
			return 1
		}
		return 1 - dropped/closedSecs
	case ingest.EyesOpen:
		return open
	default:
		rest := m.total - closedSecs - openSecs
		return (closedSecs - dropped + openSecs*open + rest) / m.total
	}
}

// lowPass2 is H²(f) of the model.
func (m *model) lowPass2(f float64) float64 {
	if m.s.LowPassHz <= 0 {
		return 1
	}
	r := f / m.s.LowPassHz
	r2 := r * r
	r4 := r2 * r2
	return 1 / (1 + r4*r4)
}

// apDensity is S_ap(f) without the low-pass, µV²/Hz.
func (m *model) apDensity(f float64) float64 {
	if f <= 0 || m.s.AperiodicLevel == 0 {
		return 0
	}
	return m.s.AperiodicLevel * math.Pow(max(f, AperiodicFloorHz), -m.s.AperiodicExponent)
}

// betaDensity is Pβ·N(f; μβ, σβ) without weight and low-pass, µV²/Hz.
func (m *model) betaDensity(f float64) float64 {
	if m.s.BetaPower == 0 {
		return 0
	}
	z := (f - m.s.BetaHz) / m.s.BetaWidthHz
	return m.s.BetaPower * math.Exp(-0.5*z*z) / (m.s.BetaWidthHz * math.Sqrt(2*math.Pi))
}

// integrate returns ∫_lo^hi f(x)·H²(x) dx by 16-point Gauss–Legendre on
// pieces of at most 0.25 Hz, split at the aperiodic floor so that every piece
// is smooth; relative error far below 1e-9 for the model's densities.
func (m *model) integrate(fn func(float64) float64, lo, hi float64) float64 {
	if !(hi > lo) {
		return 0
	}
	cuts := []float64{lo}
	if AperiodicFloorHz > lo && AperiodicFloorHz < hi {
		cuts = append(cuts, AperiodicFloorHz)
	}
	cuts = append(cuts, hi)
	sum := 0.0
	for i := 0; i+1 < len(cuts); i++ {
		a, b := cuts[i], cuts[i+1]
		pieces := int(math.Ceil((b - a) / 0.25))
		h := (b - a) / float64(pieces)
		for p := 0; p < pieces; p++ {
			x0 := a + float64(p)*h
			for j, x := range glNodes {
				f := x0 + h*(x+1)/2
				sum += h / 2 * glWeights[j] * fn(f) * m.lowPass2(f)
			}
		}
	}
	return sum
}

// Gauss–Legendre nodes and weights on [−1, 1], 16 points, from gonum's
// integrate/quad.Legendre.
var glNodes, glWeights = func() ([]float64, []float64) {
	x, w := make([]float64, 16), make([]float64, 16)
	quad.Legendre{}.FixedLocations(x, w, -1, 1)
	return x, w
}()

// ExpectedBandPower is the model's true power (µV²) of channel (its 10-10
// name, as in Spec.Channels) in [lo, hi) Hz in an eye state: the integral of
// the generating densities (aperiodic, beta) plus the rhythm and line-noise
// lines that fall in the band, the alpha power scaled by the state's mean
// gain (eyes open: 1 − AlphaOpenAttenuation; eyes closed: 1 − the share of
// closed time in dropout stretches; EyesUnknown: the whole recording's mean).
// Blinks and muscle bursts are not included. The band is clipped to [0,
// fs/2]. A channel that is absent or flat, or an invalid spec, gives 0.
//
// A finite recording's realised power scatters around this value: for the
// noise parts by about 1/√(bandwidth × seconds) relative, for the rhythms by
// the incomplete modulation cycles (well under 1 % for minutes of data).
func (s Spec) ExpectedBandPower(channel string, state ingest.EyeState, lo, hi float64) float64 {
	return s.ExpectedBandPowerAverageRef(channel, nil, state, lo, hi)
}

// ExpectedBandPowerAverageRef is ExpectedBandPower after re-referencing to the
// average of the channels in ref (those of them present in the spec, flat
// ones counting as zero): x_c − (1/N)·Σ_{r∈ref} x_r. The model's sources are
// independent, so the power is exact: each shared source (background,
// rhythm) keeps the gain g(c) − mean over ref of g; each channel's own
// background and beta enter with coefficient [c = channel] − [c ∈ ref]/N; the
// line-noise sinusoids add as phasors. A nil or empty ref means no
// re-referencing.
func (s Spec) ExpectedBandPowerAverageRef(channel string, ref []string, state ingest.EyeState, lo, hi float64) float64 {
	m, err := newModel(s)
	if err != nil || !m.present[channel] {
		return 0
	}
	lo = max(lo, 0)
	hi = min(hi, s.SampleRate/2)
	if !(hi > lo) {
		return 0
	}
	var refs []string
	seen := map[string]bool{}
	for _, r := range ref {
		if m.present[r] && !seen[r] {
			seen[r] = true
			refs = append(refs, r)
		}
	}
	inRef := func(c string) float64 {
		if seen[c] {
			return 1 / float64(len(refs))
		}
		return 0
	}
	live := func(c string) float64 {
		if m.flat[c] {
			return 0
		}
		return 1
	}
	// shared gain after referencing: g(channel) − mean_ref g.
	sharedGain := func(g func(string) float64) float64 {
		v := g(channel) * live(channel)
		for _, r := range refs {
			v -= g(r) * live(r) / float64(len(refs))
		}
		return v
	}
	// coefficient of channel c's own sources.
	own := func(c string) float64 {
		d := -inRef(c)
		if c == channel {
			d++
		}
		return d * live(c)
	}

	ap := m.integrate(m.apDensity, lo, hi)
	beta := m.integrate(m.betaDensity, lo, hi)
	rho := s.SharedAperiodic
	one := func(string) float64 { return 1 }

	p := 0.0
	gs := sharedGain(one)
	p += gs * gs * rho * ap
	var lineSum complex128
	for _, c := range s.Channels {
		d := own(c)
		if d == 0 {
			continue
		}
		wb := betaWeights.of(c)
		p += d * d * ((1-rho)*ap + wb*wb*beta)
		lineSum += complex(d*m.lineAmp[c], 0) * cmplx.Rect(1, m.linePhi[c])
	}
	ga := sharedGain(alphaWeights.of)
	p += ga * ga * m.alphaGain(state) * m.alpha.linePower(lo, hi) * m.lowPass2(s.AlphaHz)
	gt := sharedGain(thetaWeights.of)
	p += gt * gt * m.theta.linePower(lo, hi) * m.lowPass2(s.ThetaHz)
	if s.LineAmplitude > 0 && s.LineHz >= lo && s.LineHz < hi {
		a := cmplx.Abs(lineSum)
		p += a * a / 2 * m.lowPass2(s.LineHz)
	}
	return p
}
