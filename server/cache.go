package server

import (
	"html/template"
	"sync"
	"time"
)

// Screen bodies are the same for every user who may see them, and the
// course of a patient with 40 visits takes about 35–45 ms to build cold
// from the store and render; 50 people on two cores must not each pay
// that. Bodies are kept for bodyTTL and dropped at once by the service's
// own writes (an upload); a change made outside the service (a command-line
// ingest or reprocess) shows within bodyTTL. Audit entries and the frame
// (user, CSRF token) are made per request, never cached.
const (
	bodyTTL = 10 * time.Second
	// bodyCacheMax bounds the cache; past it the cache starts afresh.
	bodyCacheMax = 1024
)

type cachedBody struct {
	at   time.Time
	body template.HTML
}

// bodyCache holds rendered screen bodies by key ("course|<code>|<add>",
// "cohort|<query>").
type bodyCache struct {
	mu sync.Mutex
	m  map[string]cachedBody
}

func (c *bodyCache) get(key string, now time.Time) (template.HTML, bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	e, ok := c.m[key]
	if !ok || now.Sub(e.at) >= bodyTTL || now.Before(e.at) {
		return "", false
	}
	return e.body, true
}

func (c *bodyCache) put(key string, body template.HTML, now time.Time) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.m == nil || len(c.m) >= bodyCacheMax {
		c.m = map[string]cachedBody{}
	}
	c.m[key] = cachedBody{at: now, body: body}
}

func (c *bodyCache) drop() {
	c.mu.Lock()
	c.m = nil
	c.mu.Unlock()
}

// cachedBody returns the body under key, building it when absent or stale.
// Builds are serialised so that many requests missing at once make one.
func (s *Server) cachedBody(key string, build func() (template.HTML, error)) (template.HTML, error) {
	now := s.now()
	if b, ok := s.bodies.get(key, now); ok {
		return b, nil
	}
	s.building.Lock()
	defer s.building.Unlock()
	if b, ok := s.bodies.get(key, now); ok {
		return b, nil
	}
	b, err := build()
	if err != nil {
		return "", err
	}
	s.bodies.put(key, b, now)
	return b, nil
}
