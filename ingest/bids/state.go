package bids

import (
	"strings"

	"longwave/ingest"
)

// The eye state of a run, when its BIDS name says it. The rule (ours; BIDS
// only recommends resting-state task labels that begin with "rest", and
// Instructions that say eyes open or closed, FORMATS.md §2.1):
//
//  1. Lower-case the task or acquisition label and drop every character that
//     is not a letter or digit.
//  2. Cut one leading "restingstate", "resting" or "rest", and one trailing
//     "rest".
//  3. What is left names the state: "ec", "eyesclosed", "eyesclose",
//     "closed", "closedeyes", "eyesshut" → closed; "eo", "eyesopen",
//     "eyesopened", "open", "openeyes" → open. Anything else → no state.
//
// So task-eyesclosed, task-restEC, task-rest_acq-EC, task-RestingStateEyesOpen
// are recognised, task-rest alone is not.
var (
	labelClosed = []string{"ec", "eyesclosed", "eyesclose", "closed", "closedeyes", "eyesshut"}
	labelOpen   = []string{"eo", "eyesopen", "eyesopened", "open", "openeyes"}
)

// stateFromLabel applies the rule above to one entity label.
func stateFromLabel(label string) (ingest.EyeState, bool) {
	var b strings.Builder
	for _, r := range strings.ToLower(label) {
		if r >= 'a' && r <= 'z' || r >= '0' && r <= '9' {
			b.WriteRune(r)
		}
	}
	l := b.String()
	for _, p := range []string{"restingstate", "resting", "rest"} {
		if strings.HasPrefix(l, p) {
			l = l[len(p):]
			break
		}
	}
	l = strings.TrimSuffix(l, "rest")
	for _, c := range labelClosed {
		if l == c {
			return ingest.EyesClosed, true
		}
	}
	for _, o := range labelOpen {
		if l == o {
			return ingest.EyesOpen, true
		}
	}
	return "", false
}
