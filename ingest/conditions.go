package ingest

import (
	"math"
	"strings"
)

// FinishConditions fills the derived fields of rec.Conditions from
// rec.Channels: SampleRate, UVPerStep, Bits, ChannelsFound, ChannelsMissing,
// BadChannels, Duration, and Reference when it is still empty. Decode calls
// it; the BIDS reader calls it again after applying sidecars.
//
//   - SampleRate: the most common rate among the EEG channels of the 19
//     positions (Standard19); among all EEG channels when none of the 19 is
//     present; ties go to the higher rate. 0 when there is no EEG channel.
//   - UVPerStep: the coarsest (largest) step among the 19-position EEG
//     channels at that rate (all EEG channels when none), with Bits =
//     ceil(log2(dmax − dmin + 1)) of that channel.
//   - ChannelsFound/ChannelsMissing partition Standard19 in its order; a
//     position counts as found when an EEG channel carries its label.
//   - Duration: the longest EEG channel at SampleRate, in seconds of samples
//     (gaps of EDF+D files are not counted).
//   - Reference: the reference token shared by every 19-position EEG
//     channel ("REF", "A1", "LE" …), "" when they differ or name none.
func FinishConditions(rec *Recording) {
	c := &rec.Conditions
	core := coreEEG(rec.Channels)
	c.SampleRate = eegRate(rec.Channels)
	c.UVPerStep, c.Bits = 0, 0
	for _, ch := range core {
		if ch.SampleRate != c.SampleRate {
			continue
		}
		if ch.UVPerStep > c.UVPerStep {
			c.UVPerStep = ch.UVPerStep
			c.Bits = bitsOf(ch.DigitalMin, ch.DigitalMax)
		}
	}
	found := map[string]bool{}
	for i := range rec.Channels {
		if ch := &rec.Channels[i]; ch.Kind == KindEEG {
			found[ch.Label] = true
		}
	}
	c.ChannelsFound, c.ChannelsMissing, c.BadChannels = nil, nil, nil
	for _, pos := range Standard19 {
		if found[pos] {
			c.ChannelsFound = append(c.ChannelsFound, pos)
		} else {
			c.ChannelsMissing = append(c.ChannelsMissing, pos)
		}
	}
	for i := range rec.Channels {
		ch := &rec.Channels[i]
		if ch.Bad {
			c.BadChannels = append(c.BadChannels, ch.Label)
		}
	}
	c.Duration = 0
	for i := range rec.Channels {
		ch := &rec.Channels[i]
		if ch.Kind == KindEEG && ch.SampleRate == c.SampleRate {
			c.Duration = math.Max(c.Duration, ch.Duration())
		}
	}
	if c.Reference == "" {
		ref := ""
		for i, ch := range core {
			if i == 0 {
				ref = ch.Reference
			} else if !strings.EqualFold(ref, ch.Reference) {
				ref = ""
				break
			}
		}
		c.Reference = ref
	}
}

// coreEEG returns the EEG channels at the 19 positions, or every EEG
// channel when none of the 19 is present.
func coreEEG(chs []Channel) []*Channel {
	var core, all []*Channel
	for i := range chs {
		ch := &chs[i]
		if ch.Kind != KindEEG {
			continue
		}
		all = append(all, ch)
		if isStandard19(ch.Label) {
			core = append(core, ch)
		}
	}
	if len(core) == 0 {
		return all
	}
	return core
}

func isStandard19(label string) bool {
	for _, p := range Standard19 {
		if p == label {
			return true
		}
	}
	return false
}

// eegRate is the most common rate among coreEEG channels (ties: higher).
func eegRate(chs []Channel) float64 {
	count := map[float64]int{}
	best, bestN := 0.0, 0
	for _, ch := range coreEEG(chs) {
		count[ch.SampleRate]++
		n := count[ch.SampleRate]
		if n > bestN || n == bestN && ch.SampleRate > best {
			best, bestN = ch.SampleRate, n
		}
	}
	return best
}

// bitsOf is ceil(log2(dmax − dmin + 1)), the bits a digital range spans.
func bitsOf(dmin, dmax int) int {
	span := uint64(int64(dmax)-int64(dmin)) + 1
	bits := 0
	for (uint64(1) << bits) < span {
		bits++
	}
	return bits
}
