package server

import (
	"context"
	"crypto/tls"
	"errors"
	"fmt"
	"html/template"
	"io/fs"
	"log/slog"
	"net"
	"net/http"
	"strings"
	"sync"
	"time"

	"github.com/go-chi/chi/v5"
	"github.com/go-chi/chi/v5/middleware"
	"github.com/gorilla/websocket"

	"packwatch/pack"
	"packwatch/web"
)

// Server is the dashboard server. New listens; Run serves until its context
// ends. Call Run once, or Close to release the listener without serving.
type Server struct {
	opts    Options
	ln      net.Listener
	token   string
	tls     bool
	guard   *guard
	hub     *hub
	page    *template.Template
	handler http.Handler
	up      websocket.Upgrader

	runOnce sync.Once
}

// New checks the options, opens the listener and builds the routes. A
// listen address that is not loopback gets a token: Options.Token, or a
// generated one (see Token).
func New(o Options) (*Server, error) {
	o.setDefaults()
	if o.Engine == nil {
		return nil, errors.New("server: Options.Engine is required")
	}
	switch o.Mode {
	case "live", "simulated", "replay":
	default:
		return nil, fmt.Errorf("server: mode %q: want live, simulated or replay", o.Mode)
	}
	if (o.TLSCert == "") != (o.TLSKey == "") {
		return nil, errors.New("server: TLS needs both a certificate and a key")
	}
	if o.Token != "" && len(o.Token) < 16 {
		return nil, errors.New("server: token too short: use 16 characters or more, or leave it empty to have one generated")
	}
	if o.BusView == nil {
		if bv, ok := o.Engine.(BusViewer); ok {
			o.BusView = func() any { return bv.BusView() }
		}
	}
	s := &Server{opts: o}
	var tlsConf *tls.Config
	if o.TLSCert != "" || o.TLSConfig != nil {
		tlsConf = &tls.Config{MinVersion: tls.VersionTLS12}
		if o.TLSConfig != nil {
			tlsConf = o.TLSConfig.Clone()
		}
		if o.TLSCert != "" {
			cert, err := tls.LoadX509KeyPair(o.TLSCert, o.TLSKey)
			if err != nil {
				return nil, fmt.Errorf("server: load TLS key pair %s: %w", o.TLSCert, err)
			}
			tlsConf.Certificates = append(tlsConf.Certificates, cert)
		}
		s.tls = true
	}
	page, err := template.ParseFS(web.Templates, "templates/*.html")
	if err != nil {
		return nil, fmt.Errorf("server: parse page templates: %w", err)
	}
	s.page = page

	ln := o.Listener
	if ln == nil {
		ln, err = net.Listen("tcp", o.Addr)
		if err != nil {
			return nil, fmt.Errorf("server: listen on %s: %w", o.Addr, err)
		}
	}
	s.token = o.Token
	if s.token == "" && !isLoopback(ln.Addr()) {
		if s.token, err = NewToken(); err != nil {
			ln.Close()
			return nil, fmt.Errorf("server: %w", err)
		}
	}
	if tlsConf != nil {
		ln = tls.NewListener(ln, tlsConf)
	}
	s.ln = ln
	s.guard = newGuard(s.token, o.AllowedHosts, s.tls)
	s.hub = newHub(&s.opts)
	s.up = websocket.Upgrader{
		ReadBufferSize:  1024,
		WriteBufferSize: 16 << 10,
		CheckOrigin:     s.guard.originOK,
	}
	s.handler = s.routes()
	return s, nil
}

// Token is the access token in force, "" when none is required.
func (s *Server) Token() string { return s.token }

// Addr is the address the server listens on.
func (s *Server) Addr() net.Addr { return s.ln.Addr() }

// URL is the address to open in a browser, with the token when one is
// required. A wildcard listen address is shown as this machine's first
// non-loopback IPv4 address, or localhost.
func (s *Server) URL() string {
	scheme := "http"
	if s.tls {
		scheme = "https"
	}
	host, port, _ := net.SplitHostPort(s.ln.Addr().String())
	if ip := net.ParseIP(host); ip != nil && ip.IsUnspecified() {
		host = firstLANAddress()
	}
	u := scheme + "://" + net.JoinHostPort(host, port) + "/"
	if s.token != "" {
		u += "?token=" + s.token
	}
	return u
}

// Handler is the server's HTTP handler (routes and checks), for tests.
func (s *Server) Handler() http.Handler { return s.handler }

// Latest is the snapshot of the latest tick, nil before the first.
func (s *Server) Latest() *pack.Snapshot {
	if f := s.hub.latest.Load(); f != nil {
		return f.snap
	}
	return nil
}

// Close releases the listener of a server that was never Run.
func (s *Server) Close() error { return s.ln.Close() }

// Run serves until ctx is done, then shuts down gracefully: stops accepting,
// says goodbye to websocket clients, waits for requests in flight up to
// Options.ShutdownTimeout. It returns nil after a clean shutdown.
func (s *Server) Run(ctx context.Context) error {
	ran := false
	s.runOnce.Do(func() { ran = true })
	if !ran {
		return errors.New("server: Run called twice")
	}
	srv := &http.Server{
		Handler:           s.handler,
		ReadHeaderTimeout: 5 * time.Second,
		ReadTimeout:       15 * time.Second,
		WriteTimeout:      30 * time.Second,
		IdleTimeout:       60 * time.Second,
		MaxHeaderBytes:    32 << 10,
		ErrorLog:          slog.NewLogLogger(s.opts.Logger.Handler(), slog.LevelDebug),
	}
	if s.opts.Banner != nil {
		writeBanner(s.opts.Banner, s)
	}
	s.opts.Logger.Info("dashboard listening", "addr", s.ln.Addr().String(), "tls", s.tls, "token", s.token != "")

	hubCtx, stopHub := context.WithCancel(context.Background())
	hubDone := make(chan struct{})
	go func() {
		defer close(hubDone)
		s.hub.run(hubCtx)
	}()
	serveErr := make(chan error, 1)
	go func() { serveErr <- srv.Serve(s.ln) }()

	var err error
	select {
	case <-ctx.Done():
	case err = <-serveErr:
		err = fmt.Errorf("server: serve: %w", err)
	}
	sctx, cancel := context.WithTimeout(context.Background(), s.opts.ShutdownTimeout)
	defer cancel()
	shutErr := srv.Shutdown(sctx) // stops the listener; hijacked websockets are the hub's
	stopHub()
	<-hubDone
	if err == nil {
		if e := <-serveErr; !errors.Is(e, http.ErrServerClosed) {
			err = fmt.Errorf("server: serve: %w", e)
		}
	}
	if err == nil && shutErr != nil {
		err = fmt.Errorf("server: shutdown: %w", shutErr)
	}
	return err
}

// routes builds the handler: checks first, then the routes.
func (s *Server) routes() http.Handler {
	r := chi.NewRouter()
	r.Use(middleware.Recoverer)
	r.Use(s.guard.middleware(s.token))
	static, _ := fs.Sub(web.Static, "static")
	fileServer := http.StripPrefix("/static/", http.FileServer(http.FS(static)))
	r.Get("/", s.handlePage)
	r.Get("/static/*", func(w http.ResponseWriter, r *http.Request) {
		if strings.HasSuffix(r.URL.Path, "/") {
			http.NotFound(w, r) // no directory listings
			return
		}
		w.Header().Set("Cache-Control", "no-cache")
		fileServer.ServeHTTP(w, r)
	})
	r.Get("/ws", s.handleWS)
	r.Get("/api/state", s.handleState)
	r.Get("/api/profile", s.handleProfile)
	r.Get("/api/bus", s.handleBus)
	r.Get("/healthz", s.handleHealth)
	r.Post("/api/packs/{pack}/alarms/{id}/ack", s.handleAck)
	if s.opts.Replay != nil {
		r.Post("/api/replay/{action}", s.handleReplay)
	}
	for pattern, h := range s.opts.Handlers {
		r.Handle(pattern, h)
	}
	return r
}
