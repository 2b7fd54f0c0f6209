package server

import (
	"context"
	"io"
	"math/rand/v2"
	"net/http"
	"net/http/httptest"
	"path/filepath"
	"testing"
	"time"
)

// BenchmarkCoursePage renders the course of a 40-visit patient through the
// whole handler (session lookup, store, trends, template).
func BenchmarkCoursePage(b *testing.B) {
	e := newEnv(b, "", Config{})
	tpl := templateRecordB(b, e)
	rng := rand.New(rand.NewPCG(6, 40))
	base := time.Date(2005, 1, 10, 0, 0, 0, 0, time.UTC)
	for i := 0; i < loadCourseVisits; i++ {
		if _, err := e.st.SaveVisit(context.Background(), loadVisit(tpl, "LW-LOAD40", 1948, base.AddDate(0, 6*i, 0).Format(time.DateOnly), i+1, -0.03*float64(i), rng)); err != nil {
			b.Fatal(err)
		}
	}
	us, _ := e.st.Users(context.Background())
	tok, _, _ := e.st.CreateSession(context.Background(), us[0], time.Hour)
	h := e.srv.Handler()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		req := httptest.NewRequest(http.MethodGet, "/patients/LW-LOAD40", nil)
		req.AddCookie(&http.Cookie{Name: sessionCookie, Value: tok})
		w := httptest.NewRecorder()
		h.ServeHTTP(w, req)
		if w.Code != http.StatusOK {
			b.Fatalf("status %d", w.Code)
		}
		io.Discard.Write(w.Body.Bytes())
	}
}

// BenchmarkColdCoursePage times the first course page of a 40-visit patient
// (with the spectra and traces an ingest stores) after a restart: every
// iteration opens the store again and starts a new service on it, so no
// cache of ours is warm.
func BenchmarkColdCoursePage(b *testing.B) {
	dir := b.TempDir()
	e := newEnv(b, dir, Config{})
	ctx := context.Background()
	tpl := templateRecordB(b, e)
	disp, err := e.st.VisitDisplay(ctx, tpl.Visit.ID)
	if err != nil {
		b.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(6, 40))
	base := time.Date(2005, 1, 10, 0, 0, 0, 0, time.UTC)
	for i := 0; i < loadCourseVisits; i++ {
		nv := loadVisit(tpl, "LW-LOAD40", 1948, base.AddDate(0, 6*i, 0).Format(time.DateOnly), i+1, -0.03*float64(i), rng)
		nv.Analysis.Result.Display = disp
		if _, err := e.st.SaveVisit(ctx, nv); err != nil {
			b.Fatal(err)
		}
	}
	e.st.Close()
	path := filepath.Join(dir, "longwave.db")
	b.ResetTimer()
	for b.Loop() {
		b.StopTimer()
		srv, st, tok := restart(b, path)
		b.StartTimer()
		timedGet(b, srv.Handler(), tok, "/patients/LW-LOAD40")
		b.StopTimer()
		st.Close()
		b.StartTimer()
	}
}
