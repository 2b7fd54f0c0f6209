package server

import (
	"context"
	"io"
	"math/rand/v2"
	"net/http"
	"net/http/httptest"
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
