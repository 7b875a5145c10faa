package check

import (
	"context"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"packwatch/config"
	"packwatch/record"
)

// A result saved through the handler into a session's recording comes back
// from RecordedChecks, verified (what packwatch report lists).
func TestRecordedChecks(t *testing.T) {
	dir := t.TempDir()
	recPath := filepath.Join(dir, "s.db")
	w, err := record.Create(recPath, record.Meta{Tool: "packwatch", Mode: "live"}, record.Options{})
	if err != nil {
		t.Fatal(err)
	}
	hist, err := OpenHistory(filepath.Join(dir, "h.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer hist.Close()
	p, err := config.Load("testdata/pod.toml")
	if err != nil {
		t.Fatal(err)
	}
	r := NewRecord(Window{}, Raw{Format: RawFormat}, Resolve(p), Inputs{Profile: p, Now: time.Now(), Data: DataInfo{Mode: ModeLive}})
	if err := hist.Save(context.Background(), r); err != nil {
		t.Fatal(err)
	}
	body, _ := r.JSON()
	w.Event(record.Event{T: time.Now().UnixNano(), Kind: record.EventCheck, Source: record.NoSource, Text: EventText(r), JSON: string(body)})
	w.Event(record.Event{T: time.Now().UnixNano(), Kind: record.EventCheck, Source: record.NoSource, Text: "edited", JSON: strings.Replace(string(body), "could-not-check", "go", 1)})
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	rd, err := record.Open(recPath)
	if err != nil {
		t.Fatal(err)
	}
	defer rd.Close()
	got, err := RecordedChecks(rd)
	if err != nil || len(got) != 2 {
		t.Fatalf("%v %+v", err, got)
	}
	if got[0].Err != nil || got[0].Record.Hash != r.Hash || !strings.Contains(got[0].Text, "COULD NOT CHECK") {
		t.Errorf("first: %+v", got[0])
	}
	if got[1].Err == nil {
		t.Error("an edited record in the recording passes")
	}
}
