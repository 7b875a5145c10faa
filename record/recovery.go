package record

import (
	"database/sql"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"time"
)

// staleAfter: a session whose writer has not committed its heartbeat for this
// long is taken as dead even when its process cannot be checked (another
// host, a reused process id).
const staleAfter = 30 * time.Second

// ErrBusy is returned when another live process is writing the recording.
var ErrBusy = errors.New("recording is being written by another process")

type openSession struct {
	id        int64
	started   string
	host      string
	pid       int
	heartbeat int64
}

// writerGone reports whether the writer of s is no longer running.
func (s openSession) writerGone(now time.Time) bool {
	if now.Sub(time.Unix(0, s.heartbeat)) > staleAfter {
		return true
	}
	host, _ := os.Hostname()
	if s.host != host {
		return false
	}
	if s.pid == os.Getpid() {
		return false
	}
	return !processAlive(s.pid)
}

// noteRecovery looks for sessions left open by a writer that is gone, marks
// them recovered and adds a recovery event, in one transaction on db (whose
// transactions must be immediate). It returns the event added, or nil. A
// session still being written by a live process gives ErrBusy.
func noteRecovery(db *sql.DB, path string) (*Event, error) {
	tx, err := db.Begin()
	if err != nil {
		return nil, fmt.Errorf("check previous session of %s: %w", path, err)
	}
	defer tx.Rollback()
	ev, gone, busy, err := findRecovery(tx)
	if err != nil {
		return nil, fmt.Errorf("check previous session of %s: %w", path, err)
	}
	if busy != nil {
		return nil, fmt.Errorf("%s: pid %d on %s (session %d): %w", path, busy.pid, busy.host, busy.id, ErrBusy)
	}
	if ev == nil {
		return nil, nil
	}
	if _, err := tx.Exec("INSERT INTO events(t, kind, source, text, json) VALUES(?, ?, NULL, ?, ?)",
		ev.T, ev.Kind, ev.Text, ev.JSON); err != nil {
		return nil, fmt.Errorf("note recovery in %s: %w", path, err)
	}
	stamp := "recovered " + time.Now().UTC().Format(time.RFC3339Nano)
	for _, id := range gone {
		if _, err := tx.Exec("UPDATE sessions SET closed=? WHERE id=?", stamp, id); err != nil {
			return nil, fmt.Errorf("note recovery in %s: %w", path, err)
		}
	}
	if err := tx.Commit(); err != nil {
		return nil, fmt.Errorf("note recovery in %s: %w", path, err)
	}
	return ev, nil
}

type querier interface {
	Query(q string, args ...any) (*sql.Rows, error)
	QueryRow(q string, args ...any) *sql.Row
}

// findRecovery builds the recovery event for the open sessions whose writer is
// gone and returns their ids; busy is set when a live writer holds a session.
func findRecovery(q querier) (ev *Event, gone []int64, busy *openSession, err error) {
	rows, err := q.Query("SELECT id, started, host, pid, heartbeat FROM sessions WHERE closed IS NULL ORDER BY id")
	if err != nil {
		return nil, nil, nil, err
	}
	var open []openSession
	for rows.Next() {
		var s openSession
		if err := rows.Scan(&s.id, &s.started, &s.host, &s.pid, &s.heartbeat); err != nil {
			rows.Close()
			return nil, nil, nil, err
		}
		open = append(open, s)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return nil, nil, nil, err
	}
	now := time.Now()
	for _, s := range open {
		if !s.writerGone(now) {
			return nil, nil, &s, nil
		}
		gone = append(gone, s.id)
	}
	if len(gone) == 0 {
		return nil, nil, nil, nil
	}
	var last sql.NullInt64
	if err := q.QueryRow("SELECT max(t1) FROM blocks").Scan(&last); err != nil {
		return nil, nil, nil, err
	}
	s := open[len(open)-1]
	j, _ := json.Marshal(map[string]any{"session": s.id, "pid": s.pid, "host": s.host,
		"started": s.started, "last_heartbeat": s.heartbeat, "last_data_t": last.Int64})
	ev = &Event{T: last.Int64, Kind: EventRecovery, Source: NoSource, JSON: string(j),
		Text: fmt.Sprintf("the writer of session %d (pid %d on %s, started %s) did not close the recording: "+
			"everything committed is kept, up to the last commit interval before it stopped may be missing",
			s.id, s.pid, s.host, s.started)}
	return ev, gone, nil, nil
}
