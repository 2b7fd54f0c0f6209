package server

// All use of gorilla/mux is in this file (STYLE.md, "Settled for longwave"):
// the route table, path variables, and the walk the security test makes.

import (
	"net/http"
	"net/url"
	"strings"

	"github.com/gorilla/mux"
)

// route is one entry of the route table.
type route struct {
	name   string
	method string
	path   string
	perm   permission
	h      http.HandlerFunc
}

// routerInfo keeps the route table for the tests and for URL building.
type routerInfo struct {
	mux    *mux.Router
	routes []route
}

// table lists every route. Pages first, then the JSON API, then assets.
func (s *Server) table() []route {
	return []route{
		{"signin-form", http.MethodGet, "/signin", permPublic, s.signInForm},
		{"signin", http.MethodPost, "/signin", permPublic, s.signIn},
		{"signout", http.MethodPost, "/signout", permSignedIn, s.signOut},
		{"home", http.MethodGet, "/", permSignedIn, s.home},
		{"patients", http.MethodGet, "/patients", permView, s.patientsPage},
		{"course", http.MethodGet, "/patients/{code}", permView, s.coursePage},
		{"summary", http.MethodGet, "/patients/{code}/summary", permView, s.summaryPage},
		{"visit", http.MethodGet, "/visits/{id:[0-9]+}", permView, s.visitPage},
		{"cohort", http.MethodGet, "/cohort", permCohort, s.cohortPage},
		{"cohort-csv", http.MethodGet, "/cohort.csv", permExport, s.exportCSV},
		{"add-form", http.MethodGet, "/add", permAdd, s.uploadForm},
		{"add", http.MethodPost, "/add", permAdd, s.upload},
		{"sources", http.MethodGet, "/sources", permView, s.sourcesPage},
		{"users", http.MethodGet, "/users", permUsers, s.usersPage},
		{"users-add", http.MethodPost, "/users", permUsers, s.addUser},
		{"users-disable", http.MethodPost, "/users/{name}/disable", permUsers, s.disableUser},
		{"users-enable", http.MethodPost, "/users/{name}/enable", permUsers, s.enableUser},
		{"users-reset", http.MethodPost, "/users/{name}/reset", permUsers, s.resetUser},
		{"password-form", http.MethodGet, passwordURL, permSignedIn, s.passwordPage},
		{"password", http.MethodPost, passwordURL, permSignedIn, s.changePassword},

		{"api-patients", http.MethodGet, "/api/v1/patients", permView, s.apiPatients},
		{"api-course", http.MethodGet, "/api/v1/patients/{code}/course", permView, s.apiCourse},
		{"api-visit", http.MethodGet, "/api/v1/visits/{id:[0-9]+}", permView, s.apiVisit},
		{"api-traces", http.MethodGet, "/api/v1/visits/{id:[0-9]+}/traces", permView, s.apiVisitTraces},
		{"api-cohort", http.MethodGet, "/api/v1/cohort", permCohort, s.apiCohort},
		{"api-export", http.MethodGet, "/api/v1/export.csv", permExport, s.exportCSV},

		{"static", http.MethodGet, "/static/{hash:[0-9a-f]+}/{name:.+}", permPublic, s.static},
	}
}

// routes builds the router inside the security headers.
func (s *Server) routes() http.Handler {
	m := mux.NewRouter()
	m.StrictSlash(false)
	// Match on the escaped path so a patient code holding "/" (escaped as
	// %2F in our URLs) stays one path variable; pathVar unescapes.
	m.UseEncodedPath()
	table := s.table()
	for _, rt := range table {
		m.HandleFunc(rt.path, s.guard(rt.perm, rt.h)).Methods(rt.method).Name(rt.name)
	}
	m.NotFoundHandler = http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		s.fail(w, r, errNotFound)
	})
	m.MethodNotAllowedHandler = http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		s.fail(w, r, errNoMethod)
	})
	s.router = routerInfo{mux: m, routes: table}
	return s.securityHeaders(m)
}

// pathVar returns a path variable of the matched route.
func pathVar(r *http.Request, name string) string {
	v := mux.Vars(r)[name]
	if u, err := url.PathUnescape(v); err == nil {
		return u
	}
	return v
}

// isStatic reports a request for an asset (cached; other answers are not).
func isStatic(r *http.Request) bool { return strings.HasPrefix(r.URL.Path, "/static/") }

// static serves an embedded asset by content hash and name.
func (s *Server) static(w http.ResponseWriter, r *http.Request) {
	s.assets.ServeAsset(w, r, pathVar(r, "hash"), pathVar(r, "name"))
}

// walkedRoute is a route as the router's own table shows it.
type walkedRoute struct {
	Name, Path string
	Methods    []string
}

// walkRoutes lists the router's routes by walking it (mux.Router.Walk), so
// a test sees every route the router serves, not only the table above.
func (s *Server) walkRoutes() ([]walkedRoute, error) {
	var out []walkedRoute
	err := s.router.mux.Walk(func(rt *mux.Route, _ *mux.Router, _ []*mux.Route) error {
		path, err := rt.GetPathTemplate()
		if err != nil {
			return err
		}
		methods, _ := rt.GetMethods()
		out = append(out, walkedRoute{Name: rt.GetName(), Path: path, Methods: methods})
		return nil
	})
	return out, err
}
