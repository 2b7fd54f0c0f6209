package server

import (
	"crypto/subtle"
	"net/http"
	"strings"
)

// csrfHeader carries the CSRF token of script requests (the upload XHR);
// forms carry it in the hidden field csrfField.
const (
	csrfHeader = "X-CSRF-Token"
	csrfField  = "csrf"
)

// unsafeMethod reports whether a method changes state and so needs a token.
func unsafeMethod(m string) bool {
	return m != http.MethodGet && m != http.MethodHead && m != http.MethodOptions
}

// sameToken compares two tokens in constant time; empty never matches.
func sameToken(a, b string) bool {
	if a == "" || b == "" {
		return false
	}
	return subtle.ConstantTimeCompare([]byte(a), []byte(b)) == 1
}

// isMultipart reports a multipart body, whose token the upload handler
// reads from the first part itself (so the guard does not buffer the file).
func isMultipart(r *http.Request) bool {
	return strings.HasPrefix(r.Header.Get("Content-Type"), "multipart/form-data")
}

// csrfOK checks the token of a state-changing request against the
// session's: the header, or the form field of a URL-encoded form. A
// multipart request without the header is left to its handler
// (csrfDeferred), which must check the first part.
func csrfOK(r *http.Request, want string) (ok, deferred bool) {
	if got := r.Header.Get(csrfHeader); got != "" {
		return sameToken(got, want), false
	}
	if isMultipart(r) {
		return false, true
	}
	r.Body = http.MaxBytesReader(nil, r.Body, formLimit)
	if err := r.ParseForm(); err != nil {
		return false, false
	}
	return sameToken(r.PostForm.Get(csrfField), want), false
}

// formLimit bounds a URL-encoded form (sign-in, users): 64 KiB.
const formLimit = 64 << 10
