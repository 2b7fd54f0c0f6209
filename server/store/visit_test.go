package store

import (
	"context"
	"errors"
	"math"
	"reflect"
	"strings"
	"sync"
	"testing"

	"longwave/ingest"
	"longwave/metrics"
)

func TestSaveVisitRoundTrip(t *testing.T) {
	ctx := context.Background()
	s := mustOpen(t)
	content := []byte("recording bytes of visit one")
	nv := sampleVisit("MC-0001", "2024-03-05", content, 1)
	v, err := s.SaveVisit(ctx, nv)
	if err != nil {
		t.Fatal(err)
	}
	// Mid-year estimate from birth year 1950: 1950-07-01 to 2024-03-05.
	wantAge := 26911.0 / daysPerYear
	if !v.AgeKnown || math.Abs(v.AgeYears-wantAge) > 1e-9 {
		t.Errorf("age = %v known %v, want %v", v.AgeYears, v.AgeKnown, wantAge)
	}
	got, err := s.Visit(ctx, v.ID)
	if err != nil {
		t.Fatal(err)
	}
	res := nv.Analysis.Result
	if got.Visit != v {
		t.Errorf("visit = %+v, want %+v", got.Visit, v)
	}
	if !reflect.DeepEqual(got.Conditions, res.Conditions) {
		t.Errorf("conditions = %+v\nwant %+v", got.Conditions, res.Conditions)
	}
	if !reflect.DeepEqual(got.Quality, res.Quality) {
		t.Errorf("quality = %+v\nwant %+v", got.Quality, res.Quality)
	}
	if !reflect.DeepEqual(got.Markers, res.Markers) {
		t.Errorf("markers differ: got %d, want %d", len(got.Markers), len(res.Markers))
	}
	if !reflect.DeepEqual(got.Flags, nv.Analysis.Flags) {
		t.Errorf("flags = %+v, want %+v", got.Flags, nv.Analysis.Flags)
	}
	if got.SettingsVersion != "v1" || got.SettingsHash != "4f2a" {
		t.Errorf("settings = %s %s", got.SettingsVersion, got.SettingsHash)
	}
	if len(got.Recordings) != 1 || got.Recordings[0].SHA256 != shaOf(content) || got.Recordings[0].VisitID != v.ID {
		t.Errorf("recordings = %+v", got.Recordings)
	}
	d, err := s.VisitDisplay(ctx, v.ID)
	if err != nil || !reflect.DeepEqual(d, res.Display) {
		t.Errorf("display round trip failed: %v", err)
	}
	rec, known, err := s.RecordingKnown(ctx, shaOf(content))
	if err != nil || !known || rec.VisitID != v.ID {
		t.Errorf("RecordingKnown = %+v %v %v", rec, known, err)
	}
	if _, known, _ := s.RecordingKnown(ctx, shaOf([]byte("other"))); known {
		t.Error("RecordingKnown of an unknown hash = true")
	}
	src, err := s.VisitSource(ctx, v.ID)
	if err != nil || !reflect.DeepEqual(src.Periods, nv.Analysis.Periods) || src.PatientCode != "MC-0001" {
		t.Errorf("VisitSource = %+v, %v", src, err)
	}
	if _, err := s.Visit(ctx, v.ID+100); !errors.Is(err, ErrNotFound) {
		t.Errorf("missing visit: err = %v, want ErrNotFound", err)
	}
	if _, err := s.VisitDisplay(ctx, v.ID+100); !errors.Is(err, ErrNotFound) {
		t.Errorf("missing display: err = %v, want ErrNotFound", err)
	}
}

func TestPatientVisitsOrderedAndCohort(t *testing.T) {
	ctx := context.Background()
	s := mustOpen(t)
	dates := []string{"2023-06-01", "2021-05-02", "2022-05-30"}
	for i, d := range dates {
		if _, err := s.SaveVisit(ctx, sampleVisit("MC-0002", d, []byte("a"+d), uint64(i))); err != nil {
			t.Fatal(err)
		}
	}
	if _, err := s.SaveVisit(ctx, sampleVisit("MC-0001", "2020-01-01", []byte("b"), 9)); err != nil {
		t.Fatal(err)
	}
	p, err := s.PatientByCode(ctx, "MC-0002")
	if err != nil {
		t.Fatal(err)
	}
	vs, err := s.PatientVisits(ctx, p.ID)
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, v := range vs {
		got = append(got, v.Visit.Date)
	}
	if want := []string{"2021-05-02", "2022-05-30", "2023-06-01"}; !reflect.DeepEqual(got, want) {
		t.Errorf("dates = %v, want %v", got, want)
	}
	all, err := s.AllVisitRecords(ctx, metrics.PDRFrequency)
	if err != nil {
		t.Fatal(err)
	}
	if len(all) != 2 || all[0].Patient.Code != "MC-0001" || len(all[1].Visits) != 3 {
		t.Fatalf("cohort = %d patients", len(all))
	}
	for _, v := range all[1].Visits {
		for _, m := range v.Markers {
			if m.Name != metrics.PDRFrequency {
				t.Errorf("marker filter let %s through", m.Name)
			}
		}
		if len(v.Markers) != 6 { // 3 regions × 2 states in sampleAnalysis
			t.Errorf("visit %s: %d pdr markers, want 6", v.Visit.Date, len(v.Markers))
		}
	}
	sums, err := s.Patients(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if len(sums) != 2 || sums[1].Visits != 3 || sums[1].FirstVisit != "2021-05-02" || sums[1].LastVisit != "2023-06-01" {
		t.Errorf("Patients = %+v", sums)
	}
}

func TestSaveVisitIsAllOrNothing(t *testing.T) {
	ctx := context.Background()
	tests := []struct {
		name  string
		spoil func(nv *NewVisit)
		want  error
	}{
		{"duplicate marker", func(nv *NewVisit) {
			m := nv.Analysis.Result.Markers
			nv.Analysis.Result.Markers = append(m, m[len(m)/2]) // fails late, after most rows
		}, nil},
		{"NaN marker", func(nv *NewVisit) { nv.Analysis.Result.Markers[3].Value = math.NaN() }, ErrInvalid},
		{"bad flag severity", func(nv *NewVisit) { nv.Analysis.Flags[0].Severity = "alarming" }, ErrInvalid},
		{"bad role", func(nv *NewVisit) { nv.Recordings[0].Role = "both" }, nil},
		{"bad sex", func(nv *NewVisit) { nv.Patient.Sex = "female" }, ErrInvalid},
		{"bad date", func(nv *NewVisit) { nv.Visit.Date = "2024-02-30" }, ErrInvalid},
		{"no recording", func(nv *NewVisit) { nv.Recordings = nil }, ErrInvalid},
		{"two files one role", func(nv *NewVisit) {
			nv.Recordings = append(nv.Recordings, Recording{SHA256: shaOf([]byte("z")), Format: "EDF", Size: 1, Role: RoleSingle})
		}, nil},
	}
	for _, tt := range tests {
		s := mustOpen(t)
		nv := sampleVisit("MC-0003", "2024-01-10", []byte("c"), 3)
		tt.spoil(&nv)
		_, err := s.SaveVisit(ctx, nv)
		if err == nil {
			t.Errorf("%s: SaveVisit succeeded", tt.name)
			continue
		}
		if tt.want != nil && !errors.Is(err, tt.want) {
			t.Errorf("%s: err = %v, want %v", tt.name, err, tt.want)
		}
		for table, n := range rowCounts(t, s) {
			if n != 0 {
				t.Errorf("%s: %d rows left in %s after a failed save (%v)", tt.name, n, table, err)
			}
		}
	}
}

func TestOneVisitPerPatientPerDay(t *testing.T) {
	ctx := context.Background()
	s := mustOpen(t)
	if _, err := s.SaveVisit(ctx, sampleVisit("MC-0004", "2024-01-10", []byte("d1"), 4)); err != nil {
		t.Fatal(err)
	}
	before := rowCounts(t, s)
	_, err := s.SaveVisit(ctx, sampleVisit("MC-0004", "2024-01-10", []byte("d2"), 5))
	if !errors.Is(err, ErrVisitExists) || !strings.Contains(err.Error(), "2024-01-10") {
		t.Errorf("second visit same day: err = %v, want ErrVisitExists naming the date", err)
	}
	if after := rowCounts(t, s); !reflect.DeepEqual(after, before) {
		t.Errorf("rows changed: %s -> %s", fmtCounts(before), fmtCounts(after))
	}
}

func TestUpsertPatientKeepsWhatIsKnown(t *testing.T) {
	ctx := context.Background()
	s := mustOpen(t)
	id, err := s.UpsertPatient(ctx, Patient{Code: "MC-0005", Sex: "M", BirthYear: 1944, Group: "control", Cohort: "south", FollowUpMonths: 6})
	if err != nil {
		t.Fatal(err)
	}
	id2, err := s.UpsertPatient(ctx, Patient{Code: "MC-0005", Cohort: "west"})
	if err != nil || id2 != id {
		t.Fatalf("second upsert: id %d, %v; want %d", id2, err, id)
	}
	p, _ := s.PatientByID(ctx, id)
	want := Patient{ID: id, Code: "MC-0005", Sex: "M", BirthYear: 1944, Group: "control", Cohort: "west", FollowUpMonths: 6}
	if p != want {
		t.Errorf("patient = %+v, want %+v", p, want)
	}
	if _, err := s.PatientByCode(ctx, "nobody"); !errors.Is(err, ErrNotFound) {
		t.Errorf("unknown code: %v", err)
	}
	for _, bad := range []Patient{{Code: ""}, {Code: " x"}, {Code: strings.Repeat("x", 65)}, {Code: "a", BirthYear: 45}, {Code: "a", BirthDate: "1950-13-01"}} {
		if _, err := s.UpsertPatient(ctx, bad); !errors.Is(err, ErrInvalid) {
			t.Errorf("UpsertPatient(%+v): err = %v, want ErrInvalid", bad, err)
		}
	}
}

func TestReplaceAnalysisAndSettings(t *testing.T) {
	ctx := context.Background()
	s := mustOpen(t)
	v1, _ := s.SaveVisit(ctx, sampleVisit("MC-0006", "2022-01-10", []byte("e1"), 6))
	v2, _ := s.SaveVisit(ctx, sampleVisit("MC-0006", "2023-01-10", []byte("e2"), 7))
	ids, err := s.VisitsWithOtherSettings(ctx, "v1", "4f2a")
	if err != nil || len(ids) != 0 {
		t.Fatalf("current settings: %v %v, want none", ids, err)
	}
	ids, _ = s.VisitsWithOtherSettings(ctx, "v2", "77aa")
	if !reflect.DeepEqual(ids, []int64{v1.ID, v2.ID}) {
		t.Fatalf("other settings = %v, want both", ids)
	}
	a := sampleAnalysis(99)
	a.Result.SettingsVersion, a.Result.SettingsHash = "v2", "77aa"
	a.Result.Markers = a.Result.Markers[:5]
	a.Flags = nil
	before := rowCounts(t, s)
	if err := s.ReplaceAnalysis(ctx, v1.ID, a); err != nil {
		t.Fatal(err)
	}
	got, _ := s.Visit(ctx, v1.ID)
	if got.SettingsVersion != "v2" || len(got.Markers) != 5 || len(got.Flags) != 0 || !reflect.DeepEqual(got.Markers, a.Result.Markers) {
		t.Errorf("after replace: version %s, %d markers, %d flags", got.SettingsVersion, len(got.Markers), len(got.Flags))
	}
	after := rowCounts(t, s)
	if after["visits"] != before["visits"] || after["recordings"] != before["recordings"] || after["conditions"] != before["conditions"] {
		t.Errorf("replace changed visits/recordings/conditions counts: %s -> %s", fmtCounts(before), fmtCounts(after))
	}
	ids, _ = s.VisitsWithOtherSettings(ctx, "v2", "77aa")
	if !reflect.DeepEqual(ids, []int64{v2.ID}) {
		t.Errorf("other settings after replace = %v, want [%d]", ids, v2.ID)
	}
	// A failing replacement keeps the old analysis whole.
	bad := sampleAnalysis(5)
	bad.Result.Markers = append(bad.Result.Markers, bad.Result.Markers[0])
	if err := s.ReplaceAnalysis(ctx, v2.ID, bad); err == nil {
		t.Error("replace with duplicate markers succeeded")
	}
	kept, _ := s.Visit(ctx, v2.ID)
	if len(kept.Markers) != len(sampleAnalysis(7).Result.Markers) || len(kept.Flags) != 1 {
		t.Errorf("failed replace lost rows: %d markers %d flags", len(kept.Markers), len(kept.Flags))
	}
	if err := s.ReplaceAnalysis(ctx, 12345, a); !errors.Is(err, ErrNotFound) {
		t.Errorf("replace of unknown visit: %v", err)
	}
}

func TestConcurrentSavesAndReads(t *testing.T) {
	// Short in-process version of the 20 s test of package intake: 8
	// writers and 8 readers on one store; no "database is locked".
	ctx := context.Background()
	s := mustOpen(t)
	var wg sync.WaitGroup
	errs := make(chan error, 64)
	for w := 0; w < 8; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			for i := 0; i < 10; i++ {
				code := "MC-C" + string(rune('A'+w))
				date := "2020-01-" + string(rune('1'+i/9)) + string(rune('0'+i%9+1))
				if _, err := s.SaveVisit(ctx, sampleVisit(code, date, []byte(code+date), uint64(i))); err != nil {
					errs <- err
					return
				}
			}
		}(w)
	}
	stop := make(chan struct{})
	var rg sync.WaitGroup
	for r := 0; r < 8; r++ {
		rg.Add(1)
		go func() {
			defer rg.Done()
			for {
				select {
				case <-stop:
					return
				default:
				}
				if _, err := s.AllVisitRecords(ctx, metrics.PDRFrequency); err != nil {
					errs <- err
					return
				}
			}
		}()
	}
	wg.Wait()
	close(stop)
	rg.Wait()
	close(errs)
	for err := range errs {
		t.Error(err)
	}
	if n := rowCounts(t, s)["visits"]; n != 80 {
		t.Errorf("visits = %d, want 80", n)
	}
}

func TestAgeAt(t *testing.T) {
	tests := []struct {
		p     Patient
		date  string
		want  float64
		known bool
		err   bool
	}{
		{Patient{BirthDate: "1950-03-05"}, "2020-03-05", 25568 / daysPerYear, true, false},
		{Patient{BirthYear: 1950}, "1950-07-01", 0, true, false},
		{Patient{BirthYear: 1950}, "1950-03-01", 0, true, false},
		{Patient{BirthYear: 1950}, "1951-07-01", 365 / daysPerYear, true, false},
		{Patient{}, "2020-01-01", 0, false, false},
		{Patient{BirthDate: "1950-03-05"}, "1950-03-04", 0, false, true},
		{Patient{BirthYear: 1950}, "20-01-01", 0, false, true},
	}
	for _, tt := range tests {
		got, known, err := AgeAt(tt.p, tt.date)
		if (err != nil) != tt.err || known != tt.known || math.Abs(got-tt.want) > 1e-12 {
			t.Errorf("AgeAt(%+v, %s) = %v %v %v, want %v %v err %v", tt.p, tt.date, got, known, err, tt.want, tt.known, tt.err)
		}
	}
}

func TestMarkerStatesSurvive(t *testing.T) {
	ctx := context.Background()
	s := mustOpen(t)
	nv := sampleVisit("MC-0007", "2024-05-05", []byte("f"), 8)
	nv.Analysis.Result.Markers = append(nv.Analysis.Result.Markers,
		metrics.Marker{Name: metrics.DrowsinessIndex, Region: metrics.RegionPosterior, State: ingest.EyesUnknown, Value: 0.2, Unit: "", Computable: true})
	v, err := s.SaveVisit(ctx, nv)
	if err != nil {
		t.Fatal(err)
	}
	got, _ := s.Visit(ctx, v.ID)
	last := got.Markers[len(got.Markers)-1]
	if last.State != ingest.EyesUnknown || last.Name != metrics.DrowsinessIndex {
		t.Errorf("last marker = %+v", last)
	}
}

// GroupVisitRecords reads only the patients of the group, matched as
// clinic.Patient.IsControl matches (case and surrounding spaces ignored),
// with all their visits and markers.
func TestGroupVisitRecords(t *testing.T) {
	ctx := context.Background()
	s := mustOpen(t)
	for i, tt := range []struct{ code, group string }{
		{"MC-0003", "control"}, {"MC-0001", " Control "}, {"MC-0002", "patient"}, {"MC-0004", ""}, {"MC-0005", "controls"},
	} {
		for j, d := range []string{"2021-05-02", "2022-05-30"} {
			nv := sampleVisit(tt.code, d, []byte(tt.code+d), uint64(10*i+j))
			nv.Patient.Group = tt.group
			if _, err := s.SaveVisit(ctx, nv); err != nil {
				t.Fatal(err)
			}
		}
	}
	got, err := s.GroupVisitRecords(ctx, "control")
	if err != nil {
		t.Fatal(err)
	}
	var codes []string
	for _, pc := range got {
		codes = append(codes, pc.Patient.Code)
		if !pc.Patient.IsControl() {
			t.Errorf("%s: group %q is not a control", pc.Patient.Code, pc.Patient.Group)
		}
		if len(pc.Visits) != 2 || pc.Visits[0].Visit.Date != "2021-05-02" {
			t.Errorf("%s: %d visits", pc.Patient.Code, len(pc.Visits))
		}
		for _, v := range pc.Visits {
			if v.Visit.PatientID != pc.Patient.ID || len(v.Markers) != len(sampleAnalysis(0).Result.Markers) {
				t.Errorf("%s %s: patient %d, %d markers", pc.Patient.Code, v.Visit.Date, v.Visit.PatientID, len(v.Markers))
			}
		}
	}
	if want := []string{"MC-0001", "MC-0003"}; !reflect.DeepEqual(codes, want) {
		t.Errorf("controls %v, want %v", codes, want)
	}
	if none, err := s.GroupVisitRecords(ctx, "volunteer"); err != nil || len(none) != 0 {
		t.Errorf("no such group: %d patients, %v", len(none), err)
	}
}

// The group stamp moves with every change GroupVisitRecords would show, and
// only with those.
func TestGroupStamp(t *testing.T) {
	ctx := context.Background()
	s := mustOpen(t)
	stamp := func() string {
		t.Helper()
		st, err := s.GroupStamp(ctx, "control")
		if err != nil {
			t.Fatal(err)
		}
		return st
	}
	empty := stamp()
	save := func(code, group, date string, seed uint64) int64 {
		t.Helper()
		nv := sampleVisit(code, date, []byte(code+date), seed)
		nv.Patient.Group = group
		v, err := s.SaveVisit(ctx, nv)
		if err != nil {
			t.Fatal(err)
		}
		return v.ID
	}
	id := save("MC-0001", "control", "2021-05-02", 1)
	one := stamp()
	if one == empty {
		t.Error("a control's first visit left the stamp alone")
	}
	save("MC-0002", "patient", "2021-05-02", 2)
	if stamp() != one {
		t.Error("a patient's visit moved the controls' stamp")
	}
	save("MC-0001", "control", "2022-05-02", 3)
	two := stamp()
	if two == one {
		t.Error("a control's second visit left the stamp alone")
	}
	// A new analysis of a control's visit (reprocess) with other values.
	a := sampleAnalysis(7)
	a.Result.Markers[0].Value += 0.5
	if err := s.ReplaceAnalysis(ctx, id, a); err != nil {
		t.Fatal(err)
	}
	if stamp() == two {
		t.Error("a control's new analysis left the stamp alone")
	}
}
