package check

import (
	"sync"

	"packwatch/bus"
)

// DefaultRawTapMessages is RawTap's default capacity: 25 s of a saturated
// 1 Mbit/s bus (about 8,000 frames/s), minutes of a usual pack's traffic.
const DefaultRawTapMessages = 200_000

// RawTap keeps the latest raw messages of a live session in a ring, so that
// a check from the dashboard can store the raw messages of its window. It
// implements pack.RawSink (Write never blocks, copies the batch) and is safe
// for concurrent use. Chain it with the recorder through RawTee.
type RawTap struct {
	mu    sync.Mutex
	ring  []bus.Message
	next  int
	full  bool
	names []string
}

// NewRawTap keeps up to n messages (0: DefaultRawTapMessages); names gives
// the source name of each engine source index, for the capture text.
func NewRawTap(n int, names []string) *RawTap {
	if n <= 0 {
		n = DefaultRawTapMessages
	}
	return &RawTap{ring: make([]bus.Message, n), names: names}
}

// Write copies the batch into the ring. Implements pack.RawSink.
func (t *RawTap) Write(batch []bus.Message) {
	t.mu.Lock()
	defer t.mu.Unlock()
	for i := range batch {
		t.ring[t.next] = batch[i]
		t.next++
		if t.next == len(t.ring) {
			t.next, t.full = 0, true
		}
	}
}

// Raw returns the kept messages with from <= T < to in the capture format
// (with a "# start" line at from). complete is false when the ring had
// already overwritten messages from the window's start.
func (t *RawTap) Raw(from, to int64) (raw Raw, complete bool) {
	t.mu.Lock()
	defer t.mu.Unlock()
	c := &Collector{from: from, names: t.names}
	oldest := int64(0)
	n := t.next
	start := 0
	if t.full {
		n, start = len(t.ring), t.next
		oldest = t.ring[t.next].T
	}
	for k := 0; k < n; k++ {
		m := &t.ring[(start+k)%len(t.ring)]
		if m.T >= from && m.T < to {
			c.keep(m)
		}
	}
	return c.rawLocked(), !t.full || oldest <= from
}

// RawSink is what the engine hands every batch to (pack.RawSink).
type RawSink interface {
	Write(batch []bus.Message)
}

// RawTee hands each batch to every sink in order (the recorder and a
// RawTap). Nil sinks are skipped.
type RawTee []RawSink

// Write implements pack.RawSink.
func (t RawTee) Write(batch []bus.Message) {
	for _, s := range t {
		if s != nil {
			s.Write(batch)
		}
	}
}
