package sim

import (
	"context"
	"errors"
	"net"
	"sync"
	"time"
)

// Broadcaster is an io.Writer that writes to every client connected to a
// listener, the way a CAN-to-TCP gateway serves its frames: the tcp-can
// source dials it. A client that fails a write (or takes longer than the
// write timeout) is dropped; with no client connected, writes are discarded.
type Broadcaster struct {
	ln      net.Listener
	timeout time.Duration

	mu      sync.Mutex
	clients []net.Conn
	dropped int
	joined  chan struct{} // closed and replaced when a client joins
	wg      sync.WaitGroup
}

// NewBroadcaster serves ln until Close; writes to one client time out after
// timeout (default 2 s).
func NewBroadcaster(ln net.Listener, timeout time.Duration) *Broadcaster {
	if timeout <= 0 {
		timeout = 2 * time.Second
	}
	b := &Broadcaster{ln: ln, timeout: timeout, joined: make(chan struct{})}
	b.wg.Add(1)
	go b.accept()
	return b
}

func (b *Broadcaster) accept() {
	defer b.wg.Done()
	for {
		c, err := b.ln.Accept()
		if err != nil {
			if errors.Is(err, net.ErrClosed) {
				return
			}
			var ne net.Error
			if errors.As(err, &ne) && ne.Timeout() {
				continue
			}
			return
		}
		b.mu.Lock()
		b.clients = append(b.clients, c)
		close(b.joined)
		b.joined = make(chan struct{})
		b.mu.Unlock()
	}
}

// Write sends p to every client; it never fails (a failing client is dropped).
func (b *Broadcaster) Write(p []byte) (int, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	kept := b.clients[:0]
	for _, c := range b.clients {
		_ = c.SetWriteDeadline(time.Now().Add(b.timeout))
		if _, err := c.Write(p); err != nil {
			c.Close()
			b.dropped++
			continue
		}
		kept = append(kept, c)
	}
	clear(b.clients[len(kept):])
	b.clients = kept
	return len(p), nil
}

// Clients counts the connected clients.
func (b *Broadcaster) Clients() int {
	b.mu.Lock()
	defer b.mu.Unlock()
	return len(b.clients)
}

// WaitClient returns when at least one client is connected or ctx ends.
func (b *Broadcaster) WaitClient(ctx context.Context) error {
	for {
		b.mu.Lock()
		n, joined := len(b.clients), b.joined
		b.mu.Unlock()
		if n > 0 {
			return nil
		}
		select {
		case <-joined:
		case <-ctx.Done():
			return ctx.Err()
		}
	}
}

// Close stops accepting, closes every client and waits for the accept loop.
func (b *Broadcaster) Close() error {
	err := b.ln.Close()
	b.wg.Wait()
	b.mu.Lock()
	for _, c := range b.clients {
		c.Close()
	}
	b.clients = nil
	b.mu.Unlock()
	return err
}
