package record

import (
	"database/sql"
	"encoding/json"
	"errors"
	"fmt"
	"strings"
	"time"
)

// batchWork is what one commit takes from the writer.
type batchWork struct {
	blocks   []sealed
	events   []Event
	profiles []ProfileVersion
	stats    []statItem
}

func (b *batchWork) empty() bool {
	return len(b.blocks)+len(b.events)+len(b.profiles)+len(b.stats) == 0
}

// run is the writer goroutine: on each tick it seals the current block; on a
// tick or a kick it commits everything queued in one transaction.
func (w *Writer) run() {
	defer close(w.done)
	tick := time.NewTicker(w.opt.CommitEvery)
	defer tick.Stop()
	var work batchWork
	lastBeat := time.Now()
	for {
		final, seal := false, false
		select {
		case <-w.kick:
		case <-tick.C:
			seal = true
		case <-w.quit:
			final, seal = true, true
		}
		w.mu.Lock()
		if seal && !w.stopped {
			w.sealLocked(true)
		}
		work.blocks, w.queue = w.queue, work.blocks[:0]
		work.events, w.events = w.events, work.events[:0]
		work.profiles, w.profiles = w.profiles, work.profiles[:0]
		work.stats, w.stats = w.stats, work.stats[:0]
		if o := w.over; o.blocks > 0 || o.otherItems > 0 {
			work.events = append(work.events, overrunEvent(o, w.lastDataT))
			w.over = overrun{}
		}
		stopped := w.stopped
		w.room.Broadcast()
		w.mu.Unlock()

		if !stopped && (!work.empty() || time.Since(lastBeat) >= heartbeatEvery) {
			if err := w.commit(&work); err != nil {
				w.stop(err, &work)
			} else {
				lastBeat = time.Now()
			}
		}
		w.mu.Lock()
		for i := range work.blocks {
			w.free = append(w.free, work.blocks[i].data[:0])
			work.blocks[i] = sealed{}
		}
		w.mu.Unlock()
		clear(work.events)
		clear(work.profiles)
		clear(work.stats)
		if final {
			return
		}
	}
}

// stop makes err sticky and stops the recording; the blocks of the failed
// commit count as dropped.
func (w *Writer) stop(err error, work *batchWork) {
	w.mu.Lock()
	defer w.mu.Unlock()
	if isFull(err) {
		err = fmt.Errorf("record %s: recording stopped, disk full or size limit reached: %w", w.path, err)
	} else {
		err = fmt.Errorf("record %s: recording stopped: %w", w.path, err)
	}
	w.err = err
	w.stopped = true
	for _, b := range work.blocks {
		w.dropped += uint64(b.info.n)
	}
	for _, b := range w.queue {
		w.dropped += uint64(b.info.n)
	}
	w.dropped += uint64(w.enc.n)
	w.enc.reset()
	w.queue = w.queue[:0]
	w.room.Broadcast()
}

// isFull reports SQLITE_FULL (13), from the disk or from max_page_count.
func isFull(err error) bool {
	var c interface{ Code() int }
	if errors.As(err, &c) {
		return c.Code()&0xff == 13
	}
	return strings.Contains(err.Error(), "full")
}

// overrunEvent describes o; at is the data time to give it when no block
// was dropped (only events or stat rows).
func overrunEvent(o overrun, at int64) Event {
	text := fmt.Sprintf("recording queue full: dropped %d messages in %d blocks", o.msgs, o.blocks)
	if o.otherItems > 0 {
		text += fmt.Sprintf(", %d events, profiles or stat rows", o.otherItems)
	}
	j, _ := json.Marshal(map[string]any{"messages": o.msgs, "blocks": o.blocks, "from": o.from, "to": o.to, "items": o.otherItems})
	t := o.from
	if o.blocks == 0 {
		t = at
	}
	return Event{T: t, Kind: EventOverrun, Source: NoSource, Text: text, JSON: string(j)}
}

// statements are prepared once (on the writer's single connection) and
// reused by every commit, instead of parsing SQL four times a second.
type statements struct {
	block, event, profile, stat, beat *sql.Stmt
}

func (w *Writer) prepare() error {
	var err error
	p := func(q string) *sql.Stmt {
		if err != nil {
			return nil
		}
		var st *sql.Stmt
		st, err = w.db.Prepare(q)
		return st
	}
	w.st = statements{
		block:   p("INSERT INTO blocks(t0, t1, n, data) VALUES(?, ?, ?, ?)"),
		event:   p("INSERT INTO events(t, kind, source, text, json) VALUES(?, ?, ?, ?, ?)"),
		profile: p("INSERT INTO profiles(t, name, hash, text) VALUES(?, ?, ?, ?)"),
		stat:    p("INSERT OR REPLACE INTO stats(bind, sec, min, max, last) VALUES(?, ?, ?, ?, ?)"),
		beat:    p("UPDATE sessions SET heartbeat=?, messages=? WHERE id=?"),
	}
	if err != nil {
		w.closeStatements()
	}
	return err
}

func (w *Writer) closeStatements() {
	for _, st := range []*sql.Stmt{w.st.block, w.st.event, w.st.profile, w.st.stat, w.st.beat} {
		if st != nil {
			st.Close()
		}
	}
}

// commit writes one batch of work in one transaction.
func (w *Writer) commit(work *batchWork) error {
	tx, err := w.db.Begin()
	if err != nil {
		return err
	}
	defer tx.Rollback()
	var msgs uint64
	lastT := w.lastT.Load()
	if len(work.blocks) > 0 {
		st := tx.Stmt(w.st.block)
		for _, b := range work.blocks {
			if _, err := st.Exec(b.info.t0, b.info.t1, b.info.n, b.data); err != nil {
				return fmt.Errorf("insert block: %w", err)
			}
			msgs += uint64(b.info.n)
			lastT = max(lastT, b.info.t1)
		}
	}
	if len(work.events) > 0 {
		st := tx.Stmt(w.st.event)
		for _, e := range work.events {
			var src, js any
			if e.Source >= 0 {
				src = e.Source
			}
			if e.JSON != "" {
				js = e.JSON
			}
			if _, err := st.Exec(e.T, e.Kind, src, e.Text, js); err != nil {
				return fmt.Errorf("insert event: %w", err)
			}
		}
	}
	if len(work.profiles) > 0 {
		st := tx.Stmt(w.st.profile)
		for _, p := range work.profiles {
			if _, err := st.Exec(p.T, p.Name, p.Hash, p.Text); err != nil {
				return fmt.Errorf("insert profile: %w", err)
			}
		}
	}
	if len(work.stats) > 0 {
		st := tx.Stmt(w.st.stat)
		for _, s := range work.stats {
			if _, err := st.Exec(s.row.Bind, s.sec, s.row.Min, s.row.Max, s.row.Last); err != nil {
				return fmt.Errorf("insert stats: %w", err)
			}
		}
	}
	total := w.committed.Load() + msgs
	if _, err := tx.Stmt(w.st.beat).Exec(time.Now().UnixNano(), total, w.session); err != nil {
		return fmt.Errorf("heartbeat: %w", err)
	}
	if err := tx.Commit(); err != nil {
		return err
	}
	w.committed.Store(total)
	w.lastT.Store(lastT)
	return nil
}
