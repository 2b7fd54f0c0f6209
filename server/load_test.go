package server

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io"
	"math/rand/v2"
	"net/http"
	"slices"
	"sync"
	"testing"
	"time"

	"longwave/metrics"
	"longwave/server/store"
	"longwave/trends"
)

// Load test figures (issue 6, point 8): 50 concurrent clients for 10 s on
// loopback against a patient of 40 visits and a cohort of 5,000 patients;
// zero errors; p95 under 50 ms for the patient course and under 300 ms for
// the cohort page (200 rows a page, filtered and sorted on the server).
const (
	loadClients        = 50
	loadDuration       = 10 * time.Second
	loadCohortPatients = 5000
	loadCourseVisits   = 40
	p95CourseLimit     = 50 * time.Millisecond
	p95CohortLimit     = 300 * time.Millisecond
	// loadMaxRequests bounds the run in count as well as in time.
	loadMaxRequests = 200_000
)

// templateRecord ingests one synthetic recording through the pipeline and
// returns its analysis as stored, to copy into the load data.
func templateRecord(t *testing.T, e *env) store.VisitRecord { return templateRecordB(t, e) }

func templateRecordB(t testing.TB, e *env) store.VisitRecord {
	t.Helper()
	out := e.ingestVisit(visitSpec{code: "LW-TEMPLATE", date: "2020-01-10", birthYear: 1952})
	v, err := e.st.Visit(context.Background(), out.VisitID)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

func fakeSHA(i int) string {
	h := sha256.Sum256([]byte(fmt.Sprintf("longwave load visit %d", i)))
	return hex.EncodeToString(h[:])
}

// loadVisit copies the template's analysis with the posterior rhythm moved
// by shift Hz and the other markers jittered by rng, and a flag on some.
func loadVisit(tpl store.VisitRecord, code string, birth int, date string, seq int, shift float64, rng *rand.Rand) store.NewVisit {
	ms := slices.Clone(tpl.Markers)
	for i := range ms {
		if !ms[i].Computable {
			continue
		}
		switch ms[i].Name {
		case metrics.PDRFrequency, metrics.PDRCentroid:
			ms[i].Value += shift
		default:
			ms[i].Value *= 1 + 0.05*(rng.Float64()-0.5)
		}
	}
	res := &metrics.Result{SettingsVersion: tpl.SettingsVersion, SettingsHash: tpl.SettingsHash,
		Conditions: tpl.Conditions, Quality: tpl.Quality, Markers: ms}
	var flags []metrics.Flag
	if rng.IntN(10) == 0 {
		flags = []metrics.Flag{{Rule: "drowsy", Severity: metrics.NotComparable, Reason: "drowsiness index 0.6 above 0.4", Source: "longwave design"}}
	}
	return store.NewVisit{
		Patient:    store.Patient{Code: code, BirthYear: birth, Sex: "F", Cohort: "load"},
		Visit:      store.Visit{Date: date},
		Recordings: []store.Recording{{SHA256: fakeSHA(seq), Format: "EDF+C", Size: 1 << 20, Role: store.RoleSingle}},
		Analysis:   store.Analysis{Result: res, Flags: flags},
	}
}

// buildLoadData inserts the 40-visit patient LW-LOAD40 and 5,000 cohort
// patients (1 to 4 annual visits each) directly through the store.
func buildLoadData(t *testing.T, e *env) { buildLoadDataVisits(t, e, 0, false) }

// buildLoadDataVisits is buildLoadData with every cohort patient given
// exactly perPatient annual visits (0: 1 to 4 at random) and, with
// display, the 40 visits carrying the template's spectra and traces as
// ingested visits do (the course page then overlays 40 spectra).
func buildLoadDataVisits(t *testing.T, e *env, perPatient int, display bool) {
	t.Helper()
	ctx := context.Background()
	tpl := templateRecord(t, e)
	var disp metrics.Display
	if display {
		var err error
		if disp, err = e.st.VisitDisplay(ctx, tpl.Visit.ID); err != nil {
			t.Fatal(err)
		}
	}
	rng := rand.New(rand.NewPCG(6, 40))
	seq := 0
	start := time.Now()
	base := time.Date(2005, 1, 10, 0, 0, 0, 0, time.UTC)
	for i := 0; i < loadCourseVisits; i++ {
		date := base.AddDate(0, 6*i, 0).Format(time.DateOnly)
		seq++
		nv := loadVisit(tpl, "LW-LOAD40", 1948, date, seq, -0.03*float64(i), rng)
		nv.Analysis.Result.Display = disp
		if _, err := e.st.SaveVisit(ctx, nv); err != nil {
			t.Fatalf("save visit %d: %v", i, err)
		}
	}
	// Cohort patients carry the markers the cohort shows (the store loads
	// only those for it), which keeps the set-up to seconds.
	small := tpl
	small.Markers = nil
	for _, m := range tpl.Markers {
		for _, ref := range trends.DefaultMainMarkers() {
			if m.Name == ref.Marker {
				small.Markers = append(small.Markers, m)
				break
			}
		}
	}
	patients := loadCohortPatients
	if raceEnabled {
		patients = loadCohortPatients / 10 // the race detector slows inserts 5–10 times
	}
	for p := 0; p < patients; p++ {
		code := fmt.Sprintf("HM-%05d", p)
		n := 1 + rng.IntN(4)
		if perPatient > 0 {
			n = perPatient
		}
		first := time.Date(2019+rng.IntN(4), time.Month(1+rng.IntN(12)), 1+rng.IntN(28), 0, 0, 0, 0, time.UTC)
		for k := 0; k < n; k++ {
			seq++
			date := first.AddDate(k, 0, rng.IntN(40)).Format(time.DateOnly)
			if _, err := e.st.SaveVisit(ctx, loadVisit(small, code, 1940+rng.IntN(30), date, seq, -0.1*float64(k)*rng.Float64(), rng)); err != nil {
				t.Fatalf("save %s visit %d: %v", code, k, err)
			}
		}
	}
	t.Logf("load data: %d visits inserted in %v", seq, time.Since(start).Round(time.Millisecond))
}

type sample struct {
	page string
	d    time.Duration
	err  error
}

// TestLoad runs the clients and checks the figures.
func TestLoad(t *testing.T) {
	if testing.Short() {
		t.Skip("load test: 10 s of requests plus data set-up; skipped with -short")
	}
	e := newEnv(t, "", Config{})
	buildLoadData(t, e)
	ctx := context.Background()
	var users []store.User
	for _, name := range []string{coordinatorName} {
		us, _ := e.st.Users(ctx)
		for _, u := range us {
			if u.Name == name {
				users = append(users, u)
			}
		}
	}
	tr := &http.Transport{MaxIdleConns: loadClients * 2, MaxIdleConnsPerHost: loadClients * 2}
	defer tr.CloseIdleConnections()
	hc := &http.Client{Transport: tr, Timeout: 30 * time.Second,
		CheckRedirect: func(*http.Request, []*http.Request) error { return http.ErrUseLastResponse }}
	tokens := make([]string, loadClients)
	for i := range tokens {
		tok, _, err := e.st.CreateSession(ctx, users[0], time.Hour)
		if err != nil {
			t.Fatal(err)
		}
		tokens[i] = tok
	}
	pages := map[string]string{
		"course": e.http.URL + "/patients/LW-LOAD40",
		"cohort": e.http.URL + "/cohort?sort=-overdue",
	}
	// Warm the cohort once, as a running service would be.
	for _, u := range pages {
		req, _ := http.NewRequest(http.MethodGet, u, nil)
		req.AddCookie(&http.Cookie{Name: sessionCookie, Value: tokens[0]})
		res, err := hc.Do(req)
		if err != nil || res.StatusCode != http.StatusOK {
			t.Fatalf("warm-up %s: %v %v", u, err, res)
		}
		io.Copy(io.Discard, res.Body)
		res.Body.Close()
	}
	var (
		mu      sync.Mutex
		samples []sample
		count   int
	)
	duration := loadDuration
	if raceEnabled {
		duration = loadDuration / 3
		t.Logf("race detector on: %d cohort patients, %v of load, latency limits not enforced", loadCohortPatients/10, duration)
	}
	deadline := time.Now().Add(duration)
	var wg sync.WaitGroup
	for c := 0; c < loadClients; c++ {
		wg.Add(1)
		go func(c int) {
			defer wg.Done()
			for k := 0; time.Now().Before(deadline); k++ {
				mu.Lock()
				if count >= loadMaxRequests {
					mu.Unlock()
					return
				}
				count++
				mu.Unlock()
				page := "course"
				if (c+k)%2 == 1 {
					page = "cohort"
				}
				req, _ := http.NewRequest(http.MethodGet, pages[page], nil)
				req.AddCookie(&http.Cookie{Name: sessionCookie, Value: tokens[c]})
				t0 := time.Now()
				res, err := hc.Do(req)
				if err == nil {
					_, err = io.Copy(io.Discard, res.Body)
					res.Body.Close()
					if err == nil && res.StatusCode != http.StatusOK {
						err = fmt.Errorf("status %d", res.StatusCode)
					}
				}
				d := time.Since(t0)
				mu.Lock()
				samples = append(samples, sample{page, d, err})
				mu.Unlock()
			}
		}(c)
	}
	wg.Wait()
	for _, page := range []string{"course", "cohort"} {
		var ds []time.Duration
		errs := 0
		for _, s := range samples {
			if s.page != page {
				continue
			}
			if s.err != nil {
				errs++
				if errs <= 3 {
					t.Errorf("%s: %v", page, s.err)
				}
				continue
			}
			ds = append(ds, s.d)
		}
		slices.Sort(ds)
		if len(ds) == 0 {
			t.Fatalf("%s: no successful request", page)
		}
		p := func(q float64) time.Duration { return ds[min(len(ds)-1, int(q*float64(len(ds))))] }
		t.Logf("%s page: %d requests, %d errors, %.0f req/s, p50 %v, p95 %v, p99 %v, max %v", page, len(ds)+errs, errs,
			float64(len(ds))/duration.Seconds(), p(0.5).Round(time.Microsecond), p(0.95).Round(time.Microsecond),
			p(0.99).Round(time.Microsecond), ds[len(ds)-1].Round(time.Microsecond))
		if errs > 0 {
			t.Errorf("%s: %d errors, want 0", page, errs)
		}
		limit := p95CourseLimit
		if page == "cohort" {
			limit = p95CohortLimit
		}
		if raceEnabled {
			continue // the race detector slows Go code 5–10 times
		}
		if p(0.95) > limit {
			t.Errorf("%s: p95 %v over the limit %v", page, p(0.95), limit)
		}
	}
}
