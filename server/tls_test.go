package server

import (
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"math/big"
	"net"
	"net/http"
	"strings"
	"testing"
	"time"

	"github.com/gorilla/websocket"
)

// selfSigned makes a certificate for 127.0.0.1, for the TLS test only.
func selfSigned(t *testing.T) (tls.Certificate, *x509.CertPool) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber: big.NewInt(1),
		Subject:      pkix.Name{CommonName: "packwatch test"},
		NotBefore:    time.Now().Add(-time.Hour),
		NotAfter:     time.Now().Add(time.Hour),
		IPAddresses:  []net.IP{net.IPv4(127, 0, 0, 1)},
		KeyUsage:     x509.KeyUsageDigitalSignature,
		ExtKeyUsage:  []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth},
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	leaf, _ := x509.ParseCertificate(der)
	pool := x509.NewCertPool()
	pool.AddCert(leaf)
	return tls.Certificate{Certificate: [][]byte{der}, PrivateKey: key, Leaf: leaf}, pool
}

func TestTLS(t *testing.T) {
	cert, pool := selfSigned(t)
	rs := startServer(t, Options{
		Engine:    newFakeEngine(4, 1),
		Listener:  lanListener(t),
		TLSConfig: &tls.Config{Certificates: []tls.Certificate{cert}, MinVersion: tls.VersionTLS12},
	})
	if !strings.HasPrefix(rs.s.URL(), "https://") {
		t.Errorf("URL %q, want https", rs.s.URL())
	}
	// The listener reports a LAN address; dial its real loopback address.
	real := rs.s.opts.Listener.(addrListener).Listener.Addr().String()
	client := &http.Client{Transport: &http.Transport{TLSClientConfig: &tls.Config{RootCAs: pool}}}
	defer client.CloseIdleConnections()
	waitFor(t, "first tick", 10*time.Second, func() bool { return rs.s.Latest() != nil })
	resp, err := client.Get("https://" + real + "/?token=" + rs.s.Token())
	if err != nil {
		t.Fatalf("https GET: %v", err)
	}
	resp.Body.Close()
	if resp.StatusCode != 200 {
		t.Fatalf("status %d", resp.StatusCode)
	}
	c := resp.Cookies()
	if len(c) != 1 || !c[0].Secure {
		t.Errorf("token cookie over TLS = %+v, want Secure", c)
	}
	// Plain HTTP to the TLS port gets no page.
	if r, err := http.Get("http://" + real + "/?token=" + rs.s.Token()); err == nil {
		r.Body.Close()
		if r.StatusCode == 200 {
			t.Error("plain HTTP served the page on the TLS port")
		}
	}
	// wss with the cookie.
	d := &websocket.Dialer{TLSClientConfig: &tls.Config{RootCAs: pool}, HandshakeTimeout: 10 * time.Second}
	ws, _, err := d.Dial("wss://"+real+"/ws", http.Header{"Origin": {"https://" + real}, "Cookie": {cookieName + "=" + rs.s.Token()}})
	if err != nil {
		t.Fatalf("wss: %v", err)
	}
	r := startReader(ws)
	defer r.close()
	waitFor(t, "a snapshot over wss", 10*time.Second, func() bool { return r.n.Load() > 0 })
}
