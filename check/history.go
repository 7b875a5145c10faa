package check

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	_ "modernc.org/sqlite" // the database/sql driver "sqlite"
)

// HistoryEnv, when set, is the path of the check history (tests, several
// users on one machine).
const HistoryEnv = "PACKWATCH_CHECK_HISTORY"

// DefaultHistoryPath is the history file: $PACKWATCH_CHECK_HISTORY, else
// checks.db in packwatch's directory of the user's config dir.
func DefaultHistoryPath() (string, error) {
	if p := os.Getenv(HistoryEnv); p != "" {
		return p, nil
	}
	dir, err := os.UserConfigDir()
	if err != nil {
		return "", fmt.Errorf("check history: %w (set %s)", err, HistoryEnv)
	}
	return filepath.Join(dir, "packwatch", "checks.db"), nil
}

// ErrNotFound: no record with that hash.
var ErrNotFound = errors.New("no such check record")

// History stores check records in SQLite, each chained to the one before by
// its hash. Its methods may be called from several goroutines.
type History struct {
	path string
	db   *sql.DB
}

const historySchema = `
CREATE TABLE IF NOT EXISTS checks (
	seq       INTEGER PRIMARY KEY,
	hash      TEXT NOT NULL UNIQUE,
	prev_hash TEXT NOT NULL,
	pack_key  TEXT NOT NULL,
	time      TEXT NOT NULL,
	verdict   TEXT NOT NULL,
	record    TEXT NOT NULL
);
CREATE INDEX IF NOT EXISTS checks_pack ON checks (pack_key, seq);
`

// OpenHistory opens (creating if needed, with its directory) the history
// at path.
func OpenHistory(path string) (*History, error) {
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return nil, fmt.Errorf("open check history %s: %w", path, err)
	}
	abs, err := filepath.Abs(path)
	if err != nil {
		abs = path
	}
	u := "file:" + strings.NewReplacer("%", "%25", "?", "%3f", "#", "%23").Replace(filepath.ToSlash(abs))
	if !strings.HasPrefix(u, "file:/") {
		u = "file:/" + u[len("file:"):]
	}
	db, err := sql.Open("sqlite", u+"?mode=rwc&_pragma=busy_timeout(5000)&_pragma=synchronous(FULL)&_txlock=immediate")
	if err != nil {
		return nil, fmt.Errorf("open check history %s: %w", path, err)
	}
	db.SetMaxOpenConns(1)
	if err := initHistory(db); err != nil {
		db.Close()
		return nil, fmt.Errorf("open check history %s: %w", path, err)
	}
	return &History{path: path, db: db}, nil
}

// historyAppID marks a check history file (SQLite's application_id: "pwck").
const historyAppID = 0x7077636b

// ErrForeign: the file is an SQLite database, but not a check history.
var ErrForeign = errors.New("not a packwatch check history")

// initHistory creates the schema in an empty database and refuses any other
// database, so that a mistyped path never changes a recording.
func initHistory(db *sql.DB) error {
	var app, tables int64
	if err := db.QueryRow("PRAGMA application_id").Scan(&app); err != nil {
		return err
	}
	if err := db.QueryRow("SELECT count(*) FROM sqlite_schema").Scan(&tables); err != nil {
		return err
	}
	switch {
	case app == historyAppID:
	case app == 0 && tables == 0:
		if _, err := db.Exec(fmt.Sprintf("PRAGMA application_id = %d", historyAppID)); err != nil {
			return err
		}
	default:
		return ErrForeign
	}
	// WAL only once the file is known to be ours: the mode is kept in the file.
	if _, err := db.Exec("PRAGMA journal_mode = WAL"); err != nil {
		return err
	}
	_, err := db.Exec(historySchema)
	return err
}

// Path is the history's file.
func (h *History) Path() string { return h.path }

// Close closes the database.
func (h *History) Close() error { return h.db.Close() }

// Save chains r to the last stored record (any pack), computes its hash and
// stores it. r must not have a hash yet.
func (h *History) Save(ctx context.Context, r *Record) error {
	if r.Hash != "" {
		return fmt.Errorf("save check record: already saved as %s", short(r.Hash))
	}
	tx, err := h.db.BeginTx(ctx, nil)
	if err != nil {
		return fmt.Errorf("save check record: %w", err)
	}
	defer tx.Rollback()
	var prev string
	err = tx.QueryRowContext(ctx, "SELECT hash FROM checks ORDER BY seq DESC LIMIT 1").Scan(&prev)
	if err != nil && !errors.Is(err, sql.ErrNoRows) {
		return fmt.Errorf("save check record: %w", err)
	}
	r.PrevHash = prev
	hash, err := r.ComputeHash()
	if err != nil {
		return err
	}
	r.Hash = hash
	body, err := jsonOf(r)
	if err != nil {
		r.Hash = ""
		return err
	}
	if _, err := tx.ExecContext(ctx, "INSERT INTO checks (hash, prev_hash, pack_key, time, verdict, record) VALUES (?, ?, ?, ?, ?, ?)",
		r.Hash, r.PrevHash, r.Pack.Key, r.Time, r.Verdict, string(body)); err != nil {
		r.Hash = ""
		return fmt.Errorf("save check record: %w", err)
	}
	if err := tx.Commit(); err != nil {
		r.Hash = ""
		return fmt.Errorf("save check record: %w", err)
	}
	return nil
}

// Summary is one line of the history list.
type Summary struct {
	Hash     string   `json:"hash"`
	Time     string   `json:"time"`
	Verdict  string   `json:"verdict"`
	Operator string   `json:"operator"`
	PackKey  string   `json:"pack_key"`
	PackName string   `json:"pack_name"`
	Serial   string   `json:"serial"`
	Mode     string   `json:"mode"`
	Failing  []string `json:"failing"` // labels of rules that did not pass
}

// List returns the records of one pack (all packs when packKey is ""),
// newest first, at most limit (0: all).
func (h *History) List(ctx context.Context, packKey string, limit int) ([]Summary, error) {
	q := "SELECT record FROM checks"
	var args []any
	if packKey != "" {
		q += " WHERE pack_key = ?"
		args = append(args, packKey)
	}
	q += " ORDER BY seq DESC"
	if limit > 0 {
		q += fmt.Sprintf(" LIMIT %d", limit)
	}
	rows, err := h.db.QueryContext(ctx, q, args...)
	if err != nil {
		return nil, fmt.Errorf("list checks: %w", err)
	}
	defer rows.Close()
	out := []Summary{}
	for rows.Next() {
		var body string
		if err := rows.Scan(&body); err != nil {
			return nil, fmt.Errorf("list checks: %w", err)
		}
		r, err := ParseRecord([]byte(body))
		if err != nil {
			return nil, err
		}
		out = append(out, r.Summary())
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("list checks: %w", err)
	}
	return out, nil
}

// Summary is the record's line in a history list.
func (r *Record) Summary() Summary {
	s := Summary{Hash: r.Hash, Time: r.Time, Verdict: r.Verdict, Operator: r.Operator, PackKey: r.Pack.Key,
		PackName: r.Pack.Name, Serial: r.Pack.Serial, Mode: r.Data.Mode, Failing: []string{}}
	for _, x := range Sorted(r.Rules) {
		if x.Status == Fail || x.Status == NoData {
			s.Failing = append(s.Failing, x.Label)
		}
	}
	return s
}

// Get returns the record with this hash, or the only one starting with it
// (at least 8 hex digits).
func (h *History) Get(ctx context.Context, hash string) (*Record, error) {
	hash = strings.ToLower(strings.TrimSpace(hash))
	if len(hash) < 8 || strings.Trim(hash, "0123456789abcdef") != "" {
		return nil, fmt.Errorf("check %q: give at least 8 hex digits of its hash: %w", hash, ErrNotFound)
	}
	rows, err := h.db.QueryContext(ctx, "SELECT record FROM checks WHERE substr(hash, 1, ?) = ? LIMIT 2", len(hash), hash)
	if err != nil {
		return nil, fmt.Errorf("get check %s: %w", hash, err)
	}
	defer rows.Close()
	var bodies []string
	for rows.Next() {
		var b string
		if err := rows.Scan(&b); err != nil {
			return nil, fmt.Errorf("get check %s: %w", hash, err)
		}
		bodies = append(bodies, b)
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("get check %s: %w", hash, err)
	}
	switch len(bodies) {
	case 0:
		return nil, fmt.Errorf("check %s: %w", hash, ErrNotFound)
	case 2:
		return nil, fmt.Errorf("check %s: more than one record starts so; give more digits", hash)
	}
	return ParseRecord([]byte(bodies[0]))
}

// Last returns the pack's newest record, nil when it has none.
func (h *History) Last(ctx context.Context, packKey string) (*Record, error) {
	var body string
	err := h.db.QueryRowContext(ctx, "SELECT record FROM checks WHERE pack_key = ? ORDER BY seq DESC LIMIT 1", packKey).Scan(&body)
	if errors.Is(err, sql.ErrNoRows) {
		return nil, nil
	}
	if err != nil {
		return nil, fmt.Errorf("last check of %s: %w", packKey, err)
	}
	return ParseRecord([]byte(body))
}

// Problem is one finding of Verify.
type Problem struct {
	Seq  int64  `json:"seq"`
	Hash string `json:"hash"`
	Text string `json:"text"`
}

// Verify walks the whole chain and reports every record whose content does
// not match its hash (edited), whose stored columns disagree with its
// content, or whose previous hash is not the hash of the record before it
// (a record removed or inserted). The chain cannot show the removal of the
// newest records: compare the head hash with one printed or kept elsewhere
// (the report, the session's recording). n is the number of records.
func (h *History) Verify(ctx context.Context) (n int, head string, problems []Problem, err error) {
	rows, err := h.db.QueryContext(ctx, "SELECT seq, hash, prev_hash, pack_key, verdict, record FROM checks ORDER BY seq")
	if err != nil {
		return 0, "", nil, fmt.Errorf("verify check history: %w", err)
	}
	defer rows.Close()
	prev := ""
	for rows.Next() {
		var seq int64
		var hash, prevHash, key, verdict, body string
		if err := rows.Scan(&seq, &hash, &prevHash, &key, &verdict, &body); err != nil {
			return n, head, problems, fmt.Errorf("verify check history: %w", err)
		}
		n++
		bad := func(format string, a ...any) {
			problems = append(problems, Problem{Seq: seq, Hash: hash, Text: fmt.Sprintf(format, a...)})
		}
		r, perr := ParseRecord([]byte(body))
		switch {
		case perr != nil:
			bad("record %d is unreadable: %v", seq, perr)
		case r.Hash != hash || r.PrevHash != prevHash || r.Pack.Key != key || r.Verdict != verdict:
			bad("record %d: its stored columns do not match its content (edited)", seq)
		default:
			if err := r.VerifyHash(); err != nil {
				bad("record %d of %s: content does not match its hash (edited)", seq, r.Time)
			}
		}
		if prevHash != prev {
			bad("record %d: the record before it in the chain is missing or was changed (previous hash %s, chain has %s)", seq, short(prevHash), short(prev))
		}
		prev, head = hash, hash
	}
	if err := rows.Err(); err != nil {
		return n, head, problems, fmt.Errorf("verify check history: %w", err)
	}
	return n, head, problems, nil
}
