package main

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"go.einride.tech/can"

	"packwatch/bus"
)

// TestDecodeLiveTCP: `decode --source` reads a live tcp-can source (16-byte
// SocketCAN frames over TCP from a gateway) through the same decode path as
// a capture.
func TestDecodeLiveTCP(t *testing.T) {
	srv, err := bus.ListenTCPCAN("127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	profile := `[pack]
name = "Bench pack"
cells = 2
capacity_ah = 10
[limits]
cell_high_v = 4.2
cell_low_v = 3.0
[[source]]
name = "gw"
kind = "tcp-can"
device = "` + srv.Addr() + `"
[[frame]]
id = 0x300
  [[frame.field]]
  bind = "cell[1..2].voltage"
  byte = 0
  size = 2
  scale = 0.001
`
	path := filepath.Join(t.TempDir(), "p.toml")
	os.WriteFile(path, []byte(profile), 0o644)
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var out, errb syncBuffer
	code := make(chan int, 1)
	go func() { code <- run(ctx, []string{"decode", "--profile", path, "--source", "gw"}, &out, &errb) }()
	f := can.Frame{ID: 0x300, Length: 4, Data: can.Data{0x4C, 0x0F, 0x50, 0x0F}}
	deadline := time.Now().Add(20 * time.Second)
	for !strings.Contains(out.String(), `"bind":"cell[2].voltage","value":3.92}`) {
		if time.Now().After(deadline) {
			t.Fatalf("no decoded output; stdout %q stderr %q", out.String(), errb.String())
		}
		srv.WriteFrames([]can.Frame{f}) // until the source has connected and decoded one
		time.Sleep(20 * time.Millisecond)
	}
	if !strings.Contains(out.String(), `"bind":"cell[1].voltage","value":3.916}`) {
		t.Errorf("cell 1 missing: %s", out.String())
	}
	cancel()
	if c := <-code; c != 0 {
		t.Errorf("exit %d: %s", c, errb.String())
	}
}
