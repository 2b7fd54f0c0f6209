package server

import (
	"encoding/json"
	"errors"
	"fmt"
	"net/http"
	"strings"

	"longwave/web"
)

// appError is an error meant for people: a status code and a message that
// may be shown as it is. Every other error is logged with its cause and
// shown as a fixed "internal error" text (STYLE.md habit 5: one HTTP error
// exit; error strings, paths and SQL never reach a page).
type appError struct {
	status int
	msg    string
	cause  error // logged, never shown
}

func (e *appError) Error() string {
	if e.cause != nil {
		return fmt.Sprintf("server: %d %s: %v", e.status, e.msg, e.cause)
	}
	return fmt.Sprintf("server: %d %s", e.status, e.msg)
}

func (e *appError) Unwrap() error { return e.cause }

// problem makes an appError.
func problem(status int, msg string) error { return &appError{status: status, msg: msg} }

// Common problems.
var (
	errSignInNeeded = problem(http.StatusUnauthorized, "sign in first")
	errForbidden    = problem(http.StatusForbidden, "your role does not allow this")
	errBadCSRF      = problem(http.StatusForbidden, "the form has expired or did not come from longwave; reload the page and try again")
	errNotFound     = problem(http.StatusNotFound, "no such page")
	errNoMethod     = problem(http.StatusMethodNotAllowed, "method not allowed here")
)

// internalText is all a person sees of an unexpected error.
const internalText = "internal error: the service could not answer; the cause is in its log"

// wantsJSON reports whether the answer should be JSON: API paths, and
// requests (the upload script's XHR) that ask for it.
func wantsJSON(r *http.Request) bool {
	return strings.HasPrefix(r.URL.Path, "/api/") || strings.Contains(r.Header.Get("Accept"), "application/json")
}

// jsonError is the body of every API error.
type jsonError struct {
	Error string `json:"error"`
}

// fail is the one error exit of every handler.
func (s *Server) fail(w http.ResponseWriter, r *http.Request, err error) {
	status, msg := http.StatusInternalServerError, internalText
	var ae *appError
	if errors.As(err, &ae) {
		status, msg = ae.status, ae.msg
		if ae.cause != nil && status >= 500 {
			s.logError(r, ae.cause)
		}
	} else {
		s.logError(r, err)
	}
	if wantsJSON(r) {
		writeJSON(w, status, jsonError{Error: msg})
		return
	}
	page := &web.ErrorPage{Frame: s.frame(r, titleFor(status), ""), Status: status, Message: msg}
	w.Header().Set("Content-Type", "text/html; charset=utf-8")
	w.WriteHeader(status)
	if err := s.tpl.Render(w, page); err != nil {
		s.logError(r, err)
	}
}

func (s *Server) logError(r *http.Request, err error) {
	user := ""
	if sess, ok := sessionFrom(r.Context()); ok {
		user = sess.User.Name
	}
	s.log.Error("request failed", "method", r.Method, "path", r.URL.Path, "user", user, "cause", err.Error())
}

func titleFor(status int) string {
	switch status {
	case http.StatusUnauthorized:
		return "Sign-in needed"
	case http.StatusForbidden:
		return "Not allowed"
	case http.StatusNotFound:
		return "Not found"
	case http.StatusRequestEntityTooLarge:
		return "File too large"
	case http.StatusBadRequest:
		return "Cannot use this request"
	case http.StatusMethodNotAllowed:
		return "Method not allowed"
	default:
		return "Something went wrong"
	}
}

// writeJSON writes v as JSON (encoding/json escapes <, > and &).
func writeJSON(w http.ResponseWriter, status int, v any) {
	b, err := json.Marshal(v)
	if err != nil {
		status = http.StatusInternalServerError
		b = []byte(`{"error":"internal error"}`)
	}
	w.Header().Set("Content-Type", "application/json; charset=utf-8")
	w.WriteHeader(status)
	_, _ = w.Write(b)
	_, _ = w.Write([]byte("\n"))
}
