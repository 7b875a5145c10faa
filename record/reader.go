package record

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"math"
	"strconv"
	"time"

	"packwatch/bus"
)

// Reader reads a recording. Its methods may be called from several goroutines.
type Reader struct {
	path      string
	db        *sql.DB
	meta      Meta
	recovery  *Event
	persisted bool
}

// Open opens a recording for reading. It refuses a file that is not a
// packwatch recording (ErrForeign), one from a newer packwatch (ErrNewer) or
// one whose header or tables are damaged (ErrCorrupt) with a clear error.
// If the previous writer did not close the file (killed, power lost), Open
// runs SQLite's quick_check and notes a recovery event in the file (in
// memory only when the file is read-only); Recovered returns it. Damage
// found later while reading (Scan, Check) is reported then, wrapping
// ErrCorrupt for the blocks.
func Open(path string) (*Reader, error) {
	if err := checkHeader(path); err != nil {
		return nil, err
	}
	r := &Reader{path: path}
	ev, persisted, err := openRecovery(path)
	if err != nil {
		return nil, err
	}
	r.recovery, r.persisted = ev, persisted
	r.db, err = sql.Open("sqlite", dsn(path, "rw", readerPragmas))
	if err != nil {
		return nil, fmt.Errorf("open recording %s: %w", path, err)
	}
	r.db.SetMaxOpenConns(4)
	if err := r.load(); err != nil {
		r.db.Close()
		return nil, fmt.Errorf("open recording %s: %w", path, err)
	}
	return r, nil
}

// openRecovery checks the sessions through a writable connection and notes a
// recovery; on a read-only file it only finds it.
func openRecovery(path string) (*Event, bool, error) {
	db, err := sql.Open("sqlite", dsn(path, "rw", []string{"busy_timeout(5000)"}, "_txlock=immediate"))
	if err != nil {
		return nil, false, fmt.Errorf("open recording %s: %w", path, err)
	}
	defer db.Close()
	db.SetMaxOpenConns(1)
	if err := checkSchema(db); err != nil {
		return nil, false, fmt.Errorf("open recording %s: %w", path, err)
	}
	ev, err := noteRecovery(db, path)
	switch {
	case err == nil:
		if ev != nil { // the writer crashed: make sure SQLite can read it all
			if err := quickCheck(context.Background(), db); err != nil {
				return nil, false, fmt.Errorf("open recording %s: %w", path, err)
			}
		}
		return ev, ev != nil, nil
	case errors.Is(err, ErrBusy):
		return nil, false, nil // being recorded: read what is committed
	}
	// Read-only file or directory: find it without noting it.
	tx, terr := db.Begin()
	if terr != nil {
		return nil, false, err
	}
	defer tx.Rollback()
	ev, _, _, ferr := findRecovery(tx)
	if ferr != nil {
		return nil, false, err
	}
	return ev, false, nil
}

// checkSchema makes sure the tables are there and SQLite can read the file.
func checkSchema(db *sql.DB) error {
	var v string
	if err := db.QueryRow("SELECT value FROM meta WHERE key='schema_version'").Scan(&v); err != nil {
		return fmt.Errorf("%w: read schema version: %v", ErrCorrupt, err)
	}
	n, err := strconv.Atoi(v)
	if err != nil || n < 1 {
		return fmt.Errorf("%w: schema version %q", ErrCorrupt, v)
	}
	if n > SchemaVersion {
		return fmt.Errorf("schema version %d, this packwatch reads up to %d: %w", n, SchemaVersion, ErrNewer)
	}
	for _, t := range []string{"sessions", "sources", "profiles", "blocks", "events", "stats"} {
		if _, err := db.Exec("SELECT 1 FROM " + t + " LIMIT 1"); err != nil {
			return fmt.Errorf("%w: table %s: %v", ErrCorrupt, t, err)
		}
	}
	return nil
}

// quickCheck runs SQLite's quick_check (about 150 MB/s here).
func quickCheck(ctx context.Context, db interface {
	QueryRowContext(context.Context, string, ...any) *sql.Row
}) error {
	var ok string
	if err := db.QueryRowContext(ctx, "PRAGMA quick_check(1)").Scan(&ok); err != nil {
		return fmt.Errorf("%w: %v", ErrCorrupt, err)
	}
	if ok != "ok" {
		return fmt.Errorf("%w: %s", ErrCorrupt, ok)
	}
	return nil
}

// Check verifies the whole file: SQLite's integrity_check, then every block
// decoded (checksums, layout, counts against the blocks table). It reads
// everything, about 150 MB/s; Open checks the file this way only after a
// crash of the writer.
func (r *Reader) Check(ctx context.Context) error {
	var ok string
	if err := r.db.QueryRowContext(ctx, "PRAGMA integrity_check(1)").Scan(&ok); err != nil {
		return fmt.Errorf("check %s: %w: %v", r.path, ErrCorrupt, err)
	}
	if ok != "ok" {
		return fmt.Errorf("check %s: %w: %s", r.path, ErrCorrupt, ok)
	}
	rows, err := r.db.QueryContext(ctx, "SELECT id, t0, t1, n, data FROM blocks ORDER BY id")
	if err != nil {
		return fmt.Errorf("check %s: %w", r.path, err)
	}
	defer rows.Close()
	var (
		dec        blockDecoder
		batch      []bus.Message
		id, t0, t1 int64
		n          int
		data       sql.RawBytes
	)
	for rows.Next() {
		if err := rows.Scan(&id, &t0, &t1, &n, &data); err != nil {
			return fmt.Errorf("check %s: %w", r.path, err)
		}
		if batch, err = dec.decode(data, batch[:0]); err != nil {
			return fmt.Errorf("check %s: block %d: %w", r.path, id, err)
		}
		lo, hi := int64(math.MaxInt64), int64(math.MinInt64)
		for i := range batch {
			lo, hi = min(lo, batch[i].T), max(hi, batch[i].T)
		}
		if len(batch) != n || lo != t0 || hi != t1 {
			return fmt.Errorf("check %s: block %d: %w: row says %d messages in [%d, %d], block has %d in [%d, %d]",
				r.path, id, ErrCorrupt, n, t0, t1, len(batch), lo, hi)
		}
	}
	if err := rows.Err(); err != nil {
		return fmt.Errorf("check %s: %w", r.path, err)
	}
	return nil
}

func (r *Reader) load() error {
	rows, err := r.db.Query("SELECT key, value FROM meta")
	if err != nil {
		return fmt.Errorf("%w: meta: %v", ErrCorrupt, err)
	}
	defer rows.Close()
	for rows.Next() {
		var k, v string
		if err := rows.Scan(&k, &v); err != nil {
			return fmt.Errorf("%w: meta: %v", ErrCorrupt, err)
		}
		switch k {
		case "tool":
			r.meta.Tool = v
		case "version":
			r.meta.Version = v
		case "host":
			r.meta.Host = v
		case "operator":
			r.meta.Operator = v
		case "notes":
			r.meta.Notes = v
		case "mode":
			r.meta.Mode = v
		case "start":
			if t, err := time.Parse(time.RFC3339Nano, v); err == nil {
				r.meta.Start = t
			}
		}
	}
	if err := rows.Err(); err != nil {
		return fmt.Errorf("%w: meta: %v", ErrCorrupt, err)
	}
	srows, err := r.db.Query("SELECT idx, name, kind, device FROM sources ORDER BY idx")
	if err != nil {
		return fmt.Errorf("%w: sources: %v", ErrCorrupt, err)
	}
	defer srows.Close()
	for srows.Next() {
		var s SourceInfo
		if err := srows.Scan(&s.Index, &s.Name, &s.Kind, &s.Device); err != nil {
			return fmt.Errorf("%w: sources: %v", ErrCorrupt, err)
		}
		r.meta.Sources = append(r.meta.Sources, s)
	}
	if err := srows.Err(); err != nil {
		return fmt.Errorf("%w: sources: %v", ErrCorrupt, err)
	}
	return nil
}

// Path is the file being read.
func (r *Reader) Path() string { return r.path }

// Meta returns the metadata of the recording (of its first session).
func (r *Reader) Meta() Meta { return r.meta }

// Recovered returns the recovery event noted when this Reader opened the
// file, or nil if the previous writer had closed it.
func (r *Reader) Recovered() *Event { return r.recovery }

// Close closes the file.
func (r *Reader) Close() error {
	if err := r.db.Close(); err != nil {
		return fmt.Errorf("close recording %s: %w", r.path, err)
	}
	return nil
}

// Profiles returns every profile version in order of the data time it took effect.
func (r *Reader) Profiles() ([]ProfileVersion, error) {
	rows, err := r.db.Query("SELECT t, name, hash, text FROM profiles ORDER BY t, id")
	if err != nil {
		return nil, fmt.Errorf("read profiles of %s: %w", r.path, err)
	}
	defer rows.Close()
	var out []ProfileVersion
	for rows.Next() {
		var p ProfileVersion
		if err := rows.Scan(&p.T, &p.Name, &p.Hash, &p.Text); err != nil {
			return nil, fmt.Errorf("read profiles of %s: %w", r.path, err)
		}
		out = append(out, p)
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("read profiles of %s: %w", r.path, err)
	}
	return out, nil
}

// Events returns every event in data time order, including a recovery
// noted by Open on a read-only file.
func (r *Reader) Events() ([]Event, error) {
	rows, err := r.db.Query("SELECT t, kind, source, text, json FROM events ORDER BY t, id")
	if err != nil {
		return nil, fmt.Errorf("read events of %s: %w", r.path, err)
	}
	defer rows.Close()
	var out []Event
	for rows.Next() {
		var e Event
		var src sql.NullInt64
		var js sql.NullString
		if err := rows.Scan(&e.T, &e.Kind, &src, &e.Text, &js); err != nil {
			return nil, fmt.Errorf("read events of %s: %w", r.path, err)
		}
		e.Source = NoSource
		if src.Valid {
			e.Source = int(src.Int64)
		}
		e.JSON = js.String
		out = append(out, e)
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("read events of %s: %w", r.path, err)
	}
	if r.recovery != nil && !r.persisted {
		out = append(out, *r.recovery)
	}
	return out, nil
}

// Span returns the data times of the first and last recorded message; both
// are 0 with ok false when there are none.
func (r *Reader) Span() (first, last int64, ok bool, err error) {
	var a, b sql.NullInt64
	if err := r.db.QueryRow("SELECT min(t0), max(t1) FROM blocks").Scan(&a, &b); err != nil {
		return 0, 0, false, fmt.Errorf("read span of %s: %w", r.path, err)
	}
	return a.Int64, b.Int64, a.Valid, nil
}

// Count returns the number of recorded messages.
func (r *Reader) Count() (int64, error) {
	var n sql.NullInt64
	if err := r.db.QueryRow("SELECT sum(n) FROM blocks").Scan(&n); err != nil {
		return 0, fmt.Errorf("count messages of %s: %w", r.path, err)
	}
	return n.Int64, nil
}

// scanQuery selects the blocks that may hold messages in [from, to) (the
// arguments are to, from), in the order of their first times.
const scanQuery = "SELECT id, data FROM blocks WHERE t0 < ? AND t1 >= ? ORDER BY t0, t1, id"

// Scan calls fn with the recorded messages whose data time t is in
// [from, to), in batches of up to one block, in the order of the blocks' first
// times (time order for sources on one clock), messages within a block in
// recorded order. fn must not keep the batch after it returns (it is
// reused); an error from fn stops the scan and is returned as is. A damaged
// block stops the scan with an error wrapping ErrCorrupt.
func (r *Reader) Scan(ctx context.Context, from, to int64, fn func(batch []bus.Message) error) error {
	rows, err := r.db.QueryContext(ctx, scanQuery, to, from)
	if err != nil {
		return fmt.Errorf("scan %s: %w", r.path, err)
	}
	defer rows.Close()
	var (
		dec   blockDecoder
		batch []bus.Message
		id    int64
		data  sql.RawBytes
	)
	for rows.Next() {
		if err := rows.Scan(&id, &data); err != nil {
			return fmt.Errorf("scan %s: %w", r.path, err)
		}
		batch, err = dec.decode(data, batch[:0])
		if err != nil {
			return fmt.Errorf("scan %s: block %d: %w", r.path, id, err)
		}
		batch = clip(batch, from, to)
		if len(batch) == 0 {
			continue
		}
		if err := fn(batch); err != nil {
			return err
		}
	}
	if err := rows.Err(); err != nil {
		return fmt.Errorf("scan %s: %w", r.path, err)
	}
	return nil
}

// clip keeps the messages with from <= T < to, in place.
func clip(b []bus.Message, from, to int64) []bus.Message {
	if len(b) == 0 || (b[0].T >= from && b[len(b)-1].T < to && sortedIn(b, from, to)) {
		return b
	}
	k := 0
	for i := range b {
		if b[i].T >= from && b[i].T < to {
			if k != i {
				b[k] = b[i]
			}
			k++
		}
	}
	clear(b[k:])
	return b[:k]
}

// sortedIn reports whether every message is in [from, to).
func sortedIn(b []bus.Message, from, to int64) bool {
	for i := range b {
		if b[i].T < from || b[i].T >= to {
			return false
		}
	}
	return true
}

// Binds returns the binding names that have decimated statistics.
func (r *Reader) Binds() ([]string, error) {
	rows, err := r.db.Query("SELECT DISTINCT bind FROM stats ORDER BY bind")
	if err != nil {
		return nil, fmt.Errorf("read stats of %s: %w", r.path, err)
	}
	defer rows.Close()
	var out []string
	for rows.Next() {
		var b string
		if err := rows.Scan(&b); err != nil {
			return nil, fmt.Errorf("read stats of %s: %w", r.path, err)
		}
		out = append(out, b)
	}
	return out, rows.Err()
}

// Stats returns the decimated values of one binding for the seconds that
// overlap the data time range [from, to) (ns), in time order.
func (r *Reader) Stats(bind string, from, to int64) ([]StatPoint, error) {
	s0 := floorDiv(from, 1e9)
	s1 := int64(math.MaxInt64)
	if to < math.MaxInt64-1e9 {
		s1 = floorDiv(to+1e9-1, 1e9) // first second not starting before to
	}
	rows, err := r.db.Query("SELECT sec, min, max, last FROM stats WHERE bind=? AND sec>=? AND sec<? ORDER BY sec", bind, s0, s1)
	if err != nil {
		return nil, fmt.Errorf("read stats of %s: %w", r.path, err)
	}
	defer rows.Close()
	var out []StatPoint
	for rows.Next() {
		var p StatPoint
		if err := rows.Scan(&p.Sec, &p.Min, &p.Max, &p.Last); err != nil {
			return nil, fmt.Errorf("read stats of %s: %w", r.path, err)
		}
		out = append(out, p)
	}
	return out, rows.Err()
}

func floorDiv(a, b int64) int64 {
	q := a / b
	if a%b != 0 && (a < 0) != (b < 0) {
		q--
	}
	return q
}

// Session is one writer's run in the file (a recording continued with
// Options.Append has several).
type Session struct {
	ID       int64
	Started  string // RFC 3339, UTC
	Tool     string
	Version  string
	Host     string
	PID      int
	Mode     string
	Closed   string // RFC 3339 time of a clean close, "recovered ..." after a crash, "" while open
	Messages int64
	Dropped  int64
}

// Sessions returns the writer sessions of the file in order.
func (r *Reader) Sessions() ([]Session, error) {
	rows, err := r.db.Query("SELECT id, started, tool, version, host, pid, mode, closed, messages, dropped FROM sessions ORDER BY id")
	if err != nil {
		return nil, fmt.Errorf("read sessions of %s: %w", r.path, err)
	}
	defer rows.Close()
	var out []Session
	for rows.Next() {
		var s Session
		var closed sql.NullString
		if err := rows.Scan(&s.ID, &s.Started, &s.Tool, &s.Version, &s.Host, &s.PID, &s.Mode, &closed, &s.Messages, &s.Dropped); err != nil {
			return nil, fmt.Errorf("read sessions of %s: %w", r.path, err)
		}
		s.Closed = closed.String
		out = append(out, s)
	}
	return out, rows.Err()
}
