package server

import (
	"context"
	"errors"
	"net"
	"net/http"
	"sync"
	"time"

	"longwave/server/store"
)

// Cookie names.
const (
	sessionCookie = "lw_session"
	// formCookie carries the pre-session CSRF token of the sign-in form
	// (double submit: the cookie and the hidden field must match).
	formCookie = "lw_form"
)

type ctxKey int

const sessionKey ctxKey = 1

// sessionFrom returns the signed-in session of a request's context.
func sessionFrom(ctx context.Context) (store.Session, bool) {
	s, ok := ctx.Value(sessionKey).(store.Session)
	return s, ok
}

// sessionMemo is how long a session found in the store is believed without
// asking the store again. Sign-out, disabling a user, resetting a password
// and changing one's own password through the service forget it at once;
// a user disabled or reset from the command line (another process) loses
// access within it.
const sessionMemo = 2 * time.Second

// sessionMemoMax bounds the memo; past it the memo starts afresh.
const sessionMemoMax = 4096

type memoSession struct {
	sess  store.Session
	until time.Time
}

// sessionCache remembers recently checked sessions by cookie token.
//
// A request that read its session from the store just before a disable (or
// reset, or sign-out) ended it must not put it back into the memo after
// the forget: each forget moves the epoch on, and put keeps a session only
// when the epoch is still the one seen before the store was asked.
type sessionCache struct {
	mu    sync.Mutex
	m     map[string]memoSession
	epoch uint64
}

// begin returns the epoch to hand to put after asking the store.
func (c *sessionCache) begin() uint64 {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.epoch
}

func (c *sessionCache) get(token string, now time.Time) (store.Session, bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	e, ok := c.m[token]
	if !ok || !now.Before(e.until) || !now.Before(e.sess.Expires) {
		return store.Session{}, false
	}
	return e.sess, true
}

func (c *sessionCache) put(token string, sess store.Session, now time.Time, epoch uint64) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if epoch != c.epoch {
		return // something was forgotten since the store was asked
	}
	if c.m == nil || len(c.m) >= sessionMemoMax {
		c.m = map[string]memoSession{}
	}
	c.m[token] = memoSession{sess: sess, until: now.Add(sessionMemo)}
}

func (c *sessionCache) forget(token string) {
	c.mu.Lock()
	delete(c.m, token)
	c.epoch++
	c.mu.Unlock()
}

// forgetUser drops every remembered session of a user, so that the next
// request of any of them asks the store (after a disable, a reset or a
// password change ended them there). The memo is small (sessionMemoMax),
// so walking it is cheap.
func (c *sessionCache) forgetUser(id int64) {
	c.mu.Lock()
	for token, e := range c.m {
		if e.sess.User.ID == id {
			delete(c.m, token)
		}
	}
	c.epoch++
	c.mu.Unlock()
}

// lookupSession reads the session cookie and returns its live session.
func (s *Server) lookupSession(r *http.Request) (store.Session, string, error) {
	c, err := r.Cookie(sessionCookie)
	if err != nil || c.Value == "" {
		return store.Session{}, "", store.ErrNoSession
	}
	now := s.now()
	if sess, ok := s.sessions.get(c.Value, now); ok {
		return sess, c.Value, nil
	}
	epoch := s.sessions.begin()
	sess, err := s.st.SessionByToken(r.Context(), c.Value)
	if err != nil {
		return store.Session{}, "", err
	}
	s.sessions.put(c.Value, sess, now, epoch)
	return sess, c.Value, nil
}

// setCookie writes a cookie with longwave's attributes: HttpOnly,
// SameSite=Strict, Secure under TLS.
func (s *Server) setCookie(w http.ResponseWriter, name, value, path string, expires time.Time) {
	c := &http.Cookie{
		Name:     name,
		Value:    value,
		Path:     path,
		HttpOnly: true,
		SameSite: http.SameSiteStrictMode,
		Secure:   s.TLS(),
	}
	if expires.IsZero() {
		c.MaxAge = -1
	} else {
		// Max-Age (which browsers prefer to Expires) is counted on the
		// service's clock, so an injected clock gives a consistent cookie.
		c.Expires = expires.UTC()
		c.MaxAge = int(expires.Sub(s.now()).Seconds())
		if c.MaxAge <= 0 {
			c.MaxAge = 1
		}
	}
	http.SetCookie(w, c)
}

// clientAddr is the client's IP address as the connection shows it (no
// forwarding header is trusted: longwave serves the clinic network directly).
func clientAddr(r *http.Request) string {
	host, _, err := net.SplitHostPort(r.RemoteAddr)
	if err != nil {
		return r.RemoteAddr
	}
	return host
}

// isNoSession reports whether err means "not signed in".
func isNoSession(err error) bool { return errors.Is(err, store.ErrNoSession) }
