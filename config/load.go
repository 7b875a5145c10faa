package config

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"os"
	"reflect"
	"sort"
	"strings"

	"github.com/pelletier/go-toml/v2"
)

// Load reads, parses and validates the profile at path. On failure the error
// is a *LoadError listing every problem as FILE:LINE:COL: message with a hint.
// Warnings (limits outside a chemistry's usual range, say) do not fail the
// load; they are in Profile.Warnings.
func Load(path string) (*Profile, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("read profile: %w", err)
	}
	return Parse(path, data)
}

// Parse parses and validates a profile from memory; name is used in messages.
func Parse(name string, data []byte) (*Profile, error) {
	p := &Profile{File: name}
	sum := sha256.Sum256(data)
	p.Hash = hex.EncodeToString(sum[:])
	p.Text = string(data)
	p.pos = scanPositions(data)
	r := &reporter{file: name, pos: p.pos}

	dec := toml.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(p); err != nil {
		var strict *toml.StrictMissingError
		var de *toml.DecodeError
		switch {
		case errors.As(err, &strict):
			for i := range strict.Errors {
				r.unknownKey(&strict.Errors[i])
			}
		case errors.As(err, &de):
			line, col := de.Position()
			msg := strings.TrimPrefix(de.Error(), "toml: ")
			kind := ErrSyntax
			if strings.Contains(msg, "cannot decode") || strings.Contains(msg, "cannot store") {
				kind = ErrType
			}
			r.add(&Problem{Pos: Pos{line, col}, Msg: msg, Err: kind, Hint: typeHint(de.Key())})
			return nil, r.result()
		default:
			r.add(&Problem{Pos: Pos{1, 1}, Msg: err.Error(), Err: ErrSyntax})
			return nil, r.result()
		}
	}
	validate(p, r)
	if len(r.errors()) == 0 {
		exp, _ := expand(p, r)
		p.exp = exp
	}
	p.Warnings = r.warnings()
	if err := r.result(); err != nil {
		return nil, err
	}
	return p, nil
}

// reporter collects problems with positions.
type reporter struct {
	file string
	pos  positions
	list []*Problem
}

func (r *reporter) add(p *Problem) {
	p.File = r.file
	r.list = append(r.list, p)
}

// at returns the position of a key path, falling back to its nearest
// enclosing table, then to the top of the file.
func (r *reporter) at(path string, value bool) Pos {
	for p := path; p != ""; {
		if kp, ok := r.pos[p]; ok {
			if value {
				return kp.Val
			}
			return kp.Key
		}
		i := strings.LastIndexAny(p, ".[")
		if i < 0 {
			break
		}
		p = p[:i]
	}
	return Pos{1, 1}
}

// errorf reports an error at the value of path.
func (r *reporter) errorf(path string, kind error, hint, format string, args ...any) {
	r.add(&Problem{Pos: r.at(path, true), Msg: fmt.Sprintf(format, args...), Hint: hint, Err: kind})
}

// keyErrorf reports an error at the key of path.
func (r *reporter) keyErrorf(path string, kind error, hint, format string, args ...any) {
	r.add(&Problem{Pos: r.at(path, false), Msg: fmt.Sprintf(format, args...), Hint: hint, Err: kind})
}

func (r *reporter) warnf(path, hint, format string, args ...any) {
	r.add(&Problem{Pos: r.at(path, true), Msg: fmt.Sprintf(format, args...), Hint: hint, Warning: true})
}

func (r *reporter) unknownKey(de *toml.DecodeError) {
	line, col := de.Position()
	key := []string(de.Key())
	name := ""
	if len(key) > 0 {
		name = key[len(key)-1]
	}
	cands := knownKeys(key[:max(0, len(key)-1)])
	hint := ""
	if c := closest(name, cands); c != "" {
		hint = fmt.Sprintf("did you mean %q?", c)
	} else if len(cands) > 0 {
		hint = "known keys here: " + strings.Join(cands, ", ")
	}
	r.add(&Problem{Pos: Pos{line, col}, Msg: fmt.Sprintf("unknown key %q", strings.Join(key, ".")), Hint: hint, Err: ErrUnknownKey})
}

func (r *reporter) errors() []*Problem {
	var out []*Problem
	for _, p := range r.list {
		if !p.Warning {
			out = append(out, p)
		}
	}
	return out
}

func (r *reporter) warnings() []*Problem {
	var out []*Problem
	for _, p := range r.list {
		if p.Warning {
			out = append(out, p)
		}
	}
	return out
}

// result returns a *LoadError of the errors in file order, or nil.
func (r *reporter) result() error {
	errs := r.errors()
	if len(errs) == 0 {
		return nil
	}
	sort.SliceStable(errs, func(i, j int) bool {
		a, b := errs[i].Pos, errs[j].Pos
		return a.Line < b.Line || a.Line == b.Line && a.Col < b.Col
	})
	return &LoadError{Problems: errs}
}

// knownKeys lists the TOML keys of the table at path, from the Profile type.
func knownKeys(path []string) []string {
	t := reflect.TypeFor[Profile]()
	for _, part := range path {
		for t.Kind() == reflect.Pointer || t.Kind() == reflect.Slice {
			t = t.Elem()
		}
		if t.Kind() != reflect.Struct {
			return nil
		}
		found := false
		for i := range t.NumField() {
			if tag := t.Field(i).Tag.Get("toml"); tag == part {
				t = t.Field(i).Type
				found = true
				break
			}
		}
		if !found {
			return nil
		}
	}
	for t.Kind() == reflect.Pointer || t.Kind() == reflect.Slice {
		t = t.Elem()
	}
	if t.Kind() != reflect.Struct {
		return nil
	}
	var out []string
	for i := range t.NumField() {
		if tag := t.Field(i).Tag.Get("toml"); tag != "" && tag != "-" {
			out = append(out, tag)
		}
	}
	sort.Strings(out)
	return out
}

func typeHint(key toml.Key) string {
	if len(key) == 0 {
		return "check the TOML syntax near this place: strings in quotes, tables as [name], lists of tables as [[name]]"
	}
	switch key[len(key)-1] {
	case "id":
		return `write an ID as a number (0x4C0) or a string ("0x500..0x50F")`
	case "mux":
		return `in [[frame]] mux is a table such as { byte = 0 }; in a field it is a value or a range string such as "0..3"`
	case "range":
		return "range is a list of two numbers: [min, max]"
	case "invalid":
		return "invalid is a list of raw whole numbers, such as [0xFF]"
	case "enum":
		return `enum is a table of raw code = "name", such as { 0 = "idle", 1 = "charging" }`
	}
	return "check the value's type against the profile reference in the README"
}
