// Package server is longwave's web service: HTML screens, the JSON API under
// /api/v1/, the CSV export and the recording upload, behind sign-in with
// roles, sessions, CSRF tokens and security headers. It holds no maths:
// courses and cohorts come from package trends, stored values from package
// store, and ingest runs through package intake, the same pipeline as the
// command line.
package server

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"net/http"
	"sync"
	"time"

	"longwave/server/intake"
	"longwave/server/store"
	"longwave/web"
)

// Defaults of Config.
const (
	DefaultAddr = "127.0.0.1:8080"
	// DefaultUploadLimit bounds an uploaded recording: a 30-minute 64-channel
	// EDF at 512 Hz is about 118 MB; 256 MiB leaves room for BDF's 3 bytes
	// per sample.
	DefaultUploadLimit int64 = 256 << 20
	// DefaultSessionTTL is how long a session lasts after sign-in: a clinic
	// day.
	DefaultSessionTTL = 12 * time.Hour
	// Request timeouts. Reading the header must be quick (slow-header
	// attacks); reading a body may take an upload's time on a slow link; a
	// response includes the analysis of an upload (a few seconds).
	DefaultReadHeaderTimeout = 10 * time.Second
	DefaultReadTimeout       = 10 * time.Minute
	DefaultWriteTimeout      = 10 * time.Minute
	DefaultIdleTimeout       = 2 * time.Minute
	// shutdownGrace is how long Run waits for requests in flight when its
	// context ends.
	shutdownGrace = 15 * time.Second
)

// Config is what the service is told at start-up.
type Config struct {
	// Addr to listen on, host:port; DefaultAddr (loopback only) when empty.
	Addr string
	// TLSCert and TLSKey are PEM files; with both set the service speaks
	// HTTPS only and session cookies carry Secure.
	TLSCert, TLSKey string
	// UploadLimit in bytes of one upload request (DefaultUploadLimit when 0).
	UploadLimit int64
	// SessionTTL (DefaultSessionTTL when 0).
	SessionTTL time.Duration
	// Timeouts of the HTTP server (the defaults above when 0).
	ReadHeaderTimeout, ReadTimeout, WriteTimeout, IdleTimeout time.Duration
	// RangeSet names the reference range set the course is drawn against
	// ("literature" when empty).
	RangeSet string
}

func (c *Config) fill() {
	if c.Addr == "" {
		c.Addr = DefaultAddr
	}
	if c.UploadLimit <= 0 {
		c.UploadLimit = DefaultUploadLimit
	}
	if c.SessionTTL <= 0 {
		c.SessionTTL = DefaultSessionTTL
	}
	if c.ReadHeaderTimeout <= 0 {
		c.ReadHeaderTimeout = DefaultReadHeaderTimeout
	}
	if c.ReadTimeout <= 0 {
		c.ReadTimeout = DefaultReadTimeout
	}
	if c.WriteTimeout <= 0 {
		c.WriteTimeout = DefaultWriteTimeout
	}
	if c.IdleTimeout <= 0 {
		c.IdleTimeout = DefaultIdleTimeout
	}
	if c.RangeSet == "" {
		c.RangeSet = "literature"
	}
}

// Option changes how New builds the Server.
type Option func(*Server)

// WithLogger sends the service's log lines to l (slog.Default otherwise).
func WithLogger(l *slog.Logger) Option { return func(s *Server) { s.log = l } }

// WithClock sets the clock (tests use a fixed one).
func WithClock(now func() time.Time) Option { return func(s *Server) { s.now = now } }

// WithSleeper replaces the wait of the growing sign-in delay, so tests can
// record the delays without waiting.
func WithSleeper(sleep func(ctx context.Context, d time.Duration) error) Option {
	return func(s *Server) { s.sleep = sleep }
}

// Server is the web service.
type Server struct {
	cfg      Config
	st       *store.Store
	pipe     *intake.Pipeline
	assets   *web.Assets
	tpl      *web.Templates
	log      *slog.Logger
	now      func() time.Time
	sleep    func(ctx context.Context, d time.Duration) error
	handler  http.Handler
	router   routerInfo
	cohort   cohortCache
	bodies   bodyCache
	traces   traceCache
	norms    normsCache
	sessions sessionCache
	auditor  auditor
	// building serialises the build of cached bodies, so that 50 requests
	// missing the cache at once make one build, not 50.
	building sync.Mutex
	// settingsVersion and settingsHash of the pipeline's processing
	// settings: visits made by others are not comparable.
	settingsVersion, settingsHash string

	mu  sync.Mutex
	ln  net.Listener
	srv *http.Server
}

// New builds the service on an open store and an intake pipeline. The
// templates and assets are parsed and hashed here, once.
func New(cfg Config, st *store.Store, pipe *intake.Pipeline, opts ...Option) (*Server, error) {
	if st == nil || pipe == nil {
		return nil, errors.New("server: a store and an intake pipeline are needed")
	}
	cfg.fill()
	go store.PreparePasswordChecks() // on its own core while the server starts
	if (cfg.TLSCert == "") != (cfg.TLSKey == "") {
		return nil, errors.New("server: TLS needs both a certificate and a key file")
	}
	s := &Server{cfg: cfg, st: st, pipe: pipe, log: slog.Default(), now: time.Now, sleep: sleepContext,
		settingsVersion: pipe.Settings.Version, settingsHash: pipe.Settings.Hash()}
	for _, o := range opts {
		o(s)
	}
	// The cohort's kept entries judge comparability by this service's
	// processing settings.
	st.KeepCohortFor(s.settingsVersion, s.settingsHash)
	s.auditor.st = st
	var err error
	if s.assets, err = web.LoadAssets(); err != nil {
		return nil, fmt.Errorf("server: %w", err)
	}
	if s.tpl, err = web.Parse(s.assets); err != nil {
		return nil, fmt.Errorf("server: %w", err)
	}
	s.handler = s.routes()
	return s, nil
}

// sleepContext waits d or until ctx ends.
func sleepContext(ctx context.Context, d time.Duration) error {
	if d <= 0 {
		return nil
	}
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-t.C:
		return nil
	case <-ctx.Done():
		return ctx.Err()
	}
}

// Handler returns the service's handler (routes inside the security
// headers), for tests with httptest and for embedding.
func (s *Server) Handler() http.Handler { return s.handler }

// TLS reports whether the service serves HTTPS.
func (s *Server) TLS() bool { return s.cfg.TLSCert != "" }

// Listen opens the listening socket on Config.Addr ("127.0.0.1:0" picks a
// free port; Addr then tells which).
func (s *Server) Listen() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.ln != nil {
		return nil
	}
	ln, err := net.Listen("tcp", s.cfg.Addr)
	if err != nil {
		return fmt.Errorf("server: listen on %s: %w", s.cfg.Addr, err)
	}
	s.ln = ln
	return nil
}

// Addr returns the address listened on, or nil before Listen.
func (s *Server) Addr() net.Addr {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.ln == nil {
		return nil
	}
	return s.ln.Addr()
}

// URL returns the base URL of the listening service ("" before Listen).
func (s *Server) URL() string {
	a := s.Addr()
	if a == nil {
		return ""
	}
	scheme := "http"
	if s.TLS() {
		scheme = "https"
	}
	return scheme + "://" + a.String()
}

// Run listens (unless Listen was called) and serves until ctx ends, then
// shuts down gracefully, waiting up to 15 s for requests in flight.
func (s *Server) Run(ctx context.Context) error {
	if err := s.Listen(); err != nil {
		return err
	}
	s.mu.Lock()
	srv := &http.Server{
		Handler:           s.handler,
		ReadHeaderTimeout: s.cfg.ReadHeaderTimeout,
		ReadTimeout:       s.cfg.ReadTimeout,
		WriteTimeout:      s.cfg.WriteTimeout,
		IdleTimeout:       s.cfg.IdleTimeout,
		MaxHeaderBytes:    64 << 10,
		ErrorLog:          slog.NewLogLogger(s.log.Handler(), slog.LevelWarn),
		BaseContext:       func(net.Listener) context.Context { return context.WithoutCancel(ctx) },
	}
	s.srv = srv
	ln := s.ln
	s.mu.Unlock()

	errc := make(chan error, 1)
	go func() {
		var err error
		if s.TLS() {
			err = srv.ServeTLS(ln, s.cfg.TLSCert, s.cfg.TLSKey)
		} else {
			err = srv.Serve(ln)
		}
		errc <- err
	}()
	s.log.Info("longwave serving", "addr", ln.Addr().String(), "tls", s.TLS())
	select {
	case err := <-errc:
		if errors.Is(err, http.ErrServerClosed) {
			return nil
		}
		return fmt.Errorf("server: serve: %w", err)
	case <-ctx.Done():
	}
	sctx, cancel := context.WithTimeout(context.Background(), shutdownGrace)
	defer cancel()
	if err := srv.Shutdown(sctx); err != nil {
		return fmt.Errorf("server: shut down: %w", err)
	}
	if err := <-errc; err != nil && !errors.Is(err, http.ErrServerClosed) {
		return fmt.Errorf("server: serve: %w", err)
	}
	return nil
}
