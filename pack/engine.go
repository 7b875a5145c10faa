package pack

import (
	"errors"
	"fmt"
	"sync"
	"time"

	"packwatch/bus"
	"packwatch/decode"
)

// Errors callers can match with errors.Is.
var (
	// ErrRestartNeeded: a reloaded profile changes the sources or the cell
	// count, which a hot swap cannot carry over.
	ErrRestartNeeded = errors.New("restart needed")
	// ErrNoPack: no pack has that id.
	ErrNoPack = errors.New("no such pack")
	// ErrNoAlarm: the pack has no alarm with that id.
	ErrNoAlarm = errors.New("no such alarm")
)

// RawSink receives every batch the engine takes, before it is decoded (the
// recorder). Write is called under the engine's lock, in batch order, and
// must not block or keep the slice.
type RawSink interface {
	Write(batch []bus.Message)
}

// Options configure an Engine. The zero value is a live engine without a
// raw sink.
type Options struct {
	// Mode is "live" (default), "simulated" or "replay"; snapshots carry it.
	Mode string
	// RawSink, if set, gets every batch.
	RawSink RawSink
	// WallClockAges makes a snapshot judge ages and staleness at the later of
	// data time and the snapshot's server time. Set it for live sources,
	// whose data time is wall time: when every source falls silent, data time
	// stops, and without this the last readings would look fresh forever.
	// Leave it off for captures, recordings and the simulator, whose data
	// time is their own. Trips and counting stay on data time either way.
	WallClockAges bool
}

// Engine owns the state of every pack: their compiled maps, readings,
// timers, counters and alarms, behind one mutex. Sources deliver batches
// from their own goroutines (Engine implements bus.Sink); the hub takes
// snapshots. An Engine starts no goroutines.
type Engine struct {
	mu      sync.Mutex
	opt     Options
	packs   []*packState
	status  []srcStatus // by engine source index
	dataT   int64
	lag     int64 // recent data-time span of one delivery, ns
	rec     *RecordingSnap
	seq     uint64
	alarmID uint64  // last alarm id handed out, engine-wide
	bus     busPrev // rate bookkeeping of BusView
	scratch []int32 // reused index buffer
}

type srcStatus struct {
	known  bool
	state  bus.State
	reason string
	t      int64
}

// NewEngine makes an engine without packs.
func NewEngine(opt Options) *Engine {
	if opt.Mode == "" {
		opt.Mode = "live"
	}
	return &Engine{opt: opt}
}

// AddPack adds a pack under a short unique id, decoded by m. srcMap maps the
// engine's source indexes (bus.Message.Src) to the profile's source indexes,
// -1 for sources the pack does not use; nil means they are the same.
func (e *Engine) AddPack(id string, m *decode.Map, srcMap []int) error {
	if id == "" {
		return fmt.Errorf("add pack: empty id")
	}
	if m == nil || m.Profile() == nil {
		return fmt.Errorf("add pack %s: no compiled profile", id)
	}
	nsrc := len(m.Profile().Sources)
	for i, p := range srcMap {
		if p < -1 || p >= nsrc {
			return fmt.Errorf("add pack %s: source %d maps to %d, the profile has %d sources", id, i, p, nsrc)
		}
	}
	e.mu.Lock()
	defer e.mu.Unlock()
	for _, ps := range e.packs {
		if ps.id == id {
			return fmt.Errorf("add pack %s: id already in use", id)
		}
	}
	if srcMap != nil {
		srcMap = append([]int(nil), srcMap...)
	}
	e.packs = append(e.packs, newPackState(id, m, srcMap))
	return nil
}

// Deliver takes a batch of messages from one source: it hands the batch to
// the raw sink, then decodes each message into every pack that uses its
// source and runs the checks of the slots it updated, all on data time.
// The lock is taken once per batch. Implements bus.Sink.
func (e *Engine) Deliver(batch []bus.Message) {
	e.mu.Lock()
	defer e.mu.Unlock()
	if e.opt.RawSink != nil {
		e.opt.RawSink.Write(batch)
	}
	if n := len(batch); n > 0 {
		// how much data time one delivery spans: a simulator at high speed
		// or a replay delivers seconds at once, so packs fed by different
		// sources can lag each other by that much
		lo, hi := batch[0].T, batch[0].T
		for i := 1; i < n; i++ {
			lo, hi = min(lo, batch[i].T), max(hi, batch[i].T)
		}
		if span := hi - lo; span > e.lag {
			e.lag = span
		} else {
			e.lag -= (e.lag - span) / 16
		}
	}
	for i := range batch {
		msg := &batch[i]
		if msg.T > e.dataT {
			e.dataT = msg.T
		}
		for _, ps := range e.packs {
			ps.apply(msg, &e.alarmID)
		}
	}
}

// Status records a source's connection state. Implements bus.Sink.
func (e *Engine) Status(st bus.Status) {
	e.mu.Lock()
	defer e.mu.Unlock()
	for int(st.Src) >= len(e.status) {
		e.status = append(e.status, srcStatus{})
	}
	e.status[st.Src] = srcStatus{known: true, state: st.State, reason: st.Reason, t: st.T}
}

// DataTime is the latest data time seen, ns since the Unix epoch (0 before
// the first message).
func (e *Engine) DataTime() int64 {
	e.mu.Lock()
	defer e.mu.Unlock()
	return e.dataT
}

// Snapshot builds the state of every pack at the latest data time. serverTime
// is the wall clock of the tick, only reported. Each call increments the
// sequence number.
func (e *Engine) Snapshot(serverTime time.Time) *Snapshot {
	e.mu.Lock()
	defer e.mu.Unlock()
	e.seq++
	s := &Snapshot{
		Seq:        e.seq,
		ServerTime: serverTime.UTC().Format(time.RFC3339Nano),
		DataT:      Num(float64(e.dataT) / 1e9),
		Mode:       e.opt.Mode,
		Packs:      make([]PackSnapshot, 0, len(e.packs)),
	}
	if e.rec != nil {
		r := *e.rec
		s.Recording = &r
	}
	for _, ps := range e.packs {
		// A pack is judged at the session's data time, less the span of a
		// delivery (another pack's source may be that far ahead of this
		// pack's), but never before its own latest message.
		now := max(ps.dataT, e.dataT-e.lag)
		if e.opt.WallClockAges && serverTime.UnixNano() > now {
			now = serverTime.UnixNano()
		}
		s.Packs = append(s.Packs, ps.snapshot(now, e.status))
	}
	return s
}

// Ack acknowledges one alarm of a pack. An acknowledged alarm leaves the
// list once it is no longer active.
func (e *Engine) Ack(packID string, alarmID uint64) error {
	e.mu.Lock()
	defer e.mu.Unlock()
	ps := e.pack(packID)
	if ps == nil {
		return fmt.Errorf("ack %d: %w %q", alarmID, ErrNoPack, packID)
	}
	if !ps.ack(alarmID) {
		return fmt.Errorf("ack %d on pack %s: %w", alarmID, packID, ErrNoAlarm)
	}
	return nil
}

// AckAll acknowledges every alarm of a pack; an unknown pack is ignored.
func (e *Engine) AckAll(packID string) {
	e.mu.Lock()
	defer e.mu.Unlock()
	if ps := e.pack(packID); ps != nil {
		ps.ackAll()
	}
}

// Reset clears every pack's readings, counters, timers and alarms and the
// data time, keeping the packs and their profiles (a replay seek).
func (e *Engine) Reset() {
	e.mu.Lock()
	defer e.mu.Unlock()
	for i, ps := range e.packs {
		np := newPackState(ps.id, ps.m, ps.srcMap)
		np.profErr = ps.profErr
		e.packs[i] = np
	}
	e.dataT, e.lag = 0, 0
	e.bus = busPrev{}
}

// Swap replaces a pack's compiled profile between batches (a reload),
// keeping readings, counters, timers and alarms by binding name. When the
// new profile changes the sources or the cell count it returns
// ErrRestartNeeded and keeps the old one. A successful swap clears the
// profile error.
func (e *Engine) Swap(packID string, m *decode.Map) error {
	if m == nil || m.Profile() == nil {
		return fmt.Errorf("swap %s: no compiled profile", packID)
	}
	e.mu.Lock()
	defer e.mu.Unlock()
	for i, ps := range e.packs {
		if ps.id != packID {
			continue
		}
		if why := restartReason(ps.prof, m.Profile()); why != "" {
			return fmt.Errorf("swap %s: %s: %w", packID, why, ErrRestartNeeded)
		}
		e.packs[i] = ps.swapped(m)
		return nil
	}
	return fmt.Errorf("swap: %w %q", ErrNoPack, packID)
}

// SetRecording sets the recording's state that snapshots carry (nil: no
// recording).
func (e *Engine) SetRecording(r *RecordingSnap) {
	e.mu.Lock()
	defer e.mu.Unlock()
	e.rec = r
}

// SetProfileError shows msg as the pack's profile error (a reload that
// failed; the previous profile stays in use). "" clears it.
func (e *Engine) SetProfileError(packID, msg string) {
	e.mu.Lock()
	defer e.mu.Unlock()
	if ps := e.pack(packID); ps != nil {
		ps.profErr = msg
	}
}

func (e *Engine) pack(id string) *packState {
	for _, ps := range e.packs {
		if ps.id == id {
			return ps
		}
	}
	return nil
}
