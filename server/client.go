package server

import (
	"encoding/json"
	"sync"
	"sync/atomic"
	"time"

	"github.com/gorilla/websocket"
)

// maxClientMessage bounds what the page may send: small control messages only.
const maxClientMessage = 512

// client is one websocket connection. The hub offers messages into its
// one-slot mailboxes; its write pump sends them; its read pump handles pongs
// and subscriptions. Either pump failing ends both.
type client struct {
	h    *hub
	conn *websocket.Conn
	snap chan *websocket.PreparedMessage // latest snapshot only
	bus  chan *websocket.PreparedMessage // latest bus view only

	wantBus atomic.Bool
	done    chan struct{}
	once    sync.Once
}

func newClient(h *hub, conn *websocket.Conn) *client {
	return &client{
		h:    h,
		conn: conn,
		snap: make(chan *websocket.PreparedMessage, 1),
		bus:  make(chan *websocket.PreparedMessage, 1),
		done: make(chan struct{}),
	}
}

// offer puts m into a one-slot mailbox, replacing an unsent older message.
// It never blocks; only the hub goroutine offers, so after draining the
// slot the second send always succeeds.
func (c *client) offer(box chan *websocket.PreparedMessage, m *websocket.PreparedMessage) {
	select {
	case box <- m:
		return
	default:
	}
	select {
	case <-box:
	default:
	}
	select {
	case box <- m:
	default:
	}
}

// stop ends the client: both pumps return and the connection is closed.
func (c *client) stop() {
	c.once.Do(func() {
		close(c.done)
		c.h.remove(c)
		// Try a polite close frame, bounded; then cut the connection, which
		// also unblocks a write stuck on a full socket buffer.
		_ = c.conn.WriteControl(websocket.CloseMessage,
			websocket.FormatCloseMessage(websocket.CloseGoingAway, "server stopping"),
			time.Now().Add(100*time.Millisecond))
		_ = c.conn.Close()
	})
}

// writePump sends hello and history first, then the latest snapshot and bus
// view as they come, and pings. Every write has a deadline; a client that
// cannot take a message within it is dropped.
func (c *client) writePump(hello, hist []byte) {
	defer c.h.wg.Done()
	defer c.stop()
	o := c.h.opts
	ping := time.NewTicker(o.PingEvery)
	defer ping.Stop()
	write := func(typ int, b []byte) error {
		_ = c.conn.SetWriteDeadline(time.Now().Add(o.WriteTimeout))
		return c.conn.WriteMessage(typ, b)
	}
	if write(websocket.TextMessage, hello) != nil || write(websocket.TextMessage, hist) != nil {
		c.h.dropped.Add(1)
		return
	}
	for {
		var m *websocket.PreparedMessage
		select {
		case <-c.done:
			return
		case m = <-c.snap:
		case m = <-c.bus:
		case <-ping.C:
			if err := c.conn.WriteControl(websocket.PingMessage, nil, time.Now().Add(o.WriteTimeout)); err != nil {
				c.h.dropped.Add(1)
				return
			}
			continue
		}
		_ = c.conn.SetWriteDeadline(time.Now().Add(o.WriteTimeout))
		if err := c.conn.WritePreparedMessage(m); err != nil {
			select {
			case <-c.done:
			default:
				c.h.dropped.Add(1)
				c.h.log.Info("websocket client dropped", "remote", c.conn.RemoteAddr().String(), "err", err)
			}
			return
		}
	}
}

// clientMsg is what the page may send.
type clientMsg struct {
	Type string `json:"type"` // "subscribe"
	Bus  bool   `json:"bus"`
}

// readPump reads control messages until the connection fails or goes
// quiet for two ping intervals.
func (c *client) readPump() {
	defer c.h.wg.Done()
	defer c.stop()
	wait := 2 * c.h.opts.PingEvery
	c.conn.SetReadLimit(maxClientMessage)
	_ = c.conn.SetReadDeadline(time.Now().Add(wait))
	c.conn.SetPongHandler(func(string) error {
		return c.conn.SetReadDeadline(time.Now().Add(wait))
	})
	for {
		_, b, err := c.conn.ReadMessage()
		if err != nil {
			return
		}
		_ = c.conn.SetReadDeadline(time.Now().Add(wait))
		var m clientMsg
		if json.Unmarshal(b, &m) != nil {
			continue // a malformed control message is ignored, not fatal
		}
		if m.Type == "subscribe" {
			c.wantBus.Store(m.Bus)
		}
	}
}
