package record

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"strings"
)

// SchemaVersion is the version of the file layout this package writes, kept
// in PRAGMA user_version and in meta.schema_version. Readers refuse a newer one.
const SchemaVersion = 1

// ApplicationID marks a SQLite file as a packwatch recording (PRAGMA
// application_id, bytes 68–71 of the file header): "pkw1".
const ApplicationID = 0x706B7731

// Errors callers can match with errors.Is.
var (
	// ErrForeign: the file is not a packwatch recording.
	ErrForeign = errors.New("not a packwatch recording")
	// ErrNewer: the recording was made by a newer packwatch.
	ErrNewer = errors.New("recording made by a newer packwatch")
)

// schemaSQL creates a recording. SCHEMA.md documents it for users.
const schemaSQL = `
CREATE TABLE meta (
  key   TEXT PRIMARY KEY,
  value TEXT NOT NULL
);
CREATE TABLE sessions (
  id        INTEGER PRIMARY KEY,
  started   TEXT NOT NULL,
  tool      TEXT NOT NULL,
  version   TEXT NOT NULL,
  host      TEXT NOT NULL,
  pid       INTEGER NOT NULL,
  mode      TEXT NOT NULL,
  heartbeat INTEGER NOT NULL,
  closed    TEXT,
  messages  INTEGER NOT NULL DEFAULT 0,
  dropped   INTEGER NOT NULL DEFAULT 0
);
CREATE TABLE sources (
  idx    INTEGER PRIMARY KEY,
  name   TEXT NOT NULL,
  kind   TEXT NOT NULL,
  device TEXT NOT NULL
);
CREATE TABLE profiles (
  id   INTEGER PRIMARY KEY,
  t    INTEGER NOT NULL,
  name TEXT NOT NULL,
  hash TEXT NOT NULL,
  text TEXT NOT NULL
);
CREATE TABLE blocks (
  id   INTEGER PRIMARY KEY,
  t0   INTEGER NOT NULL,
  t1   INTEGER NOT NULL,
  n    INTEGER NOT NULL,
  data BLOB NOT NULL
);
CREATE INDEX blocks_t0 ON blocks (t0, t1);
CREATE INDEX blocks_t1 ON blocks (t1);
CREATE TABLE events (
  id     INTEGER PRIMARY KEY,
  t      INTEGER NOT NULL,
  kind   TEXT NOT NULL,
  source INTEGER,
  text   TEXT NOT NULL,
  json   TEXT
);
CREATE INDEX events_t ON events (t);
CREATE TABLE stats (
  bind TEXT NOT NULL,
  sec  INTEGER NOT NULL,
  min  REAL NOT NULL,
  max  REAL NOT NULL,
  last REAL NOT NULL,
  PRIMARY KEY (bind, sec)
) WITHOUT ROWID;
`

// writerPragmas are set on every connection of a writer through the DSN
// (db.Exec would set them on one pooled connection only).
var writerPragmas = []string{
	"busy_timeout(5000)",
	"journal_mode(WAL)",
	"synchronous(NORMAL)",
	"foreign_keys(0)",
}

// readerPragmas are set on every connection of a reader.
var readerPragmas = []string{
	"busy_timeout(5000)",
	"query_only(1)",
	"mmap_size(268435456)", // read through a 256 MiB map instead of a read call per page
}

// dsn builds a "file:" URI for modernc.org/sqlite: SQLite's own mode
// parameter (ro, rw, rwc) decides whether a missing file is created.
func dsn(path, mode string, pragmas []string, extra ...string) string {
	abs, err := filepath.Abs(path)
	if err == nil {
		path = abs
	}
	p := filepath.ToSlash(path)
	if runtime.GOOS == "windows" && !strings.HasPrefix(p, "/") {
		p = "/" + p // file:/C:/dir/x.db
	}
	r := strings.NewReplacer("%", "%25", "?", "%3f", "#", "%23")
	var b strings.Builder
	b.WriteString("file:")
	b.WriteString(r.Replace(p))
	b.WriteString("?mode=")
	b.WriteString(mode)
	for _, pr := range pragmas {
		b.WriteString("&_pragma=")
		b.WriteString(pr)
	}
	for _, e := range extra {
		b.WriteString("&")
		b.WriteString(e)
	}
	return b.String()
}

// checkHeader reads the SQLite file header of path and refuses anything that
// is not a packwatch recording of a known schema, before SQLite touches the
// file (opening a foreign database in WAL mode would change it).
func checkHeader(path string) error {
	f, err := os.Open(path)
	if err != nil {
		return fmt.Errorf("open recording %s: %w", path, err)
	}
	defer f.Close()
	var h [100]byte
	n, err := io.ReadFull(f, h[:])
	switch {
	case n == 0:
		return fmt.Errorf("open recording %s: empty file: %w", path, ErrForeign)
	case err != nil || string(h[:16]) != "SQLite format 3\x00":
		return fmt.Errorf("open recording %s: not a SQLite database: %w", path, ErrForeign)
	}
	if id := binary.BigEndian.Uint32(h[68:]); id != ApplicationID {
		return fmt.Errorf("open recording %s: a SQLite database with application id %#x: %w", path, id, ErrForeign)
	}
	if v := binary.BigEndian.Uint32(h[60:]); v > SchemaVersion {
		return fmt.Errorf("open recording %s: schema version %d, this packwatch reads up to %d: %w", path, v, SchemaVersion, ErrNewer)
	} else if v == 0 {
		return fmt.Errorf("open recording %s: no schema version: %w", path, ErrCorrupt)
	}
	return nil
}
