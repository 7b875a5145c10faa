package server

import (
	"crypto/tls"
	"io"
	"log/slog"
	"net"
	"net/http"
	"time"

	"packwatch/pack"
)

// Engine is what the server needs from the pack engine.
type Engine interface {
	// Snapshot builds the state of every pack at wall time serverTime. The
	// result is never changed afterwards.
	Snapshot(serverTime time.Time) *pack.Snapshot
	// Ack acknowledges one alarm of one pack; an unknown pack or alarm is an error.
	Ack(packID string, alarmID uint64) error
}

// BusViewer is implemented by an engine that builds the bus view; New uses
// it when Options.BusView is nil.
type BusViewer interface {
	BusView() pack.BusView
}

// Replay is the optional control of a replay, reached from the page when
// Options.Replay is set (POST /api/replay/...). Seek takes the offset from the
// start of the recording; SetSpeed a factor of real time (1 = real time).
type Replay interface {
	Pause() error
	Play() error
	Seek(offset time.Duration) error
	SetSpeed(factor float64) error
}

// Options configures a Server. The zero value of each field means its default.
type Options struct {
	// Addr is the listen address, default "127.0.0.1:8080". Any address
	// that is not loopback requires a token.
	Addr string
	// Listener, when set, is used instead of listening on Addr (tests,
	// socket activation). Its address decides whether a token is required.
	Listener net.Listener

	// Engine builds the snapshots. Required.
	Engine Engine
	// BusView returns the bus view (per-source and per-ID statistics) as a
	// JSON-marshalable value; /api/bus and the page's bus panel use it. Nil
	// means the Engine's own BusView when it is a BusViewer, else none.
	BusView func() any
	// ProfileJSON returns the effective profile(s) as a JSON-marshalable
	// value for /api/profile; nil gives 404.
	ProfileJSON func() any
	// Replay, when set, enables the replay control routes.
	Replay Replay
	// OnSnapshot, when set, is called on the hub goroutine with every
	// snapshot it takes (e.g. metrics' Observe); it must return quickly.
	OnSnapshot func(*pack.Snapshot)
	// Handlers are extra routes, chi patterns to handlers (e.g. "/metrics",
	// "/api/check/*"), mounted behind the same checks as every route: Host,
	// token, and Origin on anything but GET and HEAD.
	Handlers map[string]http.Handler
	// CheckPanel adds the pre-flight check panel to the page (section
	// #check-panel with static/check.js and check.css); its API must be
	// mounted through Handlers.
	CheckPanel bool

	// Token is the access token. Empty on a loopback address means none; empty
	// elsewhere means one is generated (see Server.Token) and printed to
	// Banner with the URL and a QR code.
	Token string
	// TLSCert and TLSKey are PEM file paths; both set means HTTPS.
	TLSCert, TLSKey string
	// TLSConfig overrides the TLS settings (tests); certificates may be in it.
	TLSConfig *tls.Config
	// AllowedHosts are extra host names (without port) accepted in the Host
	// header besides IP literals, localhost and this machine's host name.
	AllowedHosts []string

	// Tick is the snapshot interval, default 100 ms (10 Hz).
	Tick time.Duration
	// BusEvery is the bus view interval, default 500 ms (2 Hz).
	BusEvery time.Duration
	// History is how much chart history is kept and sent on connect, default 10 min.
	History time.Duration
	// WriteTimeout is the deadline of one websocket write; a client that
	// cannot take a message within it is dropped. Default 5 s.
	WriteTimeout time.Duration
	// PingEvery is the websocket ping interval, default 15 s; a client that
	// sends nothing (not even a pong) for twice that is dropped.
	PingEvery time.Duration
	// ShutdownTimeout bounds the graceful shutdown, default 5 s.
	ShutdownTimeout time.Duration

	// Mode is "live", "simulated" or "replay" (default "live"); it fills a
	// snapshot's mode when the engine leaves it empty.
	Mode string
	// Version is shown in the page footer.
	Version string
	// Logger receives the server's log; default discards.
	Logger *slog.Logger
	// Banner receives the URL (with token) and its QR code when the server
	// starts; nil prints nothing.
	Banner io.Writer
}

func (o *Options) setDefaults() {
	if o.Addr == "" {
		o.Addr = "127.0.0.1:8080"
	}
	if o.Tick <= 0 {
		o.Tick = 100 * time.Millisecond
	}
	if o.BusEvery <= 0 {
		o.BusEvery = 500 * time.Millisecond
	}
	if o.History <= 0 {
		o.History = 10 * time.Minute
	}
	if o.WriteTimeout <= 0 {
		o.WriteTimeout = 5 * time.Second
	}
	if o.PingEvery <= 0 {
		o.PingEvery = 15 * time.Second
	}
	if o.ShutdownTimeout <= 0 {
		o.ShutdownTimeout = 5 * time.Second
	}
	if o.Mode == "" {
		o.Mode = "live"
	}
	if o.Logger == nil {
		o.Logger = slog.New(slog.DiscardHandler)
	}
}
