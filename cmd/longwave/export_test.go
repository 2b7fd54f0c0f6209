package main

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"slices"
	"testing"

	"longwave/ingest"
	"longwave/metrics"
	"longwave/server/store"
)

// intervalCourses is an invented patient with a visit made without
// intervals (settings v1) and one with an interval on its PDR.
func intervalCourses() []store.PatientCourse {
	pdr := metrics.Marker{Name: metrics.PDRFrequency, Region: metrics.RegionPosterior, State: ingest.EyesClosed,
		Value: 9.42, Unit: metrics.UnitHz, Computable: true}
	withCI := pdr
	withCI.Value = 9.31
	withCI.Uncertainty = &metrics.Uncertainty{SE: 0.061, Low: 9.19, High: 9.43, Level: 0.95,
		Method: "percentile bootstrap over kept windows", Resamples: 1000}
	visit := func(id int64, date, version string, m metrics.Marker) store.VisitRecord {
		return store.VisitRecord{Visit: store.Visit{ID: id, PatientID: 1, Date: date, AgeYears: 71, AgeKnown: true},
			SettingsVersion: version, SettingsHash: "h" + version,
			Conditions: ingest.Conditions{SampleRate: 256, Equipment: "Amp-7", PeriodSource: ingest.FromAnnotations},
			Quality:    metrics.Quality{CleanSeconds: map[ingest.EyeState]float64{ingest.EyesClosed: 150}},
			Markers:    []metrics.Marker{m}}
	}
	return []store.PatientCourse{{
		Patient: store.Patient{ID: 1, Code: "RV-0031", Sex: "M", BirthYear: 1953},
		Visits:  []store.VisitRecord{visit(1, "2024-05-06", "1", pdr), visit(2, "2025-05-12", "2", withCI)},
	}}
}

func TestExportIntervalColumns(t *testing.T) {
	intervalCols := []string{"interval_se", "interval_low", "interval_high", "interval_level", "interval_method", "interval_resamples"}
	for _, deid := range []bool{false, true} {
		rows, err := exportRows(intervalCourses(), "2", "h2", deid)
		if err != nil {
			t.Fatal(err)
		}
		var b bytes.Buffer
		if err := writeCSV(&b, rows, deid); err != nil {
			t.Fatal(err)
		}
		recs, err := csv.NewReader(&b).ReadAll()
		if err != nil {
			t.Fatal(err)
		}
		if len(recs) != 3 {
			t.Fatalf("deid %v: %d records, want header and 2 rows", deid, len(recs))
		}
		col := map[string]int{}
		for i, h := range recs[0] {
			col[h] = i
		}
		for _, c := range intervalCols {
			if _, ok := col[c]; !ok {
				t.Fatalf("deid %v: no column %s in %v", deid, c, recs[0])
			}
		}
		if i := slices.Index(recs[0], "unit"); i < 0 || recs[0][i+1] != "interval_se" {
			t.Errorf("deid %v: interval columns do not follow unit: %v", deid, recs[0])
		}
		if _, ok := col["equipment"]; ok == deid {
			t.Errorf("deid %v: equipment column present %v", deid, ok)
		}
		// The v1 visit: every interval column empty, never a zero interval.
		for _, c := range intervalCols {
			if v := recs[1][col[c]]; v != "" {
				t.Errorf("deid %v: v1 visit %s = %q, want empty", deid, c, v)
			}
		}
		want := map[string]string{"value": "9.31", "interval_se": "0.061", "interval_low": "9.19", "interval_high": "9.43",
			"interval_level": "0.95", "interval_method": "percentile bootstrap over kept windows", "interval_resamples": "1000"}
		for c, w := range want {
			if got := recs[2][col[c]]; got != w {
				t.Errorf("deid %v: %s = %q, want %q", deid, c, got, w)
			}
		}
		if len(recs[1]) != len(recs[0]) || len(recs[2]) != len(recs[0]) {
			t.Errorf("deid %v: rows of %d and %d fields under a header of %d", deid, len(recs[1]), len(recs[2]), len(recs[0]))
		}

		js, err := json.Marshal(rows)
		if err != nil {
			t.Fatal(err)
		}
		var back []map[string]any
		if err := json.Unmarshal(js, &back); err != nil {
			t.Fatal(err)
		}
		if _, has := back[0]["uncertainty"]; has {
			t.Errorf("deid %v: JSON row of the v1 visit has an interval: %v", deid, back[0])
		}
		u, _ := back[1]["uncertainty"].(map[string]any)
		if u["low"] != 9.19 || u["high"] != 9.43 || u["level"] != 0.95 || u["resamples"] != 1000.0 || u["se"] != 0.061 ||
			u["method"] != "percentile bootstrap over kept windows" {
			t.Errorf("deid %v: JSON interval %v", deid, u)
		}
	}
}
