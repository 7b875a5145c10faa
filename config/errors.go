package config

import (
	"errors"
	"fmt"
	"strings"
)

// Sentinel errors that callers can match with errors.Is on a *Problem.
var (
	ErrUnknownKey = errors.New("unknown key")
	ErrSyntax     = errors.New("syntax error")
	ErrType       = errors.New("wrong type")
	ErrMissing    = errors.New("missing")
	ErrBinding    = errors.New("bad binding")
	ErrLayout     = errors.New("bad field layout")
	ErrRange      = errors.New("out of range")
	ErrConflict   = errors.New("conflict")
)

// Problem is one error or warning in a profile, at a place in its file.
// Its text is "FILE:LINE:COL: message" and, on the next line, a hint.
type Problem struct {
	File    string
	Pos     Pos
	Msg     string
	Hint    string
	Warning bool
	Err     error // sentinel kind, for errors.Is
}

// Error formats the problem as FILE:LINE:COL: message, then the hint.
func (p *Problem) Error() string {
	var b strings.Builder
	file := p.File
	if file == "" {
		file = "profile"
	}
	fmt.Fprintf(&b, "%s:%d:%d: ", file, p.Pos.Line, p.Pos.Col)
	if p.Warning {
		b.WriteString("warning: ")
	}
	b.WriteString(p.Msg)
	if p.Hint != "" {
		b.WriteString("\n\thint: ")
		b.WriteString(p.Hint)
	}
	return b.String()
}

// Unwrap returns the sentinel kind.
func (p *Problem) Unwrap() error { return p.Err }

// LoadError holds every error found in a profile, in file order.
type LoadError struct {
	Problems []*Problem
}

// Error lists every problem, one per line (hints indented below).
func (e *LoadError) Error() string {
	var parts []string
	for _, p := range e.Problems {
		parts = append(parts, p.Error())
	}
	return strings.Join(parts, "\n")
}

// Unwrap exposes the problems to errors.Is and errors.As.
func (e *LoadError) Unwrap() []error {
	out := make([]error, len(e.Problems))
	for i, p := range e.Problems {
		out[i] = p
	}
	return out
}

// levenshtein is the edit distance between a and b, for "did you mean" hints.
func levenshtein(a, b string) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			cost := 1
			if a[i-1] == b[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}

// closest returns the candidate nearest to s, if it is near enough to be a typo.
func closest(s string, candidates []string) string {
	best, bestD := "", 1<<30
	for _, c := range candidates {
		d := levenshtein(s, c)
		// "capacty" is near "capacity_ah": compare without a unit suffix too.
		if i := strings.LastIndexByte(c, '_'); i > 0 {
			d = min(d, levenshtein(s, c[:i])+1)
		}
		if d < bestD {
			best, bestD = c, d
		}
	}
	if bestD <= max(2, len(s)/3) {
		return best
	}
	return ""
}
