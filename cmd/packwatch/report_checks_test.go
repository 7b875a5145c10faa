package main

import (
	"path/filepath"
	"strings"
	"testing"
	"time"

	"packwatch/record"
)

// TestReportListsRecordedChecks: report names the check results a session
// recorded and says when one does not match its hash.
func TestReportListsRecordedChecks(t *testing.T) {
	db := filepath.Join(t.TempDir(), "rec.db")
	if code, _, errOut := runCLI(t, "import", exampleCapture, "--profile", exampleProfile, "-o", db); code != 0 {
		t.Fatal(errOut)
	}
	w, err := record.Create(db, record.Meta{Tool: "packwatch", Start: time.Now()}, record.Options{Append: true})
	if err != nil {
		t.Fatal(err)
	}
	w.Event(record.Event{T: 1777622400e9, Kind: record.EventCheck, Source: record.NoSource, Text: "GO for pack test", JSON: `{"verdict":"go","hash":"00"}`})
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	code, out, errOut := runCLI(t, "report", db)
	if code != 0 {
		t.Fatalf("report: %d %s", code, errOut)
	}
	if !strings.Contains(out, "pre-flight checks recorded in this session: 1") || !strings.Contains(out, "GO for pack test (RECORD DOES NOT MATCH ITS HASH") {
		t.Errorf("report output:\n%s", out)
	}
}
