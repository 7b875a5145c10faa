package check

import (
	"crypto/sha256"
	"encoding/hex"
	"sync"
	"time"

	"packwatch/bus"
	"packwatch/pack"
)

// SampleEvery is the data-time step between a check's samples.
const SampleEvery = int64(time.Second)

// MaxRawMessages bounds the raw messages a record keeps (about 40 s of a
// saturated 1 Mbit/s bus); beyond it they are counted, not kept.
const MaxRawMessages = 400_000

// Engine is what a Collector needs from the pack engine.
type Engine interface {
	Deliver(batch []bus.Message)
	Status(st bus.Status)
	Snapshot(serverTime time.Time) *pack.Snapshot
}

// Collector feeds messages to an engine and samples one pack's snapshots
// once per second of data time inside the window [From, To) (To 0: open),
// keeping the window's raw messages in the capture format. It implements
// bus.Sink and is safe for concurrent use by several sources. Messages
// before From are delivered to the engine (they build its state: counted
// charge, trip timers) but neither sampled nor kept.
type Collector struct {
	mu       sync.Mutex
	eng      Engine
	packID   string
	names    []string // source names by message Src
	from, to int64
	next     int64
	started  bool
	start    *pack.PackSnapshot
	samples  []Sample
	lastT    int64
	msgs     int
	raw      []byte
	rawN     int
	rawDrop  int
}

// NewCollector samples pack packID of eng over [from, to) (ns of data
// time; to 0 leaves the end open, from 0 starts at the first message).
// names gives the source name of each message Src for the raw capture.
func NewCollector(eng Engine, packID string, names []string, from, to int64) *Collector {
	return &Collector{eng: eng, packID: packID, names: names, from: from, to: to}
}

// Deliver passes the batch to the engine, splitting it where a sample is
// due so that each sample sees exactly the messages before its time.
// Messages at or past To are dropped, so the state stays at To.
func (c *Collector) Deliver(batch []bus.Message) {
	c.mu.Lock()
	defer c.mu.Unlock()
	i0 := 0 // first message not yet handed to the engine
	flush := func(i int) {
		c.deliver(batch[i0:i])
		i0 = i
	}
	for i := range batch {
		m := &batch[i]
		if c.to != 0 && m.T >= c.to {
			flush(i)
			i0 = i + 1
			continue
		}
		if m.T < c.from {
			continue
		}
		if !c.started {
			flush(i)
			c.started = true
			if c.from == 0 {
				c.from = m.T
			}
			c.start = c.snapshot()
			c.next = c.from + SampleEvery
		}
		for m.T >= c.next {
			flush(i)
			c.sample(c.next)
			c.next += SampleEvery
		}
		c.keep(m)
	}
	flush(len(batch))
}

func (c *Collector) deliver(b []bus.Message) {
	if len(b) > 0 {
		c.eng.Deliver(b)
	}
}

func (c *Collector) keep(m *bus.Message) {
	c.msgs++
	if m.T > c.lastT {
		c.lastT = m.T
	}
	if c.rawN >= MaxRawMessages {
		c.rawDrop++
		return
	}
	name := "?"
	if int(m.Src) < len(c.names) {
		name = c.names[m.Src]
	}
	c.raw = bus.AppendCapture(c.raw, m, c.from, name)
	c.rawN++
}

// Status passes a source's state to the engine.
func (c *Collector) Status(st bus.Status) { c.eng.Status(st) }

func (c *Collector) snapshot() *pack.PackSnapshot {
	s := c.eng.Snapshot(time.Now())
	for i := range s.Packs {
		if s.Packs[i].ID == c.packID {
			return &s.Packs[i]
		}
	}
	return nil
}

func (c *Collector) sample(t int64) {
	if p := c.snapshot(); p != nil {
		c.samples = append(c.samples, Sample{T: t, Pack: *p})
	}
}

// Messages is the number of messages seen inside the window so far.
func (c *Collector) Messages() int {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.msgs
}

// Finish takes the last sample at the window's end (To, or the last
// message's time when the end was open) and returns the window and the raw
// messages. A window without messages has no samples.
func (c *Collector) Finish() (Window, Raw) {
	c.mu.Lock()
	defer c.mu.Unlock()
	end := c.to
	if end == 0 {
		end = c.lastT
	}
	w := Window{From: c.from, To: end, Start: c.start}
	if c.started {
		if n := len(c.samples); n == 0 || c.samples[n-1].T < end {
			c.sample(end)
		}
		w.Samples = c.samples
	}
	if w.To < w.From {
		w.To = w.From
	}
	return w, c.rawLocked()
}

func (c *Collector) rawLocked() Raw {
	text := make([]byte, 0, len(c.raw)+64)
	text = append(text, "# start "...)
	text = append(text, time.Unix(0, c.from).UTC().Format(time.RFC3339Nano)...)
	text = append(text, '\n')
	text = append(text, c.raw...)
	sum := sha256.Sum256(text)
	return Raw{Format: RawFormat, Messages: c.rawN, Dropped: c.rawDrop, SHA256: hex.EncodeToString(sum[:]), Text: string(text)}
}

// RawFormat names the format of Raw.Text: packwatch's capture format, whose
// "# start" line is the window's start.
const RawFormat = "packwatch-capture"

// Raw is the raw messages of a checked window.
type Raw struct {
	Format   string `json:"format"`
	Messages int    `json:"messages"`
	// Dropped counts messages beyond MaxRawMessages, not kept.
	Dropped int    `json:"dropped"`
	SHA256  string `json:"sha256"` // of Text
	Text    string `json:"text"`
}
