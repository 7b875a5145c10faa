package record

import (
	"database/sql"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"os"
	"sync"
	"sync/atomic"
	"time"

	_ "modernc.org/sqlite" // the database/sql driver "sqlite"

	"packwatch/bus"
)

// Options configures a Writer. The zero value of each field means its default.
type Options struct {
	// Force replaces an existing file instead of refusing it.
	Force bool
	// Append continues an existing recording: a new session row, new data
	// after the old. The file must exist and be a recording.
	Append bool
	// Lossless makes Write wait for room when the queue is full instead of
	// dropping a block: for import and conversion, never for a live path.
	Lossless bool
	// QueueBlocks is the most sealed blocks waiting for the writer goroutine,
	// default 64: 16 s at a saturated bus (8,000 frames/s, a block each
	// 250 ms), 2 s at 130,000 frames/s.
	QueueBlocks int
	// CommitEvery is the writer's tick: the current block is sealed and all
	// queued blocks are committed in one transaction at least this often.
	// Default 250 ms.
	CommitEvery time.Duration
	// CommitBlocks wakes the writer goroutine before its tick when this many
	// blocks are queued, default 16.
	CommitBlocks int
	// MaxBytes stops the recording (Err reports it) when the database file
	// would grow beyond this size, like a full disk. 0 means no limit.
	MaxBytes int64
}

const (
	defaultQueueBlocks  = 64
	defaultCommitEvery  = 250 * time.Millisecond
	defaultCommitBlocks = 16
	// heartbeatEvery: an idle writer still commits its heartbeat this often.
	heartbeatEvery = 5 * time.Second
	// maxPending bounds the events, profiles and stat rows waiting for a commit.
	maxPending = 1 << 16
	pageSize   = 4096
)

// sealed is a block waiting for the writer goroutine.
type sealed struct {
	data []byte
	info blockInfo
}

// overrun sums up blocks dropped since the last commit.
type overrun struct {
	from, to      int64
	msgs, blocks  uint64
	otherItems    uint64
	errorsSkipped uint64
}

type statItem struct {
	sec int64
	row StatRow
}

// Writer records one session. Write, Event, Profile and Stats may be called
// from any goroutine and never wait for the disk (unless Options.Lossless);
// one writer goroutine, started by Create and ended by Close, commits.
type Writer struct {
	path    string
	opt     Options
	db      *sql.DB
	st      statements
	session int64

	mu       sync.Mutex
	room     *sync.Cond // signalled when the queue shrinks or the writer stops
	enc      blockEncoder
	queue    []sealed
	free     [][]byte
	events   []Event
	profiles []ProfileVersion
	stats    []statItem
	over     overrun
	stopped  bool // no more recording: error or closed
	closed   bool
	err      error
	dropped  uint64
	invalid  uint64
	// lastDataT is the data time of the last message written (for events
	// that have no time of their own).
	lastDataT int64

	committed atomic.Uint64
	lastT     atomic.Int64

	kick chan struct{}
	quit chan struct{}
	done chan struct{}
}

// Create starts recording a session into path. It refuses an existing file
// unless opt.Force (replace it) or opt.Append (continue it). The writer
// goroutine runs until Close.
func Create(path string, meta Meta, opt Options) (*Writer, error) {
	if opt.QueueBlocks <= 0 {
		opt.QueueBlocks = defaultQueueBlocks
	}
	if opt.CommitEvery <= 0 {
		opt.CommitEvery = defaultCommitEvery
	}
	if opt.CommitBlocks <= 0 {
		opt.CommitBlocks = defaultCommitBlocks
	}
	if meta.Start.IsZero() {
		meta.Start = time.Now()
	}
	if meta.Host == "" {
		meta.Host, _ = os.Hostname()
	}
	if opt.Append {
		if err := checkHeader(path); err != nil {
			return nil, err
		}
	} else if err := createFile(path, meta, opt.Force); err != nil {
		return nil, err
	}
	pragmas := writerPragmas
	if opt.MaxBytes > 0 {
		pragmas = append(pragmas[:len(pragmas):len(pragmas)], fmt.Sprintf("max_page_count(%d)", max(opt.MaxBytes/pageSize, 16)))
	}
	db, err := sql.Open("sqlite", dsn(path, "rw", pragmas, "_txlock=immediate"))
	if err != nil {
		return nil, fmt.Errorf("create recording %s: %w", path, err)
	}
	db.SetMaxOpenConns(1)
	w := &Writer{path: path, opt: opt, db: db,
		kick: make(chan struct{}, 1), quit: make(chan struct{}), done: make(chan struct{})}
	w.room = sync.NewCond(&w.mu)
	w.enc.reset()
	if err := w.startSession(meta); err != nil {
		db.Close()
		return nil, fmt.Errorf("create recording %s: %w", path, err)
	}
	if err := w.prepare(); err != nil {
		db.Close()
		return nil, fmt.Errorf("create recording %s: %w", path, err)
	}
	go w.run()
	return w, nil
}

// createFile makes a new recording with its schema and metadata, in rollback
// mode so that the header is in the main file, then switches it to WAL.
func createFile(path string, meta Meta, force bool) error {
	if force {
		for _, p := range []string{path, path + "-wal", path + "-shm", path + "-journal"} {
			if err := os.Remove(p); err != nil && !errors.Is(err, fs.ErrNotExist) {
				return fmt.Errorf("create recording %s: %w", path, err)
			}
		}
	}
	f, err := os.OpenFile(path, os.O_RDWR|os.O_CREATE|os.O_EXCL, 0o644)
	if err != nil {
		if errors.Is(err, fs.ErrExist) {
			return fmt.Errorf("create recording %s: file exists (force to replace, append to continue): %w", path, err)
		}
		return fmt.Errorf("create recording %s: %w", path, err)
	}
	f.Close()
	if err := initFile(path, meta); err != nil {
		os.Remove(path)
		os.Remove(path + "-wal")
		os.Remove(path + "-shm")
		os.Remove(path + "-journal")
		return fmt.Errorf("create recording %s: %w", path, err)
	}
	return nil
}

func initFile(path string, meta Meta) error {
	db, err := sql.Open("sqlite", dsn(path, "rw", []string{"busy_timeout(5000)"}))
	if err != nil {
		return err
	}
	defer db.Close()
	db.SetMaxOpenConns(1)
	for _, q := range []string{
		fmt.Sprintf("PRAGMA page_size=%d", pageSize),
		fmt.Sprintf("PRAGMA application_id=%d", ApplicationID),
		fmt.Sprintf("PRAGMA user_version=%d", SchemaVersion),
	} {
		if _, err := db.Exec(q); err != nil {
			return fmt.Errorf("%s: %w", q, err)
		}
	}
	tx, err := db.Begin()
	if err != nil {
		return err
	}
	defer tx.Rollback()
	if _, err := tx.Exec(schemaSQL); err != nil {
		return fmt.Errorf("schema: %w", err)
	}
	kv := [][2]string{
		{"schema_version", fmt.Sprint(SchemaVersion)},
		{"tool", meta.Tool}, {"version", meta.Version}, {"host", meta.Host},
		{"operator", meta.Operator}, {"notes", meta.Notes},
		{"start", meta.Start.UTC().Format(time.RFC3339Nano)}, {"mode", meta.Mode},
	}
	for _, p := range kv {
		if _, err := tx.Exec("INSERT INTO meta(key, value) VALUES(?, ?)", p[0], p[1]); err != nil {
			return fmt.Errorf("meta: %w", err)
		}
	}
	if err := tx.Commit(); err != nil {
		return err
	}
	if _, err := db.Exec("PRAGMA journal_mode=WAL"); err != nil {
		return fmt.Errorf("journal_mode: %w", err)
	}
	return nil
}

// startSession notes a recovery if the previous writer did not close, adds
// the session row and any new sources.
func (w *Writer) startSession(meta Meta) error {
	if _, err := noteRecovery(w.db, w.path); err != nil {
		return err
	}
	tx, err := w.db.Begin()
	if err != nil {
		return err
	}
	defer tx.Rollback()
	res, err := tx.Exec(`INSERT INTO sessions(started, tool, version, host, pid, mode, heartbeat)
		VALUES(?, ?, ?, ?, ?, ?, ?)`, meta.Start.UTC().Format(time.RFC3339Nano), meta.Tool,
		meta.Version, meta.Host, os.Getpid(), meta.Mode, time.Now().UnixNano())
	if err != nil {
		return fmt.Errorf("session: %w", err)
	}
	if w.session, err = res.LastInsertId(); err != nil {
		return fmt.Errorf("session: %w", err)
	}
	for _, s := range meta.Sources {
		if _, err := tx.Exec("INSERT OR IGNORE INTO sources(idx, name, kind, device) VALUES(?, ?, ?, ?)",
			s.Index, s.Name, s.Kind, s.Device); err != nil {
			return fmt.Errorf("sources: %w", err)
		}
	}
	return tx.Commit()
}

// Write records a batch. It encodes in the caller's goroutine and never
// blocks on the disk: when the queue is full the block is dropped, counted
// (Dropped) and noted as an overrun event, unless Options.Lossless. The
// caller keeps the batch; Write does not retain it.
func (w *Writer) Write(batch []bus.Message) {
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.stopped || w.closed {
		w.dropped += uint64(len(batch))
		return
	}
	if len(batch) > 0 {
		w.lastDataT = batch[len(batch)-1].T
	}
	for i := range batch {
		if w.enc.full() {
			w.sealLocked(false)
			if w.stopped { // stopped while waiting for room
				w.dropped += uint64(len(batch) - i)
				return
			}
		}
		if !w.enc.add(&batch[i]) {
			w.invalid++
		}
	}
}

// sealLocked seals the current block into the queue. From the writer
// goroutine (force) the block is always queued.
func (w *Writer) sealLocked(force bool) {
	for w.enc.n > 0 && !force && len(w.queue) >= w.opt.QueueBlocks {
		if !w.opt.Lossless || w.stopped {
			w.dropLocked()
			return
		}
		// Waiting releases the lock: the writer goroutine's tick may seal
		// this block meanwhile, another Write may fill the next one.
		w.room.Wait()
	}
	if w.enc.n == 0 {
		return
	}
	var buf []byte
	if n := len(w.free); n > 0 {
		buf, w.free = w.free[n-1], w.free[:n-1]
	}
	info := blockInfo{t0: w.enc.minT, t1: w.enc.maxT, n: w.enc.n}
	w.queue = append(w.queue, sealed{data: w.enc.seal(buf[:0]), info: info})
	w.enc.reset()
	if len(w.queue) >= w.opt.CommitBlocks {
		select {
		case w.kick <- struct{}{}:
		default:
		}
	}
}

func (w *Writer) dropLocked() {
	o := &w.over
	if o.blocks == 0 || w.enc.minT < o.from {
		o.from = w.enc.minT
	}
	o.to = max(o.to, w.enc.maxT)
	o.blocks++
	o.msgs += uint64(w.enc.n)
	w.dropped += uint64(w.enc.n)
	w.enc.reset()
}

// Profile records a profile version taking effect at data time t (ns).
func (w *Writer) Profile(t int64, name, text, hash string) {
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.pendingFullLocked() {
		return
	}
	w.profiles = append(w.profiles, ProfileVersion{T: t, Name: name, Hash: hash, Text: text})
}

// Event records an event. An empty Kind is stored as "note". Set Source to
// NoSource for an event of no particular source (the zero value is source 0).
func (w *Writer) Event(e Event) {
	if e.Kind == "" {
		e.Kind = EventNote
	}
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.pendingFullLocked() {
		return
	}
	w.events = append(w.events, e)
}

// Stats records the decimated values of one second of data time (sec in
// Unix seconds). Rows with NaN or infinite values are skipped; a second
// written twice for a binding keeps the last rows.
func (w *Writer) Stats(sec int64, rows []StatRow) {
	w.mu.Lock()
	defer w.mu.Unlock()
	for _, r := range rows {
		if bad(r.Min) || bad(r.Max) || bad(r.Last) {
			continue
		}
		if w.pendingFullLocked() {
			return
		}
		w.stats = append(w.stats, statItem{sec: sec, row: r})
	}
}

func bad(f float64) bool { return math.IsNaN(f) || math.IsInf(f, 0) }

func (w *Writer) pendingFullLocked() bool {
	if w.stopped {
		return true
	}
	if len(w.events)+len(w.profiles)+len(w.stats) >= maxPending {
		w.over.otherItems++
		return true
	}
	return false
}

// Err returns the error that stopped the recording (disk full, file gone,
// size limit), or nil while it records. Live processing is not affected.
func (w *Writer) Err() error {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.err
}

// Dropped is the number of messages not recorded: dropped with a full queue,
// or written after the recording stopped or while closing.
func (w *Writer) Dropped() uint64 {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.dropped
}

// Committed returns how many messages are durably in the file (committed to
// the WAL) and the largest data time among them.
func (w *Writer) Committed() (messages uint64, lastT int64) {
	return w.committed.Load(), w.lastT.Load()
}

// Path is the file being written.
func (w *Writer) Path() string { return w.path }

// Close seals and commits everything written, marks the session closed and
// closes the file. It returns the error that stopped the recording, if any.
// Close is idempotent.
func (w *Writer) Close() error {
	w.mu.Lock()
	if w.closed {
		err := w.err
		w.mu.Unlock()
		return err
	}
	w.closed = true
	w.mu.Unlock()
	close(w.quit)
	<-w.done

	w.mu.Lock()
	err := w.err
	w.stopped = true
	dropped := w.dropped
	w.room.Broadcast()
	w.mu.Unlock()
	// Mark the session closed even after an error (a full disk may still
	// take this small update); the error that stopped the recording wins.
	_, e := w.db.Exec("UPDATE sessions SET closed=?, heartbeat=?, messages=?, dropped=? WHERE id=?",
		time.Now().UTC().Format(time.RFC3339Nano), time.Now().UnixNano(), w.committed.Load(), dropped, w.session)
	if e != nil && err == nil {
		err = fmt.Errorf("close recording %s: %w", w.path, e)
	}
	w.closeStatements()
	if e := w.db.Close(); e != nil && err == nil {
		err = fmt.Errorf("close recording %s: %w", w.path, e)
	}
	return err
}
