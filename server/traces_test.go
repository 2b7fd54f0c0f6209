package server

import (
	"context"
	"encoding/json"
	"net/http"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"longwave/ingest"
	"longwave/ingest/synth"
	"longwave/metrics"
	"longwave/server/intake"
	"longwave/server/store"
	"longwave/trends"
)

// tracesBody is the answer of the traces API as a script reads it.
type tracesBody struct {
	From       float64 `json:"from"`
	Seconds    float64 `json:"seconds"`
	SampleRate float64 `json:"sample_rate"`
	Montage    string  `json:"montage"`
	Filtered   bool    `json:"filtered"`
	Duration   float64 `json:"duration"`
	Channels   []struct {
		Label   string     `json:"label"`
		Bad     bool       `json:"bad"`
		Samples []*float64 `json:"samples"`
	} `json:"channels"`
	Windows []struct {
		Start, End float64
		Kept       bool   `json:"kept"`
		Reason     string `json:"reason"`
		ReasonText string `json:"reason_text"`
	} `json:"windows"`
	States []struct {
		Start, End float64
		State      string `json:"state"`
		StateText  string `json:"state_text"`
	} `json:"states"`
}

// fixtureVisitIDs returns the visit IDs of a fixture patient.
func fixtureVisitIDs(t *testing.T, c *client, code string) []int64 {
	t.Helper()
	status, body, _ := c.get("/api/v1" + courseURL(code) + "/course")
	if status != http.StatusOK {
		t.Fatalf("course of %s: %d", code, status)
	}
	var course trends.Course
	if err := json.Unmarshal([]byte(body), &course); err != nil {
		t.Fatal(err)
	}
	var ids []int64
	for _, v := range course.Visits {
		ids = append(ids, v.VisitID)
	}
	return ids
}

// TestTracesAPI pages through a fixture visit (150 s, 19 channels at
// 250 Hz, eyes closed 0–60 s and 90–140 s) in each montage and kind.
func TestTracesAPI(t *testing.T) {
	e := fixtureEnv(t)
	c := e.signedIn(clinicianName)
	id := fixtureVisitIDs(t, c, "LW-0101")[0]
	base := "/api/v1/visits/" + itoa(id) + "/traces"
	get := func(query string) tracesBody {
		t.Helper()
		status, body, res := c.get(base + query)
		if status != http.StatusOK {
			t.Fatalf("GET %s: %d %s", base+query, status, body)
		}
		if ct := res.Header.Get("Content-Type"); !strings.HasPrefix(ct, "application/json") {
			t.Errorf("content type %q", ct)
		}
		var tb tracesBody
		if err := json.Unmarshal([]byte(body), &tb); err != nil {
			t.Fatalf("GET %s: %v", base+query, err)
		}
		return tb
	}
	avg := get("")
	if avg.From != 0 || avg.Seconds != 10 || avg.Montage != "average" || !avg.Filtered || avg.Duration != 150 {
		t.Errorf("default page: from %g seconds %g montage %q filtered %v duration %g", avg.From, avg.Seconds, avg.Montage, avg.Filtered, avg.Duration)
	}
	if avg.SampleRate != 125 || len(avg.Channels) != 19 || avg.Channels[0].Label != "Fp1" || len(avg.Channels[0].Samples) != 1250 {
		t.Fatalf("filtered average: rate %g, %d rows, first %+v", avg.SampleRate, len(avg.Channels), avg.Channels[0].Label)
	}
	if len(avg.States) != 1 || avg.States[0].State != "closed" || avg.States[0].StateText != "eyes closed" {
		t.Errorf("states of 0–10 s: %+v", avg.States)
	}
	// 4 s windows from 2 s (the first 2 s after a change are skipped): 2, 6.
	if len(avg.Windows) < 2 || avg.Windows[0].Start != 2 || avg.Windows[0].End != 6 {
		t.Errorf("windows of 0–10 s: %+v", avg.Windows)
	}
	page := get("?from=55&seconds=10&montage=bipolar&filtered=1")
	if len(page.Channels) != len(metrics.BipolarPairs) || page.Channels[0].Label != "Fp1–F7" {
		t.Errorf("bipolar rows: %d, first %q", len(page.Channels), page.Channels[0].Label)
	}
	if len(page.States) != 2 || page.States[0].State != "closed" || page.States[1].State != "open" {
		t.Errorf("states of 55–65 s: %+v", page.States)
	}
	raw := get("?from=20&filtered=0")
	if raw.Filtered || raw.SampleRate != 200 || len(raw.Channels[0].Samples) != 2000 {
		t.Errorf("as recorded: filtered %v rate %g, %d points (250 Hz reduced to 2000 points per 10 s)", raw.Filtered, raw.SampleRate, len(raw.Channels[0].Samples))
	}
	last := get("?from=145")
	if n := len(last.Channels[0].Samples); last.Channels[0].Samples[n-1] != nil {
		t.Errorf("past the end of the recording: %v, want null", *last.Channels[0].Samples[n-1])
	}
	// Every window of the visit, paged through, is shown once per page it
	// touches; a rejected one carries its rule in words.
	rejected := 0
	for from := 0; from < 150; from += 10 {
		for _, w := range get("?from=" + strconv.Itoa(from)).Windows {
			if !w.Kept {
				rejected++
				if w.Reason == "" || w.ReasonText == "" || strings.Contains(w.ReasonText, "_") {
					t.Errorf("rejected window %+v: want a rule key and its words", w)
				}
			}
		}
	}
	t.Logf("rejected windows seen while paging: %d", rejected)

	log, err := e.st.AuditLog(context.Background(), 100)
	if err != nil {
		t.Fatal(err)
	}
	audited := 0
	for _, a := range log {
		if a.Action == store.AuditVisitView && strings.HasSuffix(a.Subject, "(traces)") && a.User == clinicianName {
			audited++
		}
	}
	if audited < 19 {
		t.Errorf("%d traces reads audited, want one per request (19)", audited)
	}
}

// TestTracesAPIRefuses checks the query validation, the unknown visit and
// the size bound.
func TestTracesAPIRefuses(t *testing.T) {
	e := fixtureEnv(t)
	c := e.signedIn(coordinatorName)
	id := fixtureVisitIDs(t, c, "LW-0101")[0]
	base := "/api/v1/visits/" + itoa(id) + "/traces"
	for _, tc := range []struct {
		query, want string
		status      int
	}{
		{"?from=-1", "from must be 0 or more", 400},
		{"?from=abc", "from must be a number", 400},
		{"?from=NaN", "from must be a number", 400},
		{"?from=1e400", "from must be a number", 400},
		{"?from=150", "past the end of the recording", 400},
		{"?seconds=0", "seconds must be from 1 to 60", 400},
		{"?seconds=61", "seconds must be from 1 to 60", 400},
		{"?montage=transverse", "montage must be average or bipolar", 400},
		{"?filtered=yes", "filtered must be 1", 400},
	} {
		status, body, _ := c.get(base + tc.query)
		var je jsonError
		_ = json.Unmarshal([]byte(body), &je)
		if status != tc.status || !strings.Contains(je.Error, tc.want) {
			t.Errorf("GET %s: %d %q, want %d with %q", tc.query, status, je.Error, tc.status, tc.want)
		}
	}
	if status, _, _ := c.get("/api/v1/visits/999999/traces"); status != http.StatusNotFound {
		t.Errorf("unknown visit: %d, want 404", status)
	}
	status, body, _ := c.get(base + "?seconds=60&filtered=0&montage=average")
	if status != http.StatusOK || len(body) > 2<<20 {
		t.Errorf("60 s as recorded: status %d, %d bytes (at most 2 MB)", status, len(body))
	}
}

// TestTracesMissingFile: a visit whose stored file has gone from the data
// folder answers 404 with the reason, not an internal error.
func TestTracesMissingFile(t *testing.T) {
	e := newEnv(t, "", Config{})
	out := e.ingestVisit(visitSpec{code: "LW-0102", date: "2024-05-06", birthYear: 1949})
	v, err := e.st.Visit(context.Background(), out.VisitID)
	if err != nil || len(v.Recordings) != 1 {
		t.Fatalf("visit: %v, %d recordings", err, len(v.Recordings))
	}
	path, err := e.st.StoredRecordingPath(context.Background(), v.Recordings[0].SHA256)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.Remove(path); err != nil {
		t.Fatal(err)
	}
	c := e.signedIn(clinicianName)
	status, body, _ := c.get("/api/v1/visits/" + itoa(out.VisitID) + "/traces")
	if status != http.StatusNotFound || !strings.Contains(body, "not in the data folder") {
		t.Errorf("missing file: %d %s, want 404 saying the file is not in the data folder", status, body)
	}
}

// TestTracesHostileLabels: the hostile fixture's channel labels reach the
// answer only as escaped JSON text.
func TestTracesHostileLabels(t *testing.T) {
	e := fixtureEnv(t)
	c := e.signedIn(adminName)
	id := fixtureVisitIDs(t, c, xssCode)[0]
	status, body, _ := c.get("/api/v1/visits/" + itoa(id) + "/traces")
	if status != http.StatusOK {
		t.Fatalf("status %d: %s", status, body)
	}
	if strings.ContainsAny(body, "<>") {
		t.Errorf("traces answer holds a raw < or >")
	}
	var tb tracesBody
	if err := json.Unmarshal([]byte(body), &tb); err != nil {
		t.Fatal(err)
	}
	var labels []string
	for _, ch := range tb.Channels {
		labels = append(labels, ch.Label)
	}
	t.Logf("rows of the hostile visit: %q", labels)
}

// TestTraceCacheBound: the cache keeps sources up to its byte limit,
// dropping the least recently used, and builds a visit once for
// concurrent requests.
func TestTraceCacheBound(t *testing.T) {
	e := fixtureEnv(t)
	c := e.signedIn(adminName)
	ids := fixtureVisitIDs(t, c, "LW-0101")
	for _, id := range ids[:2] {
		if status, _, _ := c.get("/api/v1/visits/" + itoa(id) + "/traces"); status != http.StatusOK {
			t.Fatalf("visit %d: %d", id, status)
		}
	}
	if n := e.srv.traces.len(); n != 2 {
		t.Errorf("cache holds %d visits, want 2", n)
	}
	e.srv.traces.mu.Lock()
	var one int64
	for _, en := range e.srv.traces.entries {
		one = en.bytes
	}
	e.srv.traces.limit = one + one/2 // room for one source only
	e.srv.traces.mu.Unlock()
	if status, _, _ := c.get("/api/v1/visits/" + itoa(ids[2]) + "/traces"); status != http.StatusOK {
		t.Fatal(status)
	}
	if n := e.srv.traces.len(); n != 1 {
		t.Errorf("after a third visit under a one-source limit the cache holds %d, want 1", n)
	}
}

// tracesYardstick ingests the speed yardstick's recording (30 minutes, 21
// channels: the 19 and two ear electrodes, 500 Hz) as one visit.
func tracesYardstick(tb testing.TB) (*env, int64) {
	tb.Helper()
	e := newEnv(tb, "", Config{})
	s := synth.Default()
	s.SampleRate = 500
	s.Duration = 1800
	s.Channels = append(append([]string(nil), ingest.Standard19[:]...), "A1", "A2")
	s.Periods = nil
	for t := 0.0; t < s.Duration; t += 120 {
		s.Periods = append(s.Periods, ingest.Period{State: ingest.EyesClosed, Start: t, End: t + 60},
			ingest.Period{State: ingest.EyesOpen, Start: t + 60, End: t + 120})
	}
	b, err := synth.Bytes(s)
	if err != nil {
		tb.Fatal(err)
	}
	path := filepath.Join(tb.TempDir(), "long.edf")
	if err := os.WriteFile(path, b, 0o600); err != nil {
		tb.Fatal(err)
	}
	out, err := e.pipe.IngestVisit(context.Background(), intake.Request{PatientCode: "LW-0300", Date: "2025-01-20",
		BirthYear: 1951, Sex: "M", Single: &intake.File{Path: path}})
	if err != nil {
		tb.Fatal(err)
	}
	return e, out.VisitID
}

// pageTimes requests n pages through the HTTP API, cycling through the
// montages and kinds and walking the recording, and returns the wall time
// of each answer (sorted) after the first, cold one.
func pageTimes(tb testing.TB, e *env, id int64, n int) (cold time.Duration, warm []time.Duration, maxBytes int) {
	tb.Helper()
	c := e.signedIn(clinicianName)
	base := "/api/v1/visits/" + itoa(id) + "/traces"
	for i := 0; i <= n; i++ {
		q := "?from=" + strconv.Itoa((i*10)%1790) + "&montage=" + []string{"average", "bipolar"}[i%2] + "&filtered=" + []string{"1", "0"}[(i/2)%2]
		t0 := time.Now()
		status, body, _ := c.get(base + q)
		d := time.Since(t0)
		if status != http.StatusOK {
			tb.Fatalf("GET %s: %d %s", q, status, body)
		}
		maxBytes = max(maxBytes, len(body))
		if i == 0 {
			cold = d
		} else {
			warm = append(warm, d)
		}
	}
	sort.Slice(warm, func(i, j int) bool { return warm[i] < warm[j] })
	return cold, warm, maxBytes
}

func quantile(ds []time.Duration, q float64) time.Duration {
	return ds[min(len(ds)-1, int(q*float64(len(ds))))]
}

// TestTracesSpeed holds the API to its budget on the yardstick recording:
// a page answers in under 150 ms at the 95th percentile, in at most 2 MB
// (issue 11, point 3). Timing: on a loaded machine it may fail for want of
// a core; rerun it alone.
func TestTracesSpeed(t *testing.T) {
	if testing.Short() {
		t.Skip("speed test skipped with -short")
	}
	e, id := tracesYardstick(t)
	cold, warm, maxBytes := pageTimes(t, e, id, 200)
	p50, p95 := quantile(warm, 0.5), quantile(warm, 0.95)
	t.Logf("first page (decode and analysis) %v; then p50 %v, p95 %v, max %v; largest answer %d bytes", cold, p50, p95, warm[len(warm)-1], maxBytes)
	if p95 >= 150*time.Millisecond {
		t.Errorf("p95 %v, want under 150 ms", p95)
	}
	if maxBytes > 2<<20 {
		t.Errorf("largest answer %d bytes, want at most 2 MB", maxBytes)
	}
	if !slices.IsSorted(warm) {
		t.Fatal("times not sorted")
	}
}

// BenchmarkTracesAPI reports the p50 and p95 wall time of a page of the
// yardstick recording through the HTTP API (sign-in cookie, audit entry,
// JSON), after the first page.
func BenchmarkTracesAPI(b *testing.B) {
	e, id := tracesYardstick(b)
	b.ResetTimer()
	_, warm, maxBytes := pageTimes(b, e, id, max(b.N, 100))
	b.ReportMetric(float64(quantile(warm, 0.5).Microseconds())/1000, "p50-ms")
	b.ReportMetric(float64(quantile(warm, 0.95).Microseconds())/1000, "p95-ms")
	b.ReportMetric(float64(maxBytes), "max-bytes")
}

// TestTraceCacheConcurrent: requests for one visit at once make one build
// and all get its source.
func TestTraceCacheConcurrent(t *testing.T) {
	e := fixtureEnv(t)
	c := e.signedIn(adminName)
	id := fixtureVisitIDs(t, c, "LW-0101")[1]
	v, err := e.st.Visit(context.Background(), id)
	if err != nil {
		t.Fatal(err)
	}
	var cache traceCache
	var builds atomic.Int32
	build := func(ctx context.Context) (*metrics.TraceSource, error) {
		builds.Add(1)
		return e.srv.traceBuilder(v)(ctx)
	}
	var wg sync.WaitGroup
	got := make([]*metrics.TraceSource, 8)
	for i := range got {
		wg.Add(1)
		go func(i int) {
			defer wg.Done()
			src, err := cache.get(context.Background(), v, build)
			if err != nil {
				t.Error(err)
			}
			got[i] = src
		}(i)
	}
	wg.Wait()
	if builds.Load() != 1 {
		t.Errorf("%d builds for one visit, want 1", builds.Load())
	}
	for i, src := range got {
		if src == nil || src != got[0] {
			t.Errorf("request %d got another source", i)
		}
	}
}
