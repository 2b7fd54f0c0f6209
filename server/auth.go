package server

import (
	"context"
	"crypto/rand"
	"encoding/base64"
	"errors"
	"net/http"
	"net/url"
	"strings"
	"time"

	"longwave/server/store"
	"longwave/web"
)

// permission is what a route needs.
type permission int

const (
	permPublic   permission = iota // sign-in form and static assets only
	permSignedIn                   // any signed-in user (start page, sign-out)
	permView                       // patients, courses, visits, reference sources
	permAdd                        // add recordings
	permCohort                     // the cohort follow-up
	permExport                     // CSV export
	permUsers                      // users and the audit log
)

func (p permission) String() string {
	return [...]string{"public", "signed in", "view", "add recordings", "cohort", "export", "users"}[p]
}

// roleMatrix says which role holds which permission:
//
//	permission      clinician  coordinator  admin
//	view            yes        yes          yes
//	add recordings  yes        no           yes
//	cohort          no         yes          yes
//	export          no         yes          yes
//	users, audit    no         no           yes
//
// The admin holds every permission so that a small clinic can run with one
// account; coordinators see patients and courses because the cohort links
// to them, but do not add recordings (the clinic's clinicians do).
var roleMatrix = map[string]map[permission]bool{
	store.RoleClinician:   {permSignedIn: true, permView: true, permAdd: true},
	store.RoleCoordinator: {permSignedIn: true, permView: true, permCohort: true, permExport: true},
	store.RoleAdmin:       {permSignedIn: true, permView: true, permAdd: true, permCohort: true, permExport: true, permUsers: true},
}

// allowed reports whether role holds p.
func allowed(role string, p permission) bool {
	return p == permPublic || roleMatrix[role][p]
}

// Growing sign-in delay: after n failed sign-ins for a user name or from a
// client address (whichever is larger), the next attempt waits
// 250 ms · 2^(n−1), at most 8 s; counts reset after a success for the name
// and address, or 15 minutes after the last failure.
const (
	delayBase   = 250 * time.Millisecond
	delayMax    = 8 * time.Second
	delayWindow = 15 * time.Minute
)

// signInDelay returns the wait before an attempt after n failures.
func signInDelay(n int) time.Duration {
	if n <= 0 {
		return 0
	}
	if n > 10 {
		return delayMax
	}
	d := delayBase << (n - 1)
	return min(d, delayMax)
}

// guard wraps a handler with sign-in, role and CSRF checks. Pages send an
// anonymous visitor to the sign-in form; the API answers 401.
func (s *Server) guard(p permission, h http.HandlerFunc) http.HandlerFunc {
	if p == permPublic {
		return h
	}
	return func(w http.ResponseWriter, r *http.Request) {
		sess, _, err := s.lookupSession(r)
		if err != nil {
			if !isNoSession(err) {
				s.fail(w, r, err)
				return
			}
			if wantsJSON(r) || r.Method != http.MethodGet {
				s.fail(w, r, errSignInNeeded)
				return
			}
			http.Redirect(w, r, "/signin?next="+url.QueryEscape(r.URL.RequestURI()), http.StatusSeeOther)
			return
		}
		ctx := context.WithValue(r.Context(), sessionKey, sess)
		r = r.WithContext(ctx)
		if !allowed(sess.User.Role, p) {
			s.fail(w, r, errForbidden)
			return
		}
		if unsafeMethod(r.Method) {
			ok, deferred := csrfOK(r, sess.CSRF)
			if !ok && !deferred {
				s.fail(w, r, errBadCSRF)
				return
			}
			if deferred {
				r = r.WithContext(context.WithValue(r.Context(), csrfPendingKey, true))
			}
		}
		h(w, r)
	}
}

const csrfPendingKey ctxKey = 2

// csrfPending reports whether the handler must check the token itself (a
// multipart body without the header).
func csrfPending(r *http.Request) bool {
	v, _ := r.Context().Value(csrfPendingKey).(bool)
	return v
}

// signInForm shows the sign-in form with a fresh pre-session token.
func (s *Server) signInForm(w http.ResponseWriter, r *http.Request) {
	if _, _, err := s.lookupSession(r); err == nil {
		http.Redirect(w, r, "/", http.StatusSeeOther)
		return
	}
	s.renderSignIn(w, r, http.StatusOK, "", "")
}

func (s *Server) renderSignIn(w http.ResponseWriter, r *http.Request, status int, name, msg string) {
	token, err := newFormToken()
	if err != nil {
		s.fail(w, r, err)
		return
	}
	s.setCookie(w, formCookie, token, "/signin", s.now().Add(time.Hour))
	page := &web.SignInPage{
		Frame:     web.Frame{Title: "Sign in"},
		Name:      name,
		Next:      safeNext(r.FormValue("next")),
		Error:     msg,
		FormToken: token,
	}
	s.render(w, r, status, page)
}

func newFormToken() (string, error) {
	b := make([]byte, 32)
	if _, err := rand.Read(b); err != nil {
		return "", err
	}
	return base64.RawURLEncoding.EncodeToString(b), nil
}

// safeNext keeps a post-sign-in target only when it is a path on this
// host ("/..." but not "//..." or "/\...").
func safeNext(next string) string {
	if !strings.HasPrefix(next, "/") || strings.HasPrefix(next, "//") || strings.HasPrefix(next, "/\\") ||
		strings.ContainsAny(next, "\r\n") {
		return ""
	}
	return next
}

// signIn checks the form, waits the growing delay, checks the password and
// starts a session. Every attempt is audited.
func (s *Server) signIn(w http.ResponseWriter, r *http.Request) {
	r.Body = http.MaxBytesReader(w, r.Body, formLimit)
	if err := r.ParseForm(); err != nil {
		s.fail(w, r, problem(http.StatusBadRequest, "the sign-in form could not be read"))
		return
	}
	c, err := r.Cookie(formCookie)
	if err != nil || !sameToken(r.PostForm.Get(csrfField), c.Value) {
		s.fail(w, r, errBadCSRF)
		return
	}
	ctx := r.Context()
	name := strings.TrimSpace(r.PostForm.Get("name"))
	password := r.PostForm.Get("password")
	addr := clientAddr(r)
	if len(name) > store.MaxUserName {
		name = name[:store.MaxUserName]
	}
	n, err := s.st.SignInFailures(ctx, name, addr, delayWindow)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	if err := s.sleep(ctx, signInDelay(n)); err != nil {
		return // the client went away
	}
	user, err := s.st.CheckPassword(ctx, name, password)
	if errors.Is(err, store.ErrBadCredentials) {
		if err := s.st.RecordSignInFailure(ctx, name, addr, delayWindow); err != nil {
			s.fail(w, r, err)
			return
		}
		if err := s.st.Audit(ctx, name, store.AuditSignInFailed, "", addr); err != nil {
			s.fail(w, r, err)
			return
		}
		s.renderSignIn(w, r, http.StatusUnauthorized, name, "Unknown user name or wrong password.")
		return
	}
	if err != nil {
		s.fail(w, r, err)
		return
	}
	if err := s.st.ClearSignInFailures(ctx, name, addr); err != nil {
		s.fail(w, r, err)
		return
	}
	token, sess, err := s.st.CreateSession(ctx, user, s.cfg.SessionTTL)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	if err := s.st.Audit(ctx, user.Name, store.AuditSignIn, "", addr); err != nil {
		s.fail(w, r, err)
		return
	}
	s.setCookie(w, sessionCookie, token, "/", sess.Expires)
	s.setCookie(w, formCookie, "", "/signin", time.Time{})
	next := safeNext(r.PostForm.Get("next"))
	if next == "" {
		next = "/"
	}
	http.Redirect(w, r, next, http.StatusSeeOther)
}

// signOut ends the session.
func (s *Server) signOut(w http.ResponseWriter, r *http.Request) {
	sess, token, err := s.lookupSession(r)
	if err == nil {
		s.sessions.forget(token)
		if err := s.st.DeleteSession(r.Context(), token); err != nil {
			s.fail(w, r, err)
			return
		}
		if err := s.st.Audit(r.Context(), sess.User.Name, store.AuditSignOut, "", clientAddr(r)); err != nil {
			s.fail(w, r, err)
			return
		}
	}
	s.setCookie(w, sessionCookie, "", "/", time.Time{})
	http.Redirect(w, r, "/signin", http.StatusSeeOther)
}

// home sends each role to its first screen.
func (s *Server) home(w http.ResponseWriter, r *http.Request) {
	sess, _ := sessionFrom(r.Context())
	if sess.User.Role == store.RoleCoordinator {
		http.Redirect(w, r, "/cohort", http.StatusSeeOther)
		return
	}
	http.Redirect(w, r, "/patients", http.StatusSeeOther)
}
