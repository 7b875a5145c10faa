package record

import (
	"database/sql"
	"path/filepath"
	"strings"
	"testing"
)

// TestScanQueryPlan: Scan's query walks the (t0, t1) index, checks t1
// there without reading the table, and needs no sort (SQLite "EXPLAIN QUERY
// PLAN"; a temporary b-tree or a full scan would read every block's first
// page on each seek).
func TestScanQueryPlan(t *testing.T) {
	path := filepath.Join(t.TempDir(), "s.db")
	w, err := Create(path, testMeta, Options{})
	if err != nil {
		t.Fatal(err)
	}
	w.Write(packTraffic(10*MaxBlockMessages, 1))
	w.Close()
	db, err := sql.Open("sqlite", path)
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	db.Exec("ANALYZE")
	rows, err := db.Query("EXPLAIN QUERY PLAN "+scanQuery, 0, 1)
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	var plan []string
	for rows.Next() {
		var id, parent, notused int
		var detail string
		if err := rows.Scan(&id, &parent, &notused, &detail); err != nil {
			t.Fatal(err)
		}
		plan = append(plan, detail)
	}
	p := strings.Join(plan, "; ")
	if !strings.Contains(p, "USING INDEX blocks_t0") || strings.Contains(p, "TEMP B-TREE") {
		t.Errorf("plan %q: want the blocks_t0 index and no sort", p)
	}
}
