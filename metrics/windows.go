package metrics

import (
	"math"
	"slices"
	"sort"
	"strings"

	"longwave/ingest"
)

// Rule keys of settings v2 besides the artefact rules, used in
// Quality.Regions and Quality.Windows.
const (
	// RuleChannels: the window kept fewer than MinRegionShare of the
	// region's good channels (the others failed an artefact rule there).
	RuleChannels = "channels"
	// RuleShort: the window is clean but lies in a clean stretch shorter
	// than one Welch segment, so no spectrum could use it.
	RuleShort = "short"
	// RuleSlow: the channel's delta-band power in the window is above
	// WindowSettings.SlowRelativeMax times its median over the state's
	// windows (what an eye movement or the rest of a corrected blink
	// leaves).
	RuleSlow = "slow"
)

// WindowSettings are the artefact decisions of settings v2 (DESIGN.md,
// "Uncertainty and norms"): per channel and per short window, and per
// region, instead of per 4-s epoch for every channel at once.
//
//   - The analysed time is cut into windows of Seconds (1 s), laid like
//     V1's epochs (inside one segment and one eye-state period, the first
//     PeriodSkipSeconds after each change left out).
//   - Each good channel is judged in each window, on the filtered signal
//     before referencing (so that the common average cannot spread one
//     channel's artefact to the others before it is judged), by the rules
//     of ArtefactRules 1–4, with rule 4 ("variance") taken per channel:
//     log10 of the window's variance above median + VarianceK · 1.4826 ·
//     MAD over that channel's windows of the same state that passed rules
//     1–3. A channel that fails is left out of that window: out of the
//     common average of the window and out of the spectra.
//   - Besides them, a slow-wave rule on the frontal channels
//     (SlowChannels): the window's delta-band (Bands.Delta) power above
//     SlowRelativeMax times the channel's median over the windows of the
//     state, the counterpart at the low end of the muscle-burst rule. It
//     judges only the sites where eye artefacts dominate, so that posterior
//     or diffuse slow activity — the slowing the markers are there to
//     measure — is never taken for an artefact. Eye movements and what the ocular correction
//     leaves of a blink (its part the frontal-pole proxy does not explain,
//     and the high-pass filter's undershoot after it) sit in 1–4 Hz, well
//     under the amplitude limit, and the common average would spread them
//     to every channel, steepening the aperiodic fit. A 1-s periodogram's
//     delta power (bins 1, 2, 3 Hz) of a steady background scatters as χ²
//     with 3 to 6 degrees of freedom (fewer when the 1-Hz bin dominates),
//     so 4 times its median is passed by chance in 0.2–2.4 % of windows
//     (scipy.stats.chi2.sf(4·median, k) for k = 6 and 3); a channel so
//     left out costs its own window only.
//   - A window in which more than MostChannelsShare of the good channels
//     fail is rejected for every channel and region (the recording, not a
//     channel, is at fault), under the rule most of them failed.
//   - The common average of each window is the mean of the channels kept
//     in it (re-referencing a signal already referenced to any average is
//     exact: y − mean_G(y) = x − mean_G(x)).
//   - Spectra: Welch segments of WelchSettings.SegmentSeconds (4 s) with
//     WelchSettings.Overlap (50 %: one every 2 windows) inside each stretch
//     of consecutive windows not rejected for all, from its start. A channel takes
//     part in a segment when it is kept in all of the segment's windows; a
//     region keeps the segment when at least MinRegionShare of its good
//     channels (at least one) take part, and the segment's regional
//     periodogram is the mean over them. The region's spectrum is the mean
//     of its kept segments' periodograms (each segment weighs the same).
//     So a blink on Fp1 costs the frontal channels the two segments over
//     its window (1–2 s of their data), and the posterior region nothing; a temporal muscle burst costs T7 its
//     window and no region a segment.
//
// Sources: the window length and the rules' layout are this design's
// choices (DESIGN.md: "a blink or a temporal muscle burst costs a second of
// one region's data"); the per-channel variance rule is V1's robust z-score
// applied per channel; MostChannelsShare = 1/2 is V1's rule that a
// recording, not a channel, is at fault when half the channels fail
// (ChannelRules.MaxFailShare's companion).
type WindowSettings struct {
	Seconds           float64  `json:"seconds"`
	MostChannelsShare float64  `json:"most_channels_share"`
	MinRegionShare    float64  `json:"min_region_share"`
	SlowRelativeMax   float64  `json:"slow_relative_max"`
	SlowChannels      []string `json:"slow_channels"`
}

func defaultWindows() *WindowSettings {
	return &WindowSettings{Seconds: 1, MostChannelsShare: 0.5, MinRegionShare: 0.5, SlowRelativeMax: 4,
		SlowChannels: []string{"Fp1", "Fp2", "F7", "F3", "Fz", "F4", "F8"}}
}

// RegionTime is the analysed time of one region in one eye state under
// settings v2: the seconds of windows laid in the state, the seconds its
// spectrum used, and the rest by the reason it went (rule key → seconds;
// RuleChannels and RuleShort besides the artefact rules).
type RegionTime struct {
	Region  string             `json:"region"`
	State   ingest.EyeState    `json:"state"`
	Seconds float64            `json:"seconds"`
	Kept    float64            `json:"kept_s"`
	Lost    map[string]float64 `json:"lost_s"`
}

// windowAnalysis is the v2 state of one Compute.
type windowAnalysis struct {
	set  WindowSettings
	wlen int // samples per window at the analysis rate
	k    int // windows per Welch segment
	step int // windows from one segment start to the next
	// fail[c][w]: the rule channel c failed in window w ("" kept); nil for
	// channels that are not good.
	fail [][]string
	// per region and state: the kept segments and their periodograms
	regions map[fitKey]*regionSegments
	// regionOrder lists the regions in a fixed order
	regionOrder []string
	nbins       int
	corr        []float64 // response correction per bin
}

// regionSegments are one region's kept Welch segments in one state.
type regionSegments struct {
	starts []int       // window index of each kept segment's first window
	power  [][]float32 // periodogram (mean over the region's kept channels), bins of a.freqs
	// covered[w] is true when window w lies in a kept segment
	covered map[int]bool
	// lost[w] is the reason window w of this state did not reach the
	// region's spectrum
	lost map[int]string
	mean []float64 // corrected mean spectrum (filled on first use)
}

// windowsV2 runs the stages of settings v2 after the bad-channel rules:
// windows, per-channel decisions, the per-window common average, regional
// segment spectra.
func (a *analysis) windowsV2() {
	v := &windowAnalysis{set: *a.s.Windows}
	a.v2 = v
	v.wlen = max(2, int(math.Round(v.set.Seconds*a.fs)))
	seg := int(math.Round(a.s.Welch.SegmentSeconds * a.fs))
	v.k = max(1, int(math.Round(float64(seg)/float64(v.wlen))))
	v.step = max(1, int(math.Round((1-a.s.Welch.Overlap)*float64(v.k))))
	a.length = v.wlen
	a.eps = epochGrid(a.periods, a.segs, a.fs, v.wlen, a.s.PeriodSkipSeconds)
	a.measureEpochs()
	if a.markFailingChannels() {
		a.measureEpochs() // before referencing nothing else changes; only the used set shrank
	}
	a.decideWindows()
	a.referenceWindows()
	a.regionSpectra()
	a.primary = a.primaryState()
}

// decideWindows fills v.fail and each window's Reject (for all channels).
func (a *analysis) decideWindows() {
	v, r := a.v2, a.s.Artefacts
	used := a.usedChannels()
	v.fail = make([][]string, len(a.data))
	for _, c := range used {
		v.fail[c] = make([]string, len(a.eps))
	}
	counts := map[string]int{RuleAmplitude: 0, RuleFlat: 0, RuleMuscle: 0, RuleSlow: 0, RuleVariance: 0}
	a.rules = counts
	if len(used) == 0 {
		return
	}
	burst := burstLimits(a.eps, a.stats, used, r)
	for _, c := range used {
		for e := range a.eps {
			for _, rule := range []string{RuleAmplitude, RuleFlat, RuleMuscle} {
				if failsRule(a.stats[c][e], rule, r, burst[c][e]) {
					v.fail[c][e] = rule
					break
				}
			}
		}
	}
	byState := map[ingest.EyeState][]int{}
	for e, ep := range a.eps {
		byState[ep.State] = append(byState[ep.State], e)
	}
	states := make([]ingest.EyeState, 0, len(byState))
	for st := range byState {
		states = append(states, st)
	}
	sort.Slice(states, func(i, j int) bool { return states[i] < states[j] })
	// The slow-wave rule per channel and state.
	var slow []float64
	for _, c := range used {
		if !slices.Contains(v.set.SlowChannels, a.names[c]) {
			continue
		}
		for _, st := range states {
			slow = slow[:0]
			for _, e := range byState[st] {
				slow = append(slow, a.stats[c][e].Slow)
			}
			limit := v.set.SlowRelativeMax * median(slow)
			for _, e := range byState[st] {
				if v.fail[c][e] == "" && limit > 0 && a.stats[c][e].Slow > limit {
					v.fail[c][e] = RuleSlow
				}
			}
		}
	}
	// Rule 4 per channel and state over the windows that passed the others.
	var vals []float64
	var idx []int
	for _, c := range used {
		for _, st := range states {
			vals, idx = vals[:0], idx[:0]
			for _, e := range byState[st] {
				if v.fail[c][e] == "" {
					vals = append(vals, logVariance(a.stats[c][e].Variance))
					idx = append(idx, e)
				}
			}
			limit, ok := robustUpperLimit(vals, r.VarianceK)
			if !ok {
				continue
			}
			for i, e := range idx {
				if vals[i] > limit {
					v.fail[c][e] = RuleVariance
				}
			}
		}
	}
	order := []string{RuleAmplitude, RuleFlat, RuleMuscle, RuleSlow, RuleVariance}
	for e := range a.eps {
		n := 0
		by := map[string]int{}
		for _, c := range used {
			if f := v.fail[c][e]; f != "" {
				n++
				by[f]++
			}
		}
		a.eps[e].Reject = ""
		if float64(n) > v.set.MostChannelsShare*float64(len(used)) {
			best := ""
			for _, rule := range order {
				if best == "" || by[rule] > by[best] {
					best = rule
				}
			}
			a.eps[e].Reject = best
			counts[best]++
		}
	}
}

// kept reports whether good channel c is kept in window e.
func (v *windowAnalysis) kept(c, e int) bool { return v.fail[c] != nil && v.fail[c][e] == "" }

// referenceWindows subtracts from every analysed channel, window by window,
// the mean of the channels kept in that window (all good channels in a
// window rejected for all, and between windows).
func (a *analysis) referenceWindows() {
	v := a.v2
	type span struct {
		lo, hi int
		e      int // window index, −1 between windows
	}
	var spans []span
	pos := 0
	for e, ep := range a.eps {
		if ep.First > pos {
			spans = append(spans, span{pos, ep.First, -1})
		}
		spans = append(spans, span{ep.First, ep.First + v.wlen, e})
		pos = ep.First + v.wlen
	}
	if pos < a.n {
		spans = append(spans, span{pos, a.n, -1})
	}
	used := a.usedChannels()
	parallel(len(spans), a.workers, func(_, i int) {
		sp := spans[i]
		var inc []int
		if sp.e >= 0 && a.eps[sp.e].Reject == "" {
			for _, c := range used {
				if v.kept(c, sp.e) {
					inc = append(inc, c)
				}
			}
		}
		if len(inc) == 0 {
			inc = used
		}
		if len(inc) == 0 {
			return
		}
		const block = 4096
		var mean [block]float64
		inv := 1 / float64(len(inc))
		for lo := sp.lo; lo < sp.hi; lo += block {
			hi := min(lo+block, sp.hi)
			m := mean[:hi-lo]
			clear(m)
			for _, c := range inc {
				for j, x := range a.data[c][lo:hi] {
					m[j] += float64(x)
				}
			}
			for j := range m {
				m[j] *= inv
			}
			for c := range a.data {
				x := a.data[c][lo:hi]
				for j := range x {
					x[j] = float32(float64(x[j]) - m[j])
				}
			}
		}
	})
}

// regionChannels returns the good analysed channels of a region.
func (a *analysis) regionChannels(region string) []int {
	var out []int
	for _, label := range a.s.Regions[region] {
		for c, l := range a.names {
			if l == label && a.good[c] {
				out = append(out, c)
			}
		}
	}
	return out
}

// regionSpectra lays the Welch segments of every state, decides for each
// region whether it keeps each segment, and stores the regional
// periodograms of the kept ones.
func (a *analysis) regionSpectra() {
	v := a.v2
	seg := v.k * v.wlen
	proto := NewWelch(a.fs, seg, 0)
	freqs := proto.Freqs()
	// Bins up to the low-pass corner and a smoothing frame beyond it:
	// every band, fit and display lies below the corner.
	top := a.s.Filters.LowPassHz + float64(a.s.Peak.SmoothBins)*a.fs/float64(seg)
	nb := len(freqs)
	for nb > 1 && freqs[nb-1] > top {
		nb--
	}
	v.nbins = nb
	a.freqs = freqs[:nb]
	v.corr = a.responseCorrection()
	v.regionOrder = make([]string, 0, len(a.s.Regions))
	for name := range a.s.Regions {
		v.regionOrder = append(v.regionOrder, name)
	}
	sort.Strings(v.regionOrder)
	members := map[string][]int{}
	for _, name := range v.regionOrder {
		members[name] = a.regionChannels(name)
	}
	// Candidate segments: k consecutive windows, same state, contiguous
	// samples, none rejected for all.
	// They start every v.step windows from the start of each stretch of
	// consecutive windows not rejected for all.
	var cands []int
	stretch := -1 // first window of the current stretch
	for e := range a.eps {
		w := a.eps[e]
		switch {
		case w.Reject != "":
			stretch = -1
			continue
		case stretch < 0 || w.State != a.eps[e-1].State || w.First != a.eps[e-1].First+v.wlen:
			stretch = e
		}
		if (e-stretch)%v.step != 0 || e+v.k > len(a.eps) {
			continue
		}
		ok := true
		for j := 1; j < v.k && ok; j++ {
			x := a.eps[e+j]
			ok = x.Reject == "" && x.State == w.State && x.First == w.First+j*v.wlen
		}
		if ok {
			cands = append(cands, e)
		}
	}
	// keptIn[c][i]: channel c takes part in candidate i.
	used := a.usedChannels()
	keptIn := make([][]bool, len(a.data))
	for _, c := range used {
		keptIn[c] = make([]bool, len(cands))
		for i, e := range cands {
			ok := true
			for j := 0; j < v.k && ok; j++ {
				ok = v.kept(c, e+j)
			}
			keptIn[c][i] = ok
		}
	}
	// Which regions keep which candidate.
	keep := make(map[string][]bool, len(v.regionOrder))
	for _, name := range v.regionOrder {
		mem := members[name]
		need := max(1, int(math.Ceil(v.set.MinRegionShare*float64(len(mem))-1e-9)))
		ks := make([]bool, len(cands))
		for i := range cands {
			n := 0
			for _, c := range mem {
				if keptIn[c][i] {
					n++
				}
			}
			ks[i] = len(mem) > 0 && n >= need
		}
		keep[name] = ks
	}
	// Periodograms: one pass over the candidates, each channel's
	// periodogram computed once and added to every region that keeps it.
	type out struct{ power map[string][]float32 }
	results := make([]out, len(cands))
	welches := make([]*Welch, a.workers)
	bufs := make([][]float64, a.workers)
	parallel(len(cands), a.workers, func(w, i int) {
		if welches[w] == nil {
			welches[w] = NewWelch(a.fs, seg, 0)
			bufs[w] = make([]float64, seg/2+1)
		}
		e := cands[i]
		first := a.eps[e].First
		sums := map[string][]float64{}
		counts := map[string]int{}
		for _, c := range used {
			if !keptIn[c][i] {
				continue
			}
			var p []float64
			for _, name := range v.regionOrder {
				if !keep[name][i] || !contains(members[name], c) {
					continue
				}
				if p == nil {
					p = welches[w].Periodogram(bufs[w], a.data[c][first:first+seg])
				}
				s := sums[name]
				if s == nil {
					s = make([]float64, nb)
					sums[name] = s
				}
				for k := range s {
					s[k] += p[k]
				}
				counts[name]++
			}
		}
		res := out{power: map[string][]float32{}}
		for name, s := range sums {
			f := make([]float32, nb)
			inv := 1 / float64(counts[name])
			for k, x := range s {
				f[k] = float32(x * inv)
			}
			res.power[name] = f
		}
		results[i] = res
	})
	v.regions = map[fitKey]*regionSegments{}
	for _, st := range a.states() {
		for _, name := range v.regionOrder {
			v.regions[fitKey{st, name}] = &regionSegments{covered: map[int]bool{}, lost: map[int]string{}}
		}
	}
	for i, e := range cands {
		st := a.eps[e].State
		for _, name := range v.regionOrder {
			if p := results[i].power[name]; p != nil {
				rs := v.regions[fitKey{st, name}]
				rs.starts = append(rs.starts, e)
				rs.power = append(rs.power, p)
				for j := 0; j < v.k; j++ {
					rs.covered[e+j] = true
				}
			}
		}
	}
	// Why each window did not reach a region's spectrum.
	for e, ep := range a.eps {
		for _, name := range v.regionOrder {
			rs := v.regions[fitKey{ep.State, name}]
			if rs == nil || rs.covered[e] {
				continue
			}
			rs.lost[e] = a.windowLoss(e, members[name])
		}
	}
}

// windowLoss names why window e did not reach the spectrum of a region
// with good channels mem.
func (a *analysis) windowLoss(e int, mem []int) string {
	if r := a.eps[e].Reject; r != "" {
		return r
	}
	v := a.v2
	if len(mem) == 0 {
		return RuleChannels
	}
	need := max(1, int(math.Ceil(v.set.MinRegionShare*float64(len(mem))-1e-9)))
	n := 0
	by := map[string]int{}
	for _, c := range mem {
		if v.kept(c, e) {
			n++
		} else if v.fail[c] != nil {
			by[v.fail[c][e]]++
		}
	}
	if n < need {
		best := RuleChannels
		for _, rule := range []string{RuleAmplitude, RuleFlat, RuleMuscle, RuleSlow, RuleVariance} {
			if by[rule] > 0 && (best == RuleChannels || by[rule] > by[best]) {
				best = rule
			}
		}
		return best
	}
	return RuleShort
}

func contains(s []int, x int) bool {
	for _, v := range s {
		if v == x {
			return true
		}
	}
	return false
}

// responseCorrection returns, per bin of a.freqs, the factor that divides
// out the filters' forward–backward power response (FilterSettings).
func (a *analysis) responseCorrection() []float64 {
	corr := make([]float64, len(a.freqs))
	for k, f := range a.freqs {
		corr[k] = 1
		if a.s.Filters.CorrectResponse {
			h := powerResponse(a.hp, f, a.fs) * powerResponse(a.lp, f, a.fsIn)
			if r := h * h; r >= a.s.Filters.CorrectFloor {
				corr[k] = 1 / r
			}
		}
	}
	return corr
}

// keptSeconds is the time of a region's kept segments in a state (union of
// their spans), s.
func (a *analysis) keptSeconds(st ingest.EyeState, region string) float64 {
	rs := a.v2.regions[fitKey{st, region}]
	if rs == nil {
		return 0
	}
	return float64(len(rs.covered)*a.v2.wlen) / a.fs
}

// regionV2 is region under settings v2: the mean of the region's kept
// segment periodograms, response-corrected.
func (a *analysis) regionV2(st ingest.EyeState, name string) ([]float64, string) {
	has := false
	for _, p := range a.periods {
		has = has || p.State == st
	}
	if !has {
		return nil, "no " + stateWords(st) + " period"
	}
	if len(a.regionChannels(name)) == 0 {
		return nil, fmtReason("no good channel of the %s region (%s)", strings.ReplaceAll(name, "_", " "),
			strings.Join(a.s.Regions[name], " "))
	}
	if ks := a.keptSeconds(st, name); ks < a.s.MinCleanSeconds {
		return nil, fmtReason("only %g s of clean %s data in the %s region, needs %g s", ks, stateWords(st),
			strings.ReplaceAll(name, "_", " "), a.s.MinCleanSeconds)
	}
	rs := a.v2.regions[fitKey{st, name}]
	if rs.mean == nil {
		rs.mean = meanSpectrum(rs.power, nil, a.v2.corr)
	}
	return rs.mean, ""
}

// meanSpectrum returns corr[k] × the mean over the segments idx (all when
// idx is nil; repeats count) of power[i][k].
func meanSpectrum(power [][]float32, idx []int, corr []float64) []float64 {
	out := make([]float64, len(corr))
	n := 0
	add := func(p []float32) {
		for k, x := range p {
			out[k] += float64(x)
		}
		n++
	}
	if idx == nil {
		for _, p := range power {
			add(p)
		}
	} else {
		for _, i := range idx {
			add(power[i])
		}
	}
	for k := range out {
		out[k] *= corr[k] / float64(max(n, 1))
	}
	return out
}

// qualityV2 fills the v2 parts of Quality: clean seconds (the posterior
// region's), windows per state, windows rejected for all by rule, the
// regional times and the window decisions.
func (a *analysis) qualityV2(q *Quality) {
	v := a.v2
	wsec := float64(v.wlen) / a.fs
	rejected := 0
	a.listStates(q)
	for _, e := range a.eps {
		q.EpochsTotal[e.State]++
		if e.Reject != "" {
			rejected++
		}
	}
	for _, st := range a.states() {
		q.CleanSeconds[st] = a.keptSeconds(st, RegionPosterior)
	}
	if len(a.eps) > 0 {
		q.RejectedShare = float64(rejected) / float64(len(a.eps))
	}
	for _, st := range a.states() {
		for _, name := range v.regionOrder {
			rs := v.regions[fitKey{st, name}]
			rt := RegionTime{Region: name, State: st, Lost: map[string]float64{}}
			for e, ep := range a.eps {
				if ep.State != st {
					continue
				}
				rt.Seconds += wsec
				if why, lost := rs.lost[e]; lost {
					rt.Lost[why] += wsec
				}
			}
			rt.Kept = float64(len(rs.covered)) * wsec
			q.Regions = append(q.Regions, rt)
		}
	}
	q.Windows = make([]Window, 0, len(a.eps))
	for e, ep := range a.eps {
		w := Window{Start: ep.Start, End: ep.Start + wsec, State: ep.State}
		same, first := true, ""
		for i, name := range v.regionOrder {
			why := v.regions[fitKey{ep.State, name}].lost[e]
			if i == 0 {
				first = why
			} else if why != first {
				same = false
			}
		}
		if same {
			w.Kept, w.Reason = first == "", first
			q.Windows = append(q.Windows, w)
			continue
		}
		for _, name := range v.regionOrder {
			why := v.regions[fitKey{ep.State, name}].lost[e]
			w.Region, w.Kept, w.Reason = name, why == "", why
			q.Windows = append(q.Windows, w)
		}
	}
	// Channels left out of windows, for the record: per channel the
	// share of its windows it was left out of.
	if len(a.eps) > 0 {
		q.ChannelWindowsLeftOut = map[string]float64{}
		for _, c := range a.usedChannels() {
			n := 0
			for e := range a.eps {
				if !v.kept(c, e) && a.eps[e].Reject == "" {
					n++
				}
			}
			if n > 0 {
				q.ChannelWindowsLeftOut[a.names[c]] = float64(n) / float64(len(a.eps))
			}
		}
	}
}

// drowsinessV2 is the drowsiness index over the posterior region's kept
// segments of the primary state: the share whose posterior alpha power is
// below DropoutFraction × its ReferenceQuantile.
func (a *analysis) drowsinessV2() (float64, bool, string) {
	st := a.primary
	if _, why := a.regionV2(st, RegionPosterior); why != "" {
		return 0, false, why
	}
	rs := a.v2.regions[fitKey{st, RegionPosterior}]
	alpha := make([]float64, len(rs.power))
	b := a.s.Bands.Alpha
	for i, p := range rs.power {
		for k, f := range a.freqs {
			if b.Contains(f) {
				alpha[i] += float64(p[k])
			}
		}
	}
	return dropoutShare(alpha, a.s.Drowsiness), true, ""
}

// runsV2 are the stretches covered by the posterior region's kept segments,
// per state (for the display traces).
func (a *analysis) runsV2() []run {
	var out []run
	for e, ep := range a.eps {
		rs := a.v2.regions[fitKey{ep.State, RegionPosterior}]
		if rs == nil || !rs.covered[e] {
			continue
		}
		if n := len(out); n > 0 && out[n-1].State == ep.State && out[n-1].First+out[n-1].Count == ep.First {
			out[n-1].Count += a.v2.wlen
			continue
		}
		out = append(out, run{State: ep.State, First: ep.First, Count: a.v2.wlen, Start: ep.Start})
	}
	return out
}
