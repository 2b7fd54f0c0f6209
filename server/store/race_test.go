//go:build race

package store

// raceEnabled: the race detector slows the code several times over, so
// timing budgets are reported but not enforced under it.
const raceEnabled = true
