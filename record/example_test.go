package record_test

import (
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"time"

	"go.einride.tech/can"

	"packwatch/bus"
	"packwatch/record"
)

// Record a few frames and a console line, then read them back.
func Example() {
	dir, _ := os.MkdirTemp("", "rec")
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "session.db")

	w, err := record.Create(path, record.Meta{Tool: "packwatch", Version: "dev", Mode: "simulated",
		Start: time.Unix(1_773_000_000, 0)}, record.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	t0 := int64(1_773_000_000e9)
	w.Write([]bus.Message{
		{T: t0, Kind: bus.KindCAN, Frame: can.Frame{ID: 0x301, Length: 2, Data: can.Data{0x7b, 0x0e}}},
		{T: t0 + 125e3, Kind: bus.KindCAN, Frame: can.Frame{ID: 0x301, Length: 2, Data: can.Data{0x7c, 0x0e}}},
		{T: t0 + 250e3, Src: 1, Kind: bus.KindLine, Text: "BAL ON 7"},
	})
	w.Event(record.Event{T: t0, Kind: record.EventNote, Source: record.NoSource, Text: "start of balance run"})
	if err := w.Close(); err != nil {
		fmt.Println(err)
		return
	}

	r, err := record.Open(path)
	if err != nil {
		fmt.Println(err)
		return
	}
	defer r.Close()
	fmt.Println(r.Meta().Start, r.Meta().Mode)
	r.Scan(context.Background(), math.MinInt64, math.MaxInt64, func(batch []bus.Message) error {
		for _, m := range batch {
			if m.Kind == bus.KindLine {
				fmt.Printf("+%dµs src %d line %q\n", (m.T-t0)/1000, m.Src, m.Text)
			} else {
				fmt.Printf("+%dµs src %d %03X % x\n", (m.T-t0)/1000, m.Src, m.Frame.ID, m.Frame.Data[:m.Frame.Length])
			}
		}
		return nil
	})
	evs, _ := r.Events()
	fmt.Println(evs[0].Kind, evs[0].Text)
	// Output:
	// 2026-03-08 20:00:00 +0000 UTC simulated
	// +0µs src 0 301 7b 0e
	// +125µs src 0 301 7c 0e
	// +250µs src 1 line "BAL ON 7"
	// note start of balance run
}
