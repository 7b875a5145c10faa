package server

import (
	"crypto/rand"
	"crypto/sha256"
	"crypto/subtle"
	"encoding/base64"
	"fmt"
	"net"
	"net/http"
	"net/url"
	"os"
	"strings"
	"time"
)

// cookieName holds the token after the first visit.
const cookieName = "packwatch_token"

// NewToken returns a fresh access token: 128 random bits, base64url without
// padding (22 characters, short enough for a QR code).
func NewToken() (string, error) {
	var b [16]byte
	if _, err := rand.Read(b[:]); err != nil {
		return "", fmt.Errorf("generate token: %w", err)
	}
	return base64.RawURLEncoding.EncodeToString(b[:]), nil
}

// guard holds the request checks: Host, Origin and token.
type guard struct {
	tokenSum  [32]byte // SHA-256 of the token; zero when no token is required
	needToken bool
	hostnames map[string]bool
	tls       bool
}

func newGuard(token string, allowed []string, useTLS bool) *guard {
	g := &guard{hostnames: map[string]bool{"localhost": true}, tls: useTLS}
	if token != "" {
		g.needToken = true
		g.tokenSum = sha256.Sum256([]byte(token))
	}
	if h, err := os.Hostname(); err == nil && h != "" {
		h = strings.ToLower(h)
		g.hostnames[h] = true
		g.hostnames[h+".local"] = true
	}
	for _, h := range allowed {
		g.hostnames[strings.TrimSuffix(strings.ToLower(h), ".")] = true
	}
	return g
}

// hostOK reports whether a Host header names this server. IP literals are
// always accepted: DNS rebinding needs a name the attacker controls, so a
// page reaching us through rebinding always carries a foreign name.
func (g *guard) hostOK(hostport string) bool {
	if hostport == "" {
		return false
	}
	host := hostport
	if h, _, err := net.SplitHostPort(hostport); err == nil {
		host = h
	}
	host = strings.TrimSuffix(strings.ToLower(strings.Trim(host, "[]")), ".")
	if net.ParseIP(host) != nil {
		return true
	}
	if strings.HasSuffix(host, ".localhost") {
		return true
	}
	return g.hostnames[host]
}

// originOK reports whether the Origin header is this server itself. An
// absent Origin is refused: browsers send one on every websocket and POST,
// and other clients can set it.
func (g *guard) originOK(r *http.Request) bool {
	o := r.Header.Get("Origin")
	if o == "" || o == "null" {
		return false
	}
	u, err := url.Parse(o)
	if err != nil || (u.Scheme != "http" && u.Scheme != "https") {
		return false
	}
	// An origin is scheme://host[:port] and nothing else (RFC 6454 §7).
	if u.User != nil || (u.Path != "" && u.Path != "/") || u.RawQuery != "" || u.Fragment != "" || u.Opaque != "" {
		return false
	}
	return strings.EqualFold(u.Host, r.Host)
}

// tokenOK checks the token from the query (?token=), the cookie or an
// Authorization: Bearer header, in constant time. fromQuery reports that it
// came in the query, so the caller can store it in the cookie.
func (g *guard) tokenOK(r *http.Request) (ok, fromQuery bool) {
	if !g.needToken {
		return true, false
	}
	if t := r.URL.Query().Get("token"); t != "" && g.match(t) {
		return true, true
	}
	if c, err := r.Cookie(cookieName); err == nil && g.match(c.Value) {
		return true, false
	}
	if a, ok := strings.CutPrefix(r.Header.Get("Authorization"), "Bearer "); ok && g.match(a) {
		return true, false
	}
	return false, false
}

// match compares hashes so neither content nor length leaks through timing.
func (g *guard) match(t string) bool {
	sum := sha256.Sum256([]byte(t))
	return subtle.ConstantTimeCompare(sum[:], g.tokenSum[:]) == 1
}

// middleware applies the security headers and the Host, token and Origin
// checks to every request.
func (g *guard) middleware(token string) func(http.Handler) http.Handler {
	return func(next http.Handler) http.Handler {
		return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
			h := w.Header()
			h.Set("Content-Security-Policy", "default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data:; connect-src 'self'; media-src 'none'; object-src 'none'; frame-ancestors 'none'; base-uri 'none'; form-action 'self'")
			h.Set("X-Content-Type-Options", "nosniff")
			h.Set("Referrer-Policy", "no-referrer")
			h.Set("X-Frame-Options", "DENY")
			h.Set("Cross-Origin-Opener-Policy", "same-origin")
			h.Set("Cross-Origin-Resource-Policy", "same-origin")
			if !g.hostOK(r.Host) {
				http.Error(w, "packwatch: unknown Host header "+quoteShort(r.Host)+"; open the dashboard by its IP address or localhost", http.StatusMisdirectedRequest)
				return
			}
			ok, fromQuery := g.tokenOK(r)
			if !ok {
				http.Error(w, "packwatch: a token is required; open the URL that `packwatch serve` printed (it ends in ?token=...)", http.StatusUnauthorized)
				return
			}
			if fromQuery {
				http.SetCookie(w, &http.Cookie{
					Name: cookieName, Value: token, Path: "/",
					MaxAge: int((30 * 24 * time.Hour).Seconds()), HttpOnly: true,
					Secure: g.tls, SameSite: http.SameSiteLaxMode,
				})
			}
			if r.Method != http.MethodGet && r.Method != http.MethodHead && !g.originOK(r) {
				http.Error(w, "packwatch: cross-origin request refused", http.StatusForbidden)
				return
			}
			next.ServeHTTP(w, r)
		})
	}
}

func quoteShort(s string) string {
	if len(s) > 64 {
		s = s[:64] + "..."
	}
	return fmt.Sprintf("%q", s)
}

// isLoopback reports whether a listen address only accepts local connections.
func isLoopback(a net.Addr) bool {
	switch a := a.(type) {
	case *net.TCPAddr:
		return a.IP.IsLoopback()
	case *net.UnixAddr:
		return true
	}
	return false
}
