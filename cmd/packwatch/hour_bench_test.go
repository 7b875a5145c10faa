package main

import (
	"context"
	"io"
	"path/filepath"
	"testing"

	"packwatch/bus"
	"packwatch/record"
)

// hourRecording makes a one-hour recording at 1,000 frames/s (3.6 M frames)
// of the example profile: simulate to a capture, then import.
func hourRecording(b *testing.B) string {
	b.Helper()
	dir := b.TempDir()
	capture, db := filepath.Join(dir, "hour.capture"), filepath.Join(dir, "hour.db")
	ctx := context.Background()
	if code := run(ctx, []string{"simulate", "--profile", exampleProfile, "--to", "capture:" + capture, "--for", "1h", "--speed", "max", "--rate", "1000"}, io.Discard, io.Discard); code != 0 {
		b.Fatalf("simulate: exit %d", code)
	}
	if code := run(ctx, []string{"import", capture, "--profile", exampleProfile, "-o", db}, io.Discard, io.Discard); code != 0 {
		b.Fatalf("import: exit %d", code)
	}
	return db
}

type countSink struct{ n int }

func (c *countSink) Deliver(batch []bus.Message) { c.n += len(batch) }
func (c *countSink) Status(bus.Status)           {}

// BenchmarkHourRecording: one hour at 1,000 frames/s, read raw (the plain
// scan), replayed at --speed max through the engine (the dashboard's path
// without the page), and exported to CSV (a row per message and one per
// second).
func BenchmarkHourRecording(b *testing.B) {
	db := hourRecording(b)
	ctx := context.Background()
	b.Run("scan", func(b *testing.B) {
		r, err := record.Open(db)
		if err != nil {
			b.Fatal(err)
		}
		defer r.Close()
		for b.Loop() {
			var c countSink
			if err := r.Scan(ctx, 0, 1<<62, func(batch []bus.Message) error { c.Deliver(batch); return nil }); err != nil || c.n != 3_600_000 {
				b.Fatalf("scan: %d messages, %v", c.n, err)
			}
		}
		b.ReportMetric(3.6e6*float64(b.N)/b.Elapsed().Seconds(), "frames/s")
	})
	b.Run("replay-max", func(b *testing.B) {
		r, err := record.Open(db)
		if err != nil {
			b.Fatal(err)
		}
		defer r.Close()
		ps, ms, err := recordingProfiles(r, "", io.Discard)
		if err != nil {
			b.Fatal(err)
		}
		for b.Loop() {
			s, err := newSessionOn(recordingDevices(r), true, ps, ms, "replay", nil, quiet)
			if err != nil {
				b.Fatal(err)
			}
			if err := record.NewReplay(r, record.ReplayOptions{}).Run(ctx, s); err != nil {
				b.Fatal(err)
			}
		}
		b.ReportMetric(3.6e6*float64(b.N)/b.Elapsed().Seconds(), "frames/s")
	})
	for _, c := range []struct{ name, every string }{{"export-csv-every-message", ""}, {"export-csv-every-1s", "1s"}} {
		b.Run(c.name, func(b *testing.B) {
			args := []string{"export", db, "-o", filepath.Join(b.TempDir(), "out.csv")}
			if c.every != "" {
				args = append(args, "--every", c.every)
			}
			for b.Loop() {
				if code := run(ctx, args, io.Discard, io.Discard); code != 0 {
					b.Fatalf("export: exit %d", code)
				}
			}
			b.ReportMetric(3.6e6*float64(b.N)/b.Elapsed().Seconds(), "frames/s")
		})
	}
}
