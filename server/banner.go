package server

import (
	"fmt"
	"io"
	"net"

	qrcode "github.com/skip2/go-qrcode"
)

// writeBanner prints where to open the dashboard: the URL with its token
// and, when a token is needed (another device will connect), a QR code of
// it drawn with text blocks for a phone or tablet camera.
func writeBanner(w io.Writer, s *Server) {
	u := s.URL()
	fmt.Fprintf(w, "packwatch dashboard: %s\n", u)
	if s.token == "" {
		return
	}
	if qr, err := QR(u); err == nil {
		fmt.Fprint(w, qr)
	}
	fmt.Fprintln(w, "Anyone with this URL can watch the pack; the token is kept in a cookie after the first visit.")
}

// QR renders text as a QR code in terminal block characters (two modules
// a character row), dark modules drawn as blocks.
func QR(text string) (string, error) {
	q, err := qrcode.New(text, qrcode.Medium)
	if err != nil {
		return "", fmt.Errorf("qr code: %w", err)
	}
	return q.ToSmallString(false), nil
}

// firstLANAddress is the first up, non-loopback IPv4 address of this
// machine, or "localhost" when there is none.
func firstLANAddress() string {
	ifs, err := net.Interfaces()
	if err != nil {
		return "localhost"
	}
	for _, ifc := range ifs {
		if ifc.Flags&net.FlagUp == 0 || ifc.Flags&net.FlagLoopback != 0 {
			continue
		}
		addrs, _ := ifc.Addrs()
		for _, a := range addrs {
			if n, ok := a.(*net.IPNet); ok && n.IP.To4() != nil && !n.IP.IsLinkLocalUnicast() {
				return n.IP.String()
			}
		}
	}
	return "localhost"
}
