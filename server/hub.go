package server

import (
	"context"
	"encoding/json"
	"log/slog"
	"sync"
	"sync/atomic"
	"time"

	"github.com/gorilla/websocket"

	"packwatch/pack"
)

// frame is one tick's snapshot in every form it is served in.
type frame struct {
	snap *pack.Snapshot
	json []byte // the snapshot alone, for /api/state
	msg  *websocket.PreparedMessage
	at   time.Time // wall time of the tick
}

// hub builds one snapshot per tick and fans it out. The tick goroutine owns
// nothing a client can block: offering a message to a client is a
// non-blocking replace of its one-slot mailbox.
type hub struct {
	opts *Options
	log  *slog.Logger
	hist *history

	latest  atomic.Pointer[frame]
	ticks   atomic.Uint64
	errors  atomic.Uint64 // snapshots that failed to marshal
	dropped atomic.Uint64 // clients dropped for being stuck or gone

	mu      sync.Mutex
	clients map[*client]struct{}
	closed  bool
	wg      sync.WaitGroup // client goroutines
}

func newHub(o *Options) *hub {
	return &hub{
		opts:    o,
		log:     o.Logger,
		hist:    newHistory(o.History.Seconds()),
		clients: make(map[*client]struct{}),
	}
}

// run ticks until ctx is done, then closes every client and waits for their
// goroutines.
func (h *hub) run(ctx context.Context) {
	tick := time.NewTicker(h.opts.Tick)
	defer tick.Stop()
	var busC <-chan time.Time
	if h.opts.BusView != nil {
		bt := time.NewTicker(h.opts.BusEvery)
		defer bt.Stop()
		busC = bt.C
	}
	h.tick(time.Now())
	for {
		select {
		case <-ctx.Done():
			h.closeAll()
			return
		case now := <-tick.C:
			h.tick(now)
		case <-busC:
			h.busTick()
		}
	}
}

// tick builds, marshals once and fans out one snapshot.
func (h *hub) tick(now time.Time) {
	s := h.opts.Engine.Snapshot(now)
	if s == nil {
		return
	}
	if s.Mode == "" {
		s.Mode = h.opts.Mode
	}
	data, err := json.Marshal(s)
	if err != nil {
		if h.errors.Add(1) == 1 {
			h.log.Error("marshal snapshot", "seq", s.Seq, "err", err)
		}
		return
	}
	msg, err := websocket.NewPreparedMessage(websocket.TextMessage, envelope("snapshot", data))
	if err != nil {
		h.log.Error("prepare snapshot message", "err", err)
		return
	}
	f := &frame{snap: s, json: data, msg: msg, at: now}
	h.latest.Store(f)
	h.ticks.Add(1)
	h.hist.add(s)
	if h.opts.OnSnapshot != nil {
		h.opts.OnSnapshot(s)
	}
	h.mu.Lock()
	for c := range h.clients {
		c.offer(c.snap, msg)
	}
	h.mu.Unlock()
}

// busTick sends the bus view to the clients that asked for it.
func (h *hub) busTick() {
	h.mu.Lock()
	any := false
	for c := range h.clients {
		if c.wantBus.Load() {
			any = true
			break
		}
	}
	h.mu.Unlock()
	if !any {
		return
	}
	data, err := json.Marshal(h.opts.BusView())
	if err != nil {
		h.log.Error("marshal bus view", "err", err)
		return
	}
	msg, err := websocket.NewPreparedMessage(websocket.TextMessage, envelope("bus", data))
	if err != nil {
		return
	}
	h.mu.Lock()
	for c := range h.clients {
		if c.wantBus.Load() {
			c.offer(c.bus, msg)
		}
	}
	h.mu.Unlock()
}

// add registers a client; false once the hub is shutting down.
func (h *hub) add(c *client) bool {
	h.mu.Lock()
	defer h.mu.Unlock()
	if h.closed {
		return false
	}
	h.clients[c] = struct{}{}
	h.wg.Add(2) // read and write pumps
	if f := h.latest.Load(); f != nil {
		c.offer(c.snap, f.msg)
	}
	return true
}

func (h *hub) remove(c *client) {
	h.mu.Lock()
	delete(h.clients, c)
	h.mu.Unlock()
}

func (h *hub) count() int {
	h.mu.Lock()
	defer h.mu.Unlock()
	return len(h.clients)
}

// closeAll says goodbye to every client and waits for their goroutines.
func (h *hub) closeAll() {
	h.mu.Lock()
	h.closed = true
	cs := make([]*client, 0, len(h.clients))
	for c := range h.clients {
		cs = append(cs, c)
	}
	h.mu.Unlock()
	for _, c := range cs {
		c.stop()
	}
	h.wg.Wait()
}

// envelope wraps already-encoded JSON data as {"type":T,"data":...}.
func envelope(typ string, data []byte) []byte {
	b := make([]byte, 0, len(data)+len(typ)+20)
	b = append(b, `{"type":"`...)
	b = append(b, typ...)
	b = append(b, `","data":`...)
	b = append(b, data...)
	return append(b, '}')
}
