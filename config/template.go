package config

import (
	"fmt"
	"strconv"
	"strings"
)

// linear is a template expression k*var + c, or a constant when Var is "".
type linear struct {
	Var  string
	K, C int
}

func (l linear) eval(vars map[string]int) (int, error) {
	if l.Var == "" {
		return l.C, nil
	}
	v, ok := vars[l.Var]
	if !ok {
		return 0, fmt.Errorf("{%s} is not known here", l.Var)
	}
	return l.K*v + l.C, nil
}

// parseLinear parses the inside of {…}: "mux", "3*mux+1", "id*2-1", "n".
func parseLinear(s string) (linear, error) {
	s = strings.ReplaceAll(s, " ", "")
	if s == "" {
		return linear{}, fmt.Errorf("empty template {}")
	}
	if n, err := strconv.Atoi(s); err == nil {
		return linear{C: n}, nil
	}
	l := linear{K: 1}
	// split off a trailing +c or -c
	if i := strings.LastIndexAny(s, "+-"); i > 0 {
		c, err := strconv.Atoi(s[i:])
		if err != nil {
			return l, fmt.Errorf("template {%s}: %q is not a whole number", s, s[i:])
		}
		l.C = c
		s = s[:i]
	}
	term := s
	if a, b, ok := strings.Cut(term, "*"); ok {
		if k, err := strconv.Atoi(a); err == nil {
			l.K, term = k, b
		} else if k, err := strconv.Atoi(b); err == nil {
			l.K, term = k, a
		} else {
			return l, fmt.Errorf("template {%s}: write it as k*name+c with whole numbers", s)
		}
	}
	if !validName(term) {
		return l, fmt.Errorf("template {%s}: %q is not a name", s, term)
	}
	l.Var = term
	return l, nil
}

// bindTemplate is a parsed bind string: head[FROM..TO]tail or head[POS]tail or a plain name.
type bindTemplate struct {
	Raw       string
	Head      string // "cell[" for indexed, or the full name when not indexed
	Tail      string // "].voltage"
	Indexed   bool
	From, To  linear // equal when not a range
	IsRange   bool
	Vars      []string
	plainName string
}

// parseBindTemplate parses forms such as "cell[{3*mux+1}..{3*mux+3}].voltage",
// "temp[1..3]", "cell[{n}].voltage" and "pack.current".
func parseBindTemplate(s string) (bindTemplate, error) {
	t := bindTemplate{Raw: s}
	open := strings.IndexByte(s, '[')
	if open < 0 {
		if strings.ContainsAny(s, "{}") {
			return t, fmt.Errorf("templates {…} go inside [ ] positions only")
		}
		t.Head, t.plainName = s, s
		return t, nil
	}
	closeIdx := strings.IndexByte(s[open:], ']')
	if closeIdx < 0 {
		return t, fmt.Errorf("missing ] in %q", s)
	}
	closeIdx += open
	t.Indexed = true
	t.Head, t.Tail = s[:open+1], s[closeIdx:]
	inner := s[open+1 : closeIdx]
	a, b, isRange := strings.Cut(inner, "..")
	parseEnd := func(e string) (linear, error) {
		e = strings.TrimSpace(e)
		if strings.HasPrefix(e, "{") && strings.HasSuffix(e, "}") {
			return parseLinear(e[1 : len(e)-1])
		}
		n, err := strconv.Atoi(e)
		if err != nil {
			return linear{}, fmt.Errorf("position %q must be a whole number or a {template}", e)
		}
		return linear{C: n}, nil
	}
	from, err := parseEnd(a)
	if err != nil {
		return t, err
	}
	t.From, t.To = from, from
	if isRange {
		to, err := parseEnd(b)
		if err != nil {
			return t, err
		}
		t.To, t.IsRange = to, true
	}
	for _, l := range []linear{t.From, t.To} {
		if l.Var != "" && !contains(t.Vars, l.Var) {
			t.Vars = append(t.Vars, l.Var)
		}
	}
	return t, nil
}

// expand gives the concrete binding names for the given template variables.
func (t bindTemplate) expand(vars map[string]int) ([]string, error) {
	if !t.Indexed {
		return []string{t.plainName}, nil
	}
	from, err := t.From.eval(vars)
	if err != nil {
		return nil, err
	}
	to, err := t.To.eval(vars)
	if err != nil {
		return nil, err
	}
	if to < from {
		return nil, fmt.Errorf("range %d..%d runs backwards", from, to)
	}
	if to-from > 1024 {
		return nil, fmt.Errorf("range %d..%d is longer than 1024", from, to)
	}
	out := make([]string, 0, to-from+1)
	for i := from; i <= to; i++ {
		out = append(out, t.Head+strconv.Itoa(i)+t.Tail)
	}
	return out, nil
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

// parseIntRange parses "3", "0..3", "0x500..0x50F" (and an integer value).
func parseIntRange(v any) (from, to int64, err error) {
	switch x := v.(type) {
	case int64:
		return x, x, nil
	case string:
		a, b, isRange := strings.Cut(x, "..")
		from, err = strconv.ParseInt(strings.TrimSpace(a), 0, 64)
		if err != nil {
			return 0, 0, fmt.Errorf("%q is not a whole number (0x… for hex)", a)
		}
		to = from
		if isRange {
			to, err = strconv.ParseInt(strings.TrimSpace(b), 0, 64)
			if err != nil {
				return 0, 0, fmt.Errorf("%q is not a whole number (0x… for hex)", b)
			}
		}
		if to < from {
			return 0, 0, fmt.Errorf("range %s runs backwards", x)
		}
		return from, to, nil
	case nil:
		return 0, 0, fmt.Errorf("missing")
	}
	return 0, 0, fmt.Errorf("must be a whole number or a range string such as \"0..3\"")
}
