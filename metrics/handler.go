package metrics

import (
	"log/slog"
	"net"
	"net/http"
	"sync"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"

	"packwatch/pack"
)

// Snapshotter builds snapshots; *pack.Engine is one.
type Snapshotter interface {
	// Snapshot builds the state of every pack; serverTime is the wall clock.
	Snapshot(serverTime time.Time) *pack.Snapshot
}

// Options configure a Handler. The zero value serves the snapshots passed
// to Observe.
type Options struct {
	// Engine, when set, is asked for a fresh snapshot at every scrape,
	// which is then observed like any other. Leave it nil when a hub calls
	// Observe every tick: the engine then builds one snapshot per tick, and
	// /metrics and /api/state read the same one.
	Engine Snapshotter
	// Now is the wall clock given to Engine.Snapshot; default time.Now.
	Now func() time.Time
	// Version is reported in packwatch_info.
	Version string
	// MaxScrapers bounds the number of scrapers whose extremes windows are
	// kept (default 8); beyond it the least recently seen is forgotten.
	MaxScrapers int
	// Logger receives errors of building or writing a scrape; default
	// discards.
	Logger *slog.Logger
}

// Handler serves /metrics. Observe feeds it snapshots; ServeHTTP exposes
// the latest. It is safe for concurrent use; it starts no goroutines. The
// handler does no authentication: mount it behind the dashboard's token
// check.
type Handler struct {
	opt Options
	d   *descs

	mu      sync.Mutex
	latest  *pack.Snapshot
	wins    windows
	trips   trips
	lastSeq uint64
}

// NewHandler makes a Handler. Mount it at /metrics, and call Observe with
// every snapshot the hub takes (or set Options.Engine).
func NewHandler(opt Options) *Handler {
	if opt.Now == nil {
		opt.Now = time.Now
	}
	if opt.MaxScrapers <= 0 {
		opt.MaxScrapers = 8
	}
	if opt.Logger == nil {
		opt.Logger = slog.New(slog.DiscardHandler)
	}
	return &Handler{opt: opt, d: newDescs(), wins: newWindows(opt.MaxScrapers), trips: newTrips()}
}

// Observe takes one snapshot: it becomes the one scrapes expose, its cell
// voltages and current are folded into every scraper's extremes, and new
// trips and sensor faults in its alarm list are counted. Call it once per
// hub tick, with the snapshot the page and /api/state get; the snapshot is
// not modified and may be shared. A nil snapshot is ignored. Observe does
// not block on scrapes beyond a short lock.
func (h *Handler) Observe(s *pack.Snapshot) {
	if s == nil {
		return
	}
	h.mu.Lock()
	defer h.mu.Unlock()
	if h.latest != nil && s.Seq < h.lastSeq {
		// A new engine (sequence restarted): its alarm ids restart too.
		h.trips.restart()
	}
	h.latest, h.lastSeq = s, s.Seq
	h.wins.fold(s)
	h.trips.count(s)
}

// view is what one scrape exposes.
type view struct {
	snap    *pack.Snapshot
	ext     map[string]extremes // by pack id
	trips   map[string]packTrips
	version string
}

// take returns the view for the scraper key and starts that scraper's next
// window.
func (h *Handler) take(key string) view {
	if h.opt.Engine != nil {
		h.Observe(h.opt.Engine.Snapshot(h.opt.Now()))
	}
	h.mu.Lock()
	defer h.mu.Unlock()
	return view{
		snap:    h.latest,
		ext:     h.wins.take(key, h.latest),
		trips:   h.trips.copy(),
		version: h.opt.Version,
	}
}

// registry builds a registry exposing one view.
func (h *Handler) registry(v view) *prometheus.Registry {
	reg := prometheus.NewRegistry()
	reg.MustRegister(&collector{d: h.d, v: v})
	return reg
}

// ServeHTTP writes the metrics of the latest snapshot in the Prometheus text
// format, or in OpenMetrics when the Accept header asks for it (gzip when
// accepted). Before any snapshot only packwatch_info is exposed.
func (h *Handler) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	v := h.take(scraperKey(r))
	promhttp.HandlerFor(h.registry(v), promhttp.HandlerOpts{
		ErrorLog:          logAdapter{h.opt.Logger},
		ErrorHandling:     promhttp.ContinueOnError,
		EnableOpenMetrics: true,
	}).ServeHTTP(w, r)
}

// scraperKey tells scrapers apart: the remote host and the User-Agent.
func scraperKey(r *http.Request) string {
	host, _, err := net.SplitHostPort(r.RemoteAddr)
	if err != nil {
		host = r.RemoteAddr
	}
	return host + "\x00" + r.UserAgent()
}

type logAdapter struct{ l *slog.Logger }

func (a logAdapter) Println(v ...any) {
	a.l.Error("metrics", "error", v)
}
