package main

import (
	"context"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"longwave/metrics"
	"longwave/server/intake"
	"longwave/server/store"
)

// TestReprocessCommandV1ToV2 makes a database under settings version 1 and
// takes it to version 2 with the command: one line per visit saying 1 → 2,
// a line per marker that moved (checked against the store), and the
// settings now stored.
func TestReprocessCommandV1ToV2(t *testing.T) {
	ctx := context.Background()
	dir := t.TempDir()
	db := filepath.Join(dir, "clinic.db")
	st, err := store.Open(db)
	if err != nil {
		t.Fatal(err)
	}
	p := intake.New(st)
	p.Settings = metrics.V1()
	before := map[int64]map[string]metrics.Marker{}
	for i, date := range []string{"2023-06-05", "2024-06-03"} {
		path := recording(t, dir, "v"+date+".edf", uint64(60+i))
		out, err := p.IngestVisit(ctx, intake.Request{PatientCode: "KS-0917", Date: date, BirthYear: 1949,
			Single: &intake.File{Path: path}})
		if err != nil {
			t.Fatal(err)
		}
		before[out.VisitID] = keyed(out.Result.Markers)
	}
	st.Close()

	code, out, stderr := run(t, "", "reprocess", "--db", db, "--to", "2")
	if code != exitDone {
		t.Fatalf("reprocess: exit %d\n%s\n%s", code, out, stderr)
	}
	st, err = store.Open(db)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	moved := map[string]bool{}
	for id, old := range before {
		v, err := st.Visit(ctx, id)
		if err != nil {
			t.Fatal(err)
		}
		if v.SettingsVersion != "2" || v.SettingsHash != metrics.V2().Hash() {
			t.Errorf("visit %d: settings %s %s after reprocess --to 2", id, v.SettingsVersion, v.SettingsHash)
		}
		line := "visit " + itoa(id) + ", KS-0917 " + v.Visit.Date + ": 1 → 2, "
		if !strings.Contains(out, line) {
			t.Errorf("report lacks %q:\n%s", line, out)
		}
		for k, m := range keyed(v.Markers) {
			if o, ok := old[k]; ok && (o.Value != m.Value || o.Computable != m.Computable || (o.Uncertainty == nil) != (m.Uncertainty == nil)) {
				moved[k] = true
			}
		}
	}
	for k := range moved {
		if !strings.Contains(out, "  "+k+" ") {
			t.Errorf("marker %s moved but has no summary line:\n%s", k, out)
		}
	}
	if len(moved) == 0 && !strings.Contains(out, "no marker moved in any of the 2 visits") {
		t.Errorf("no marker moved and the report does not say so:\n%s", out)
	}
	if !strings.Contains(out, "settings now 2 (hash "+metrics.V2().Hash()[:12]+")") || !strings.Contains(out, "2 visits reprocessed, 0 failed") {
		t.Errorf("report head or tail missing:\n%s", out)
	}

	// Nothing left to do, and an unknown version is a usage error.
	if code, out, _ := run(t, "", "reprocess", "--db", db, "--to", "2"); code != exitDone || !strings.Contains(out, "0 visits reprocessed") {
		t.Errorf("second reprocess: %d %q", code, out)
	}
	if code, _, stderr := run(t, "", "reprocess", "--db", db, "--to", "7"); code != exitUsage || !strings.Contains(stderr, `--to "7"`) {
		t.Errorf("--to 7: exit %d, %q", code, stderr)
	}
}

func keyed(ms []metrics.Marker) map[string]metrics.Marker {
	out := map[string]metrics.Marker{}
	for _, m := range ms {
		out[m.Key()] = m
	}
	return out
}

func itoa(n int64) string { return strconv.FormatInt(n, 10) }

// TestReprocessReportText prints a report made by hand: the visit lines,
// and the per-marker table with medians, the largest change and its visit.
func TestReprocessReportText(t *testing.T) {
	ci := &metrics.Uncertainty{SE: 0.05, Low: 9.3, High: 9.5, Level: 0.95, Method: "bootstrap", Resamples: 500}
	const pdr = "pdr_frequency/posterior/closed"
	const ta = "theta_alpha_ratio/posterior/closed"
	rep := intake.ReprocessReport{Version: "2", Hash: "0123456789abcdef", Visits: []intake.VisitChange{
		{VisitID: 1, PatientCode: "A", Date: "2022-01-03", OldVersion: "1", Changes: []intake.MarkerChange{
			{Key: pdr, Unit: "Hz", Old: 9.5, New: 9.4, OldComputable: true, NewComputable: true, NewInterval: ci},
			{Key: ta, Unit: metrics.UnitRatio, Old: 0.3, New: 0.33, OldComputable: true, NewComputable: true},
		}},
		{VisitID: 2, PatientCode: "A", Date: "2023-01-02", OldVersion: "1", Changes: []intake.MarkerChange{
			{Key: pdr, Unit: "Hz", Old: 9.6, New: 9.2, OldComputable: true, NewComputable: true, NewInterval: ci},
			{Key: ta, Unit: metrics.UnitRatio, Old: 0.5, OldComputable: true, NewComputable: false, NewReason: "no alpha peak"},
		}},
	}}
	var b strings.Builder
	writeReprocessReport(&b, rep, true)
	out := b.String()
	t.Log("\n" + out)
	for _, want := range []string{
		"settings now 2 (hash 0123456789ab)",
		"visit 1, A 2022-01-03: 1 → 2, 2 markers moved (0 became computable, 0 no longer computable, 1 gained an interval)",
		"visit 2, A 2023-01-02: 1 → 2, 2 markers moved (0 became computable, 1 no longer computable, 1 gained an interval)",
		"9.6 → 9.2 [9.3, 9.5]",
		"not computable (no alpha peak)",
		"per marker, old → new over the 2 visits",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("report lacks %q", want)
		}
	}
	rows := map[string][]string{}
	for _, line := range strings.Split(out, "\n") {
		if f := strings.Fields(line); len(f) > 0 && (f[0] == pdr || f[0] == ta) && !strings.Contains(line, "[") && !strings.Contains(line, "not computable") {
			rows[f[0]] = f
		}
	}
	// pdr: 9.5, 9.6 → 9.4, 9.2: medians 9.55 → 9.3, change -0.25, largest
	// -0.4 at visit 2; theta/alpha computable both times at visit 1 only.
	wantRows := map[string]string{
		pdr: "Hz 2/2 9.55 → 9.3 -0.25 -0.4 (A 2023-01-02, visit 2) +0 -0 +2 -0, median width 0.2 Hz",
		ta:  "- 2/2 0.3 → 0.33 +0.03 +0.03 (A 2022-01-03, visit 1) +0 -1 -",
	}
	for k, w := range wantRows {
		if got := strings.Join(rows[k][1:], " "); got != w {
			t.Errorf("row %s = %q, want %q", k, got, w)
		}
	}
}
