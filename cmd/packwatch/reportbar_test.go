//go:build linux

package main

import (
	"bytes"
	"context"
	"io"
	"os"
	"strings"
	"testing"

	"github.com/creack/pty"
)

// TestReportProgressBar: on a terminal, reading a file draws a bar on
// stderr and clears it when done; elsewhere nothing is drawn (the other
// tests' stderr is a buffer and stays free of bar text).
func TestReportProgressBar(t *testing.T) {
	cap := writeSynthCapture(t)
	master, tty, err := pty.Open()
	if err != nil {
		if os.Getenv("PACKWATCH_NO_SKIP") == "1" {
			t.Fatalf("no pseudo-terminal: %v", err)
		}
		t.Skipf("no pseudo-terminal: %v", err)
	}
	defer master.Close()
	got := make(chan string, 1)
	go func() {
		var b bytes.Buffer
		io.Copy(&b, master) // ends when the terminal side closes
		got <- b.String()
	}()
	var out bytes.Buffer
	code := runReport(context.Background(), []string{cap, "--profile", analyzeProfile}, &out, tty)
	tty.Close()
	text := <-got
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, text)
	}
	if !strings.Contains(text, "reading session.capture [") || !strings.Contains(text, "100%") || !strings.Contains(text, "\x1b[K") {
		t.Errorf("no progress bar on the terminal: %q", text[:min(len(text), 200)])
	}
	var plain bytes.Buffer
	if code := runReport(context.Background(), []string{cap, "--profile", analyzeProfile}, &out, &plain); code != exitOK || strings.Contains(plain.String(), "[#") {
		t.Errorf("bar drawn on a non-terminal: %q", plain.String())
	}
}
