package intake_test

import (
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/server/intake"
	"longwave/server/store"
)

func TestIngestVisitStoresWholeVisit(t *testing.T) {
	p, db := newPipeline(t)
	content := shortFile(t, 1)
	path := writeFile(t, t.TempDir(), "Jane_Doe_2024.edf", content)
	out, err := p.IngestVisit(bg, intake.Request{PatientCode: "MC-0001", Date: "2024-03-15", BirthYear: 1951, Sex: "F",
		Context: "no medication change", Single: &intake.File{Path: path}})
	if err != nil {
		t.Fatal(err)
	}
	if out.Skipped || out.VisitID == 0 || out.Result == nil {
		t.Fatalf("outcome = %+v", out)
	}
	v, err := p.Store.Visit(bg, out.VisitID)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(v.Markers, out.Result.Markers) || v.SettingsHash != p.Settings.Hash() {
		t.Errorf("stored markers differ from the result (%d vs %d), hash %s", len(v.Markers), len(out.Result.Markers), v.SettingsHash)
	}
	if v.Conditions.PeriodSource != ingest.FromAnnotations || v.Conditions.SampleRate != 250 {
		t.Errorf("conditions = %+v", v.Conditions)
	}
	if !v.Visit.AgeKnown || v.Visit.AgeYears < 72 || v.Visit.AgeYears > 73 {
		t.Errorf("age = %v (known %v), want 72.7 from birth year 1951", v.Visit.AgeYears, v.Visit.AgeKnown)
	}
	if len(v.Recordings) != 1 || v.Recordings[0].SHA256 != sha(content) || v.Recordings[0].Role != store.RoleSingle ||
		v.Recordings[0].Size != int64(len(content)) || v.Recordings[0].Format != string(ingest.FormatEDFPlusC) {
		t.Errorf("recordings = %+v", v.Recordings)
	}
	stored, err := p.Store.StoredRecordingPath(bg, sha(content))
	if err != nil {
		t.Fatal(err)
	}
	if b, _ := os.ReadFile(stored); string(b) != string(content) {
		t.Error("stored file differs from the ingested one")
	}
	d, err := p.Store.VisitDisplay(bg, out.VisitID)
	if err != nil || len(d.Spectra) == 0 {
		t.Errorf("display: %d spectra, %v", len(d.Spectra), err)
	}
	// Privacy: the file name (here a patient's name) is nowhere in the
	// database.
	for _, f := range []string{db, db + "-wal"} {
		b, _ := os.ReadFile(f)
		if strings.Contains(string(b), "Jane_Doe") {
			t.Errorf("%s holds the file name", filepath.Base(f))
		}
	}
}

func TestSameFileSkipped(t *testing.T) {
	p, db := newPipeline(t)
	path := writeFile(t, t.TempDir(), "a.edf", shortFile(t, 2))
	req := intake.Request{PatientCode: "MC-0002", Date: "2024-01-01", Single: &intake.File{Path: path}}
	first, err := p.IngestVisit(bg, req)
	if err != nil {
		t.Fatal(err)
	}
	before := rowCounts(t, db)
	// Same file again: under the same patient and date, another date, or
	// another patient, it is recognised by its SHA-256.
	for _, again := range []intake.Request{req, {PatientCode: "MC-0002", Date: "2025-01-01", Single: req.Single},
		{PatientCode: "MC-0099", Date: "2024-01-01", Single: &intake.File{Data: shortFile(t, 2), Name: "upload.edf"}}} {
		out, err := p.IngestVisit(bg, again)
		if err != nil {
			t.Fatalf("%s %s: %v", again.PatientCode, again.Date, err)
		}
		if !out.Skipped || out.VisitID != first.VisitID || !strings.Contains(out.Message, "already stored") ||
			!strings.Contains(out.Message, "MC-0002") {
			t.Errorf("%s %s: outcome %+v, want skipped naming visit %d of MC-0002", again.PatientCode, again.Date, out, first.VisitID)
		}
	}
	if after := rowCounts(t, db); !reflect.DeepEqual(after, before) {
		t.Errorf("rows changed on skip: %v -> %v", before, after)
	}
}

// badFiles are recordings the decoder must refuse, each a different way.
func badFiles(t *testing.T) map[string][]byte {
	good := shortFile(t, 3)
	badCount := append([]byte(nil), good...)
	copy(badCount[252:256], "x9  ") // number of signals not a number
	badRecords := append([]byte(nil), good...)
	copy(badRecords[244:252], "0       ") // zero record duration in plain data
	return map[string][]byte{
		"notes.edf":     []byte("visit notes typed into the wrong box\n"),
		"truncated.edf": good[:700],
		"signals.edf":   badCount,
		"duration.edf":  badRecords,
	}
}

func TestBadFileLeavesNothing(t *testing.T) {
	for name, content := range badFiles(t) {
		p, db := newPipeline(t)
		path := writeFile(t, t.TempDir(), name, content)
		_, err := p.IngestVisit(bg, intake.Request{PatientCode: "MC-0003", Date: "2024-02-02", BirthYear: 1950,
			Single: &intake.File{Path: path}})
		if err == nil {
			t.Errorf("%s: ingest succeeded", name)
			continue
		}
		if !strings.Contains(err.Error(), name) {
			t.Errorf("%s: error %q does not name the file", name, err)
		}
		if c := rowCounts(t, db); !allZero(c) {
			t.Errorf("%s: rows left behind: %v", name, c)
		}
		if final, temp := dataFiles(t, p.Store.DataDir()); len(final)+len(temp) != 0 {
			t.Errorf("%s: files left in the data folder: %v %v", name, final, temp)
		}
	}
}

func TestTwoRunsOneVisit(t *testing.T) {
	p, db := newPipeline(t)
	dir := t.TempDir()
	closedSpec, openSpec := shortSpec(4), shortSpec(5)
	closedSpec.Format, openSpec.Format = ingest.FormatEDF, ingest.FormatEDF // plain EDF: no annotations
	closedSpec.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 120}}
	openSpec.Periods = []ingest.Period{{State: ingest.EyesOpen, Start: 0, End: 120}}
	cb, ob := synthBytes(t, closedSpec), synthBytes(t, openSpec)
	out, err := p.IngestVisit(bg, intake.Request{PatientCode: "MC-0004", Date: "2024-04-04",
		Closed: &intake.File{Path: writeFile(t, dir, "Smith_closed.edf", cb)}, Open: &intake.File{Path: writeFile(t, dir, "Smith_open.edf", ob)}})
	if err != nil {
		t.Fatal(err)
	}
	v, _ := p.Store.Visit(bg, out.VisitID)
	roles := map[string]string{}
	for _, r := range v.Recordings {
		roles[r.Role] = r.SHA256
	}
	if roles[store.RoleClosed] != sha(cb) || roles[store.RoleOpen] != sha(ob) || len(roles) != 2 {
		t.Errorf("roles = %v", roles)
	}
	if v.Conditions.PeriodSource != ingest.FromRuns {
		t.Errorf("period source = %s, want %s", v.Conditions.PeriodSource, ingest.FromRuns)
	}
	if m, ok := out.Result.Marker(metrics.AlphaReactivity, metrics.RegionPosterior, ingest.EyesOpen); !ok || !m.Computable {
		t.Errorf("alpha reactivity with two runs: %+v %v", m, ok)
	}
	for _, f := range []string{db, db + "-wal"} {
		if b, _ := os.ReadFile(f); strings.Contains(string(b), "Smith") {
			t.Errorf("%s holds a run's file name", filepath.Base(f))
		}
	}
}

func TestRequestChecked(t *testing.T) {
	p, db := newPipeline(t)
	f := &intake.File{Data: shortFile(t, 1)}
	for _, req := range []intake.Request{
		{Date: "2024-01-01", Single: f},
		{PatientCode: "A", Date: "01/02/2024", Single: f},
		{PatientCode: "A", Date: "2024-01-01"},
		{PatientCode: "A", Date: "2024-01-01", Single: f, Closed: f},
		{PatientCode: "A", Date: "2024-01-01", Closed: f, Open: f},
	} {
		if _, err := p.IngestVisit(bg, req); !errors.Is(err, intake.ErrRequest) {
			t.Errorf("%+v: err = %v, want ErrRequest", req, err)
		}
	}
	if c := rowCounts(t, db); !allZero(c) {
		t.Errorf("rows: %v", c)
	}
}

func TestReprocessUnderNewSettings(t *testing.T) {
	p, _ := newPipeline(t)
	var ids []int64
	for i, date := range []string{"2022-05-01", "2023-05-01"} {
		out, err := p.IngestVisit(bg, intake.Request{PatientCode: "MC-0005", Date: date, BirthYear: 1949,
			Single: &intake.File{Data: shortFile(t, uint64(10+i)), Name: "r.edf"}})
		if err != nil {
			t.Fatal(err)
		}
		ids = append(ids, out.VisitID)
	}
	// Nothing to do under the settings that made them.
	rep, err := p.Reprocess(bg, nil)
	if err != nil || len(rep.Visits) != 0 {
		t.Fatalf("reprocess under the same settings: %d visits, %v", len(rep.Visits), err)
	}
	// New settings: a wider smoothing window moves the peak estimates.
	next := metrics.Current()
	next.Version = "v2-test"
	next.Peak.SmoothBins += 4
	p2 := &intake.Pipeline{Store: p.Store, Settings: next}
	rep, err = p2.Reprocess(bg, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Visits) != 2 || len(rep.Failed) != 0 {
		t.Fatalf("reprocessed %d, failed %v", len(rep.Visits), rep.Failed)
	}
	moved := 0
	for _, vc := range rep.Visits {
		moved += len(vc.Changes)
		if vc.OldVersion != metrics.Current().Version {
			t.Errorf("visit %d: old version %s", vc.VisitID, vc.OldVersion)
		}
		v, _ := p.Store.Visit(bg, vc.VisitID)
		if v.SettingsVersion != "v2-test" || v.SettingsHash != next.Hash() {
			t.Errorf("visit %d now %s %s", vc.VisitID, v.SettingsVersion, v.SettingsHash)
		}
		for _, m := range v.Markers {
			for _, c := range vc.Changes {
				if c.Key == m.Key() && c.New != m.Value {
					t.Errorf("visit %d %s: report says %v, store has %v", vc.VisitID, c.Key, c.New, m.Value)
				}
			}
		}
	}
	if moved == 0 {
		t.Error("a wider smoothing window moved no marker: the report or the rerun is not real")
	}
	if ids, _ := p.Store.VisitsWithOtherSettings(bg, "v2-test", next.Hash()); len(ids) != 0 {
		t.Errorf("still on other settings: %v", ids)
	}
	// Back to v1: the markers come back to what ingest made, bit for bit.
	rep, err = p.Reprocess(bg, nil)
	if err != nil || len(rep.Visits) != 2 {
		t.Fatalf("back to v1: %d, %v", len(rep.Visits), err)
	}
	fresh, _ := newPipeline(t)
	again, _ := fresh.IngestVisit(bg, intake.Request{PatientCode: "X", Date: "2022-05-01",
		Single: &intake.File{Data: shortFile(t, 10)}})
	v, _ := p.Store.Visit(bg, ids[0])
	if !reflect.DeepEqual(v.Markers, again.Result.Markers) {
		t.Error("reprocessing back to v1 did not reproduce the markers of a fresh ingest")
	}
}
