package metrics

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"sync"

	"longwave/ingest"
)

// Errors of Compute; wrapped with the recording's details.
var (
	// ErrNoChannels: none of the 19 positions is present with usable data.
	ErrNoChannels = errors.New("metrics: no usable channel of the 19 standard positions")
	// ErrSampleRate: the EEG rate cannot carry the analysis (the 45 Hz
	// low-pass must lie below the Nyquist frequency).
	ErrSampleRate = errors.New("metrics: sample rate too low for the analysis")
	// ErrTooShort: the channels are shorter than one epoch.
	ErrTooShort = errors.New("metrics: recording shorter than one epoch")
)

// maxWorkers bounds the goroutines of one Compute: each holds float64 work
// buffers as long as the longest segment at the recording's and at the
// analysis rate (9 MB for 30 min at 500 Hz), so the bound is also a memory
// bound.
const maxWorkers = 4

// Compute runs processing settings s over rec and returns the markers, the
// quality figures and the display products.
//
// Memory: Compute uses the Samples of the analysed channels (the 19
// positions present, not marked bad by a sidecar, at the EEG rate) as its
// work space: on return their contents are overwritten (the first part holds
// the filtered, referenced signal at the analysis rate, the rest is stale).
// A caller that needs the decoded samples afterwards passes a copy. Other
// channels are not touched. In exchange no second copy of the signal is
// made: besides the decoded float32 samples, Compute holds one float64
// segment-length buffer per worker (at most maxWorkers, and no more than
// GOMAXPROCS).
//
// Work is spread over a bounded pool of goroutines, one channel at a time
// each: filtering, epoch statistics and Welch spectra per channel, the
// common average in blocks of time.
func Compute(rec *ingest.Recording, s Settings) (*Result, error) {
	a, err := analyse(rec, s)
	if err != nil {
		return nil, err
	}
	res := &Result{
		SettingsVersion: s.Version,
		SettingsHash:    s.Hash(),
		Conditions:      rec.Conditions,
	}
	res.Quality = a.quality()
	res.Markers = a.markers()
	a.intervals(res.Markers)
	if dk, known := a.drowsiness(); known {
		res.Quality.Drowsiness, res.Quality.DrowsinessKnown = dk, true
	}
	res.Display = a.display()
	return res, nil
}

// analyse runs the signal stages of Compute: channel selection, filtering,
// bad channels, referencing, epochs and artefact rules, spectra.
func analyse(rec *ingest.Recording, s Settings) (*analysis, error) {
	if rec == nil {
		return nil, fmt.Errorf("%w: no recording", ErrNoChannels)
	}
	a, err := prepare(rec, s)
	if err != nil {
		return nil, err
	}
	if err := a.filter(rec); err != nil {
		return nil, err
	}
	a.markBadChannels()
	if err := a.correctOcular(rec); err != nil {
		return nil, err
	}
	if s.Windows != nil {
		a.windowsV2()
		a.runs = a.runsV2()
		return a, nil
	}
	commonAverage(a.data, a.good, a.n, a.workers)
	a.epochs(rec)
	a.spectra()
	return a, nil
}

// analysis carries one Compute's state between its stages.
type analysis struct {
	s       Settings
	fsIn    float64 // the recording's EEG rate, Hz
	q       int     // decimation factor after filtering
	fs      float64 // analysis rate fsIn/q, Hz
	nIn     int     // samples per analysed channel at fsIn
	n       int     // samples per analysed channel at fs
	workers int

	names []string    // labels of the analysed channels
	data  [][]float32 // their samples (rec's, filtered in place)
	good  []bool      // not flat or noisy
	level []float64   // median window SD after filtering, µV
	// why a channel of the 19 was left out or marked bad, by label
	badReason map[string]string
	bad       []string // bad channels of the 19 in Standard19 order

	lineHz     float64
	lineSource string
	lp         SOS // low-pass at fsIn
	hp         SOS // high-pass at fs
	slow       SOS // high-pass and notch at fs, as applied

	segsIn  []ingest.Segment // at fsIn
	segs    []ingest.Segment // at fs, after decimation
	periods []ingest.Period
	length  int // epoch length in samples
	eps     []epoch
	stats   [][]epochStat // [channel][epoch]
	rules   map[string]int
	runs    []run

	freqs []float64
	// psd[state][channel]: Welch density (response-corrected), nil for a
	// bad channel or a state without clean segments
	psd     map[ingest.EyeState][][]float64
	primary ingest.EyeState // the state the "closed" markers use
	fits    map[fitKey]fitResult

	// v2 holds the per-channel, per-window decisions and the regional
	// segment spectra of settings v2 (nil under v1).
	v2 *windowAnalysis
	// override, when set, replaces region (the bootstrap's resampled
	// spectra); lean skips what a resample does not need (the
	// distinctness fits of the peak searches and the drowsiness index).
	override func(st ingest.EyeState, region string) ([]float64, string)
	lean     bool
	seed     [2]uint64     // the bootstrap's PCG seed (seedOf)
	ocular   *OcularReport // what correctOcular did (nil: not asked for)
}

func prepare(rec *ingest.Recording, s Settings) (*analysis, error) {
	a := &analysis{s: s, badReason: map[string]string{}}
	a.fsIn = rec.Conditions.SampleRate
	if !(a.fsIn > 0) {
		for _, name := range s.Channels {
			if ch := rec.Channel(name); ch != nil && ch.SampleRate > 0 {
				a.fsIn = ch.SampleRate
				break
			}
		}
	}
	if !(a.fsIn > 0) || math.IsInf(a.fsIn, 0) {
		return nil, fmt.Errorf("%w: %q: no EEG sample rate", ErrNoChannels, rec.Name)
	}
	if s.Filters.LowPassHz >= a.fsIn/2 {
		return nil, fmt.Errorf("%w: %q: %g Hz, the %g Hz low-pass needs more than %g Hz",
			ErrSampleRate, rec.Name, a.fsIn, s.Filters.LowPassHz, 2*s.Filters.LowPassHz)
	}
	a.q = max(1, int(math.Floor(a.fsIn/s.AnalysisRateHz)))
	a.fs = a.fsIn / float64(a.q)
	a.nIn = math.MaxInt
	var chans []*ingest.Channel
	for _, name := range s.Channels {
		ch := rec.Channel(name)
		switch {
		case ch == nil:
			continue
		case ch.Bad:
			a.badReason[name] = "marked bad by the recording's sidecar"
		case math.Abs(ch.SampleRate-a.fsIn) > 1e-9*a.fsIn:
			a.badReason[name] = fmt.Sprintf("sample rate %g Hz differs from the EEG rate %g Hz", ch.SampleRate, a.fsIn)
		case len(ch.Samples) == 0:
			a.badReason[name] = "no samples"
		default:
			chans = append(chans, ch)
			a.nIn = min(a.nIn, len(ch.Samples))
		}
	}
	if len(chans) == 0 {
		return nil, fmt.Errorf("%w: %q", ErrNoChannels, rec.Name)
	}
	a.length = int(math.Round(s.EpochSeconds * a.fs))
	if a.nIn < a.length*a.q {
		return nil, fmt.Errorf("%w: %q: %d samples at %g Hz, one %g s epoch needs %d",
			ErrTooShort, rec.Name, a.nIn, a.fsIn, s.EpochSeconds, a.length*a.q)
	}
	for _, ch := range chans {
		a.names = append(a.names, ch.Label)
		a.data = append(a.data, ch.Samples[:a.nIn])
	}
	a.workers = max(1, min(runtime.GOMAXPROCS(0), maxWorkers, len(chans)))
	if s.Uncertainty != nil {
		a.seed[0], a.seed[1] = seedOf(rec, a.data)
	}
	a.segsIn = segmentsOf(rec, a.nIn)
	// The segments after decimation: segment g keeps its samples
	// First + k·q, k < ceil(Count/q), packed one after the other.
	next := 0
	for _, g := range a.segsIn {
		c := (g.Count + a.q - 1) / a.q
		a.segs = append(a.segs, ingest.Segment{Onset: g.Onset, First: next, Count: c})
		next += c
	}
	a.n = next
	end := 0.0 // recording time of the last sample's end (gaps of EDF+D count)
	for _, g := range a.segsIn {
		end = math.Max(end, g.Onset+float64(g.Count)/a.fsIn)
	}
	a.periods = normalisePeriods(rec.Periods, end)
	var err error
	if a.hp, err = ButterHighpass(s.Filters.HighPassOrder, s.Filters.HighPassHz, a.fs); err != nil {
		return nil, fmt.Errorf("metrics: %q: high-pass: %w", rec.Name, err)
	}
	if a.lp, err = ButterLowpass(s.Filters.LowPassOrder, s.Filters.LowPassHz, a.fsIn); err != nil {
		return nil, fmt.Errorf("metrics: %q: low-pass: %w", rec.Name, err)
	}
	return a, nil
}

// listStates gives every eye state of the recording's periods an entry in
// q's per-state tallies, so that a state with nothing kept reads 0 rather
// than missing.
func (a *analysis) listStates(q *Quality) {
	for _, p := range a.periods {
		q.CleanSeconds[p.State] += 0
		q.EpochsTotal[p.State] += 0
	}
}

// parallel calls fn(worker, i) for i = 0…n−1 on `workers` goroutines; each
// worker index is used by one goroutine at a time, so fn may keep per-worker
// work space indexed by it.
func parallel(n, workers int, fn func(worker, i int)) {
	if workers <= 1 || n <= 1 {
		for i := 0; i < n; i++ {
			fn(0, i)
		}
		return
	}
	var wg sync.WaitGroup
	next := make(chan int)
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			for i := range next {
				fn(w, i)
			}
		}(w)
	}
	for i := 0; i < n; i++ {
		next <- i
	}
	close(next)
	wg.Wait()
}

// filter finds the line frequency, then filters every analysed channel
// segment by segment (no filter runs across a join of two runs or a gap of
// an EDF+D file), zero-phase (FiltFilt = scipy.signal.sosfiltfilt):
//
//  1. the low-pass at the recording's rate;
//  2. keep every q-th sample (Settings.AnalysisRateHz; the low-pass is the
//     anti-alias filter);
//  3. the high-pass and the notch at the analysis rate, as one cascade.
//
// A zero-phase filter's response is the square of the magnitude response
// whatever the order of the stages, so the result equals the three filters
// run at the recording's rate up to the edge padding; the high-pass and
// notch run on q times fewer samples. The output is written in place over
// the channel's own samples (the packed position never passes the read
// position). It also measures each channel's level for the bad-channel
// rules.
//
// Channels are filtered two at a time (filterPair). The pairs' work space
// (two padded float64 copies of two channels per worker, about 30 MB on 30
// minutes of 21 channels at 500 Hz) is garbage once the stage ends; one
// collection then lets the later stages reuse it rather than grow the
// process by as much (the heap is sample arrays without pointers, so the
// collection takes well under a millisecond). Measured on that recording:
// peak resident memory 158 MiB without it, 126 MiB with it.
func (a *analysis) filter(rec *ingest.Recording) error {
	a.detectLine(rec)
	slow := append(SOS{}, a.hp...)
	if a.lineHz > 0 && a.lineHz < a.fs/2 {
		notch, err := IIRNotch(a.lineHz, a.s.Filters.NotchQ, a.fs)
		if err != nil {
			return fmt.Errorf("metrics: %q: notch at %g Hz: %w", rec.Name, a.lineHz, err)
		}
		slow = append(slow, notch...)
	}
	a.slow = slow
	lenFast, lenSlow := a.workLens()
	work := make([][]float64, a.workers)
	work2 := make([][]float64, a.workers)
	a.level = make([]float64, len(a.data))
	win := max(2, int(math.Round(a.s.Channel.WindowSeconds*a.fs)))
	// Channels go two at a time through filterPair (two recurrences in
	// one pass, see filterpair.go). With an odd count the first channel is
	// paired with itself, as the first job so that the pairs even out the
	// workers' ends: both halves hold the same samples and compute the
	// same values, so writing both back is writing the result once.
	var jobs [][2]int
	c := 0
	if len(a.data)%2 == 1 {
		jobs, c = append(jobs, [2]int{0, 0}), 1
	}
	for ; c+1 < len(a.data); c += 2 {
		jobs = append(jobs, [2]int{c, c + 1})
	}
	parallel(len(jobs), a.workers, func(w, j int) {
		if work[w] == nil {
			work[w] = make([]float64, 2*lenFast)
			work2[w] = make([]float64, 2*lenSlow)
		}
		p, q := jobs[j][0], jobs[j][1]
		a.data[p], a.data[q] = a.filterPair(a.data[p], a.data[q], work[w], work2[w])
		a.level[p] = windowLevel(a.data[p], a.segs, win)
		if q != p {
			a.level[q] = windowLevel(a.data[q], a.segs, win)
		}
	})
	work, work2 = nil, nil
	runtime.GC()
	return nil
}

// workLens are the lengths of filterOne's two work buffers.
func (a *analysis) workLens() (int, int) {
	maxIn, maxOut := 0, 0
	for i, g := range a.segsIn {
		maxIn = max(maxIn, g.Count)
		maxOut = max(maxOut, a.segs[i].Count)
	}
	return maxIn + 2*PadLen(a.lp), maxOut + 2*PadLen(a.slow)
}

// filterOne runs filter's three stages over one channel x (at the
// recording's rate, a.nIn samples), segment by segment, in place, and
// returns x[:a.n], the filtered channel at the analysis rate. work and
// work2 hold at least workLens() values.
func (a *analysis) filterOne(x []float32, work, work2 []float64) []float32 {
	padFast, padSlow := PadLen(a.lp), PadLen(a.slow)
	for i, g := range a.segsIn {
		out := x[a.segs[i].First : a.segs[i].First+a.segs[i].Count]
		if g.Count <= padFast || len(out) <= padSlow {
			clear(out) // too short to filter; no epoch fits in it
			continue
		}
		buf := work[:g.Count]
		for k, v := range x[g.First : g.First+g.Count] {
			buf[k] = float64(v)
		}
		y := FiltFilt(work, buf, a.lp) // in place: cap(work) ≥ Count + 2·pad
		dec := work2[:len(out)]
		for k := range dec {
			dec[k] = y[k*a.q]
		}
		z := FiltFilt(work2, dec, a.slow)
		for k := range out {
			out[k] = float32(z[k])
		}
	}
	return x[:a.n]
}

// windowLevel is the median over non-overlapping windows of win samples
// (inside segments) of the window's standard deviation.
func windowLevel(x []float32, segs []ingest.Segment, win int) float64 {
	var sds []float64
	for _, g := range segs {
		for i := g.First; i+win <= g.First+g.Count; i += win {
			var sum, ss float64
			for _, v := range x[i : i+win] {
				sum += float64(v)
			}
			mean := sum / float64(win)
			for _, v := range x[i : i+win] {
				d := float64(v) - mean
				ss += d * d
			}
			sds = append(sds, math.Sqrt(ss/float64(win)))
		}
	}
	return median(sds)
}

// markBadChannels applies the channel rules of s.Channel.
func (a *analysis) markBadChannels() {
	a.good = make([]bool, len(a.data))
	med := median(a.level)
	for c, lv := range a.level {
		switch {
		case lv < a.s.Channel.FlatSDMicrovolts:
			a.badReason[a.names[c]] = fmt.Sprintf("flat: level %.3g µV below %g µV", lv, a.s.Channel.FlatSDMicrovolts)
		case lv > a.s.Channel.NoisyFactor*med:
			a.badReason[a.names[c]] = fmt.Sprintf("noisy: level %.3g µV above %g × the median %.3g µV", lv, a.s.Channel.NoisyFactor, med)
		default:
			a.good[c] = true
		}
	}
	for _, name := range a.s.Channels {
		if _, ok := a.badReason[name]; ok {
			a.bad = append(a.bad, name)
		}
	}
}

// usedChannels returns the indices of the good analysed channels.
func (a *analysis) usedChannels() []int {
	var idx []int
	for c, ok := range a.good {
		if ok {
			idx = append(idx, c)
		}
	}
	return idx
}

// epochs lays the epoch grid, measures each epoch on each good channel,
// marks as bad the channels that alone fail the artefact rules in most
// epochs (ChannelRules.MaxFailShare; the signals are then re-referenced to
// the remaining good channels and measured again), applies the artefact
// rules and joins the clean epochs into runs.
func (a *analysis) epochs(rec *ingest.Recording) {
	a.eps = epochGrid(a.periods, a.segs, a.fs, a.length, a.s.PeriodSkipSeconds)
	a.measureEpochs()
	if a.markFailingChannels() {
		// y − mean_G(y) = x − mean_G(x) for y = x − mean_A(x): a second
		// common average over the new good set G re-references exactly.
		commonAverage(a.data, a.good, a.n, a.workers)
		a.measureEpochs()
	}
	used := a.usedChannels()
	a.rules = applyRules(a.eps, a.stats, used, a.s.Artefacts)
	a.runs = cleanRuns(a.eps, a.length)
	a.primary = a.primaryState()
}

// primaryState is the state the "closed" markers use: eyes closed, or
// unknown when the recording has no eyes-closed period but an unknown one.
func (a *analysis) primaryState() ingest.EyeState {
	hasClosed, hasUnknown := false, false
	for _, p := range a.periods {
		hasClosed = hasClosed || p.State == ingest.EyesClosed
		hasUnknown = hasUnknown || p.State == ingest.EyesUnknown
	}
	if !hasClosed && hasUnknown {
		return ingest.EyesUnknown
	}
	return ingest.EyesClosed
}

// measureEpochs fills a.stats for the good channels.
func (a *analysis) measureEpochs() {
	a.stats = make([][]epochStat, len(a.data))
	pgs := make([]*periodogram, a.workers)
	used := a.usedChannels()
	parallel(len(used), a.workers, func(w, i int) {
		if pgs[w] == nil {
			pgs[w] = newPeriodogram(a.length, a.fs)
		}
		c, p, r, alpha, slow := used[i], pgs[w], a.s.Artefacts, a.s.Bands.Alpha, a.s.Bands.Delta
		st := make([]epochStat, len(a.eps))
		epoch := func(e int) []float32 { return a.data[c][a.eps[e].First : a.eps[e].First+a.length] }
		// Two epochs per transform (periodogram.stat2).
		e := 0
		for ; e+1 < len(a.eps); e += 2 {
			st[e], st[e+1] = p.stat2(epoch(e), epoch(e+1), r, alpha, slow)
		}
		if e < len(a.eps) {
			st[e] = p.stat(epoch(e), r, alpha, slow)
		}
		a.stats[c] = st
	})
}

// markFailingChannels marks bad every good channel that on its own fails
// artefact rules 1–3 in more than MaxFailShare of the epochs, provided that
// fewer than half of the good channels do (otherwise the recording, not a
// channel, is at fault and the epochs are rejected instead). It reports
// whether it marked any.
func (a *analysis) markFailingChannels() bool {
	used := a.usedChannels()
	if len(a.eps) == 0 || len(used) < 2 {
		return false
	}
	var failing []int
	shares := map[int]float64{}
	burst := burstLimits(a.eps, a.stats, used, a.s.Artefacts)
	for _, c := range used {
		n := 0
		for e := range a.eps {
			if failsAlone(a.stats, c, e, a.s.Artefacts, burst[c][e]) {
				n++
			}
		}
		if sh := float64(n) / float64(len(a.eps)); sh > a.s.Channel.MaxFailShare {
			failing = append(failing, c)
			shares[c] = sh
		}
	}
	if len(failing) == 0 || 2*len(failing) >= len(used) {
		return false
	}
	for _, c := range failing {
		a.good[c] = false
		a.badReason[a.names[c]] = fmt.Sprintf("fails the artefact rules on its own in %.0f %% of epochs (limit %.0f %%)",
			100*shares[c], 100*a.s.Channel.MaxFailShare)
	}
	a.bad = a.bad[:0]
	for _, name := range a.s.Channels {
		if _, ok := a.badReason[name]; ok {
			a.bad = append(a.bad, name)
		}
	}
	return true
}

// quality summarises what the analysis saw.
func (a *analysis) quality() Quality {
	q := Quality{
		LineFrequency:       a.lineHz,
		LineFrequencySource: a.lineSource,
		BadChannels:         append([]string{}, a.bad...),
		UsedChannels:        []string{},
		CleanSeconds:        map[ingest.EyeState]float64{},
		EpochsTotal:         map[ingest.EyeState]int{},
		RejectedByRule:      a.rules,
		Ocular:              a.ocular,
	}
	for _, c := range a.usedChannels() {
		q.UsedChannels = append(q.UsedChannels, a.names[c])
	}
	if a.v2 != nil {
		a.qualityV2(&q)
		return q
	}
	rejected := 0
	a.listStates(&q)
	for _, e := range a.eps {
		q.EpochsTotal[e.State]++
		if e.Reject == "" {
			q.CleanSeconds[e.State] += float64(a.length) / a.fs
		} else {
			rejected++
		}
	}
	if len(a.eps) > 0 {
		q.RejectedShare = float64(rejected) / float64(len(a.eps))
	}
	q.Windows = make([]Window, 0, len(a.eps))
	for _, e := range a.eps {
		q.Windows = append(q.Windows, Window{Start: e.Start, End: e.Start + float64(a.length)/a.fs,
			State: e.State, Kept: e.Reject == "", Reason: e.Reject})
	}
	return q
}
