package server

import (
	"net/http"
	"net/url"
	"strconv"

	"longwave/web"
)

// render writes a page with a status; a template error goes to the error
// exit before anything is written (web.Render writes only a whole page).
func (s *Server) render(w http.ResponseWriter, r *http.Request, status int, p web.Page) {
	hw := &headerOnWrite{w: w, status: status}
	if err := s.tpl.Render(hw, p); err != nil && !hw.wrote {
		s.fail(w, r, err)
	}
}

// headerOnWrite sends the content type, length and status with the first
// write (web.Render writes a page in one call, so its length is known).
type headerOnWrite struct {
	w      http.ResponseWriter
	status int
	wrote  bool
}

func (h *headerOnWrite) Write(b []byte) (int, error) {
	if !h.wrote {
		h.wrote = true
		h.w.Header().Set("Content-Type", "text/html; charset=utf-8")
		h.w.Header().Set("Content-Length", strconv.Itoa(len(b)))
		h.w.WriteHeader(h.status)
	}
	return h.w.Write(b)
}

// frame fills what every page shares from the request's session: the user,
// the CSRF token, and the top-bar links the role may follow.
func (s *Server) frame(r *http.Request, title, current string) web.Frame {
	f := web.Frame{Title: title}
	sess, ok := sessionFrom(r.Context())
	if !ok {
		return f
	}
	f.User, f.Role, f.CSRF = sess.User.Name, sess.User.Role, sess.CSRF
	links := []struct {
		label, url string
		perm       permission
	}{
		{"Patients", "/patients", permView},
		{"Cohort", "/cohort", permCohort},
		{"Add recording", "/add", permAdd},
		{"Reference sources", "/sources", permView},
		{"Users", "/users", permUsers},
	}
	for _, l := range links {
		if allowed(sess.User.Role, l.perm) {
			f.Nav = append(f.Nav, web.NavLink{Label: l.label, URL: l.url, Current: l.url == current})
		}
	}
	return f
}

// can reports whether the request's user holds p.
func can(r *http.Request, p permission) bool {
	sess, ok := sessionFrom(r.Context())
	return ok && allowed(sess.User.Role, p)
}

// Our URLs, built in one place.
func courseURL(code string) string  { return "/patients/" + url.PathEscape(code) }
func visitURL(id int64) string      { return "/visits/" + itoa(id) }
func summaryURL(code string) string { return courseURL(code) + "/summary" }
func addURL(code string) string {
	if code == "" {
		return "/add"
	}
	return "/add?patient=" + url.QueryEscape(code)
}
