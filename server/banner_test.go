package server

import (
	"strings"
	"testing"
)

func TestBanner(t *testing.T) {
	s := newTestServer(t, Options{Listener: lanListener(t)})
	var b strings.Builder
	writeBanner(&b, s)
	out := b.String()
	if !strings.Contains(out, "http://192.0.2.10:8080/?token="+s.Token()) {
		t.Errorf("banner lacks the URL with token:\n%s", out)
	}
	// A QR code drawn with half blocks: many lines of block characters.
	lines := 0
	for _, l := range strings.Split(out, "\n") {
		if strings.ContainsAny(l, "█▀▄") {
			lines++
		}
	}
	if lines < 15 {
		t.Errorf("banner has %d QR lines, want a QR code:\n%s", lines, out)
	}
	// Loopback without token: the URL only.
	b.Reset()
	writeBanner(&b, newTestServer(t, Options{}))
	if strings.ContainsAny(b.String(), "█▀▄") || !strings.HasPrefix(b.String(), "packwatch dashboard: http://127.0.0.1:") {
		t.Errorf("loopback banner:\n%s", b.String())
	}
}
