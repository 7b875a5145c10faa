package check

import (
	"encoding/json"
	"fmt"
	"math"
	"regexp"
	"sort"
	"strings"
	"testing"
	"time"

	"packwatch/pack"
)

// validate is a small JSON Schema checker for the keywords schema.json uses
// (JSON Schema 2020-12, Core and Validation: type, const, enum, required,
// properties, additionalProperties false, items, $ref to #/$defs, oneOf,
// pattern, minimum, minLength). It returns every violation with its path.
func validate(root, s map[string]any, v any, path string) []string {
	if ref, ok := s["$ref"].(string); ok {
		name := strings.TrimPrefix(ref, "#/$defs/")
		def, ok := root["$defs"].(map[string]any)[name].(map[string]any)
		if !ok {
			return []string{path + ": unknown $ref " + ref}
		}
		return validate(root, def, v, path)
	}
	var errs []string
	bad := func(f string, a ...any) { errs = append(errs, path+": "+fmt.Sprintf(f, a...)) }
	if t, ok := s["type"]; ok {
		var types []string
		switch t := t.(type) {
		case string:
			types = []string{t}
		case []any:
			for _, x := range t {
				types = append(types, x.(string))
			}
		}
		okType := false
		for _, ty := range types {
			okType = okType || isType(v, ty)
		}
		if !okType {
			bad("type %v, want %v", v, types)
			return errs
		}
	}
	if c, ok := s["const"]; ok && fmt.Sprint(c) != fmt.Sprint(v) {
		bad("%v, want const %v", v, c)
	}
	if e, ok := s["enum"].([]any); ok {
		found := false
		for _, x := range e {
			found = found || fmt.Sprint(x) == fmt.Sprint(v)
		}
		if !found {
			bad("%v not in enum %v", v, e)
		}
	}
	if one, ok := s["oneOf"].([]any); ok {
		n := 0
		for _, sub := range one {
			if len(validate(root, sub.(map[string]any), v, path)) == 0 {
				n++
			}
		}
		if n != 1 {
			bad("matches %d of oneOf, want 1", n)
		}
	}
	if str, ok := v.(string); ok {
		if p, ok := s["pattern"].(string); ok && !regexp.MustCompile(p).MatchString(str) {
			bad("%q does not match %s", str, p)
		}
		if m, ok := s["minLength"].(float64); ok && float64(len([]rune(str))) < m {
			bad("shorter than %v", m)
		}
	}
	if f, ok := v.(float64); ok {
		if m, ok := s["minimum"].(float64); ok && f < m {
			bad("%v below minimum %v", f, m)
		}
	}
	if obj, ok := v.(map[string]any); ok {
		props, _ := s["properties"].(map[string]any)
		req, _ := s["required"].([]any)
		for _, r := range req {
			if _, ok := obj[r.(string)]; !ok {
				bad("missing required %q", r)
			}
		}
		keys := make([]string, 0, len(obj))
		for k := range obj {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		for _, k := range keys {
			ps, ok := props[k].(map[string]any)
			if !ok {
				if s["additionalProperties"] == false {
					bad("unexpected key %q", k)
				}
				continue
			}
			errs = append(errs, validate(root, ps, obj[k], path+"."+k)...)
		}
	}
	if arr, ok := v.([]any); ok {
		if it, ok := s["items"].(map[string]any); ok {
			for i, x := range arr {
				errs = append(errs, validate(root, it, x, fmt.Sprintf("%s[%d]", path, i))...)
			}
		}
	}
	return errs
}

func isType(v any, t string) bool {
	switch t {
	case "null":
		return v == nil
	case "boolean":
		_, ok := v.(bool)
		return ok
	case "string":
		_, ok := v.(string)
		return ok
	case "number":
		_, ok := v.(float64)
		return ok
	case "integer":
		f, ok := v.(float64)
		return ok && f == math.Trunc(f)
	case "array":
		_, ok := v.([]any)
		return ok
	case "object":
		_, ok := v.(map[string]any)
		return ok
	}
	return false
}

func schemaRoot(t *testing.T) map[string]any {
	t.Helper()
	var root map[string]any
	if err := json.Unmarshal(Schema, &root); err != nil {
		t.Fatalf("schema.json: %v", err)
	}
	return root
}

func asAny(t *testing.T, r *Record) map[string]any {
	t.Helper()
	b, err := r.JSON()
	if err != nil {
		t.Fatal(err)
	}
	var v map[string]any
	if err := json.Unmarshal(b, &v); err != nil {
		t.Fatal(err)
	}
	return v
}

func TestRecordMatchesSchema(t *testing.T) {
	root := schemaRoot(t)
	now := time.Unix(0, t0+10e9).Add(time.Hour)
	first := testRecord(t, nil, now)
	first.Hash = strings.Repeat("1", 64)
	second := testRecord(t, func(i int, p *pack.PackSnapshot) { p.SOC.Pct = np(5); p.Current = nil }, now)
	second.Raw.SHA256 = strings.Repeat("2", 64)
	second.PrevHash = first.Hash
	second.Compare(first)
	second.Hash = strings.Repeat("3", 64)
	empty := NewRecord(Window{From: t0, To: t0 + 10e9}, Raw{Format: RawFormat}, testSettings(), Inputs{Profile: testProfile(), Now: now, Data: DataInfo{Mode: ModeLive}})
	for _, r := range []*Record{first, second, empty} {
		if r.Raw.SHA256 == "" {
			r.Raw.SHA256 = strings.Repeat("0", 64)
		}
		if errs := validate(root, root, asAny(t, r), "$"); len(errs) > 0 {
			t.Errorf("record %s does not match schema.json:\n%s", r.Verdict, strings.Join(errs, "\n"))
		}
	}
	// The checker must catch what the schema forbids.
	broken := []struct {
		name string
		mod  func(v map[string]any)
		want string
	}{
		{"missing verdict", func(v map[string]any) { delete(v, "verdict") }, `missing required "verdict"`},
		{"unknown verdict", func(v map[string]any) { v["verdict"] = "maybe" }, "not in enum"},
		{"extra key", func(v map[string]any) { v["extra"] = 1 }, `unexpected key "extra"`},
		{"bad status", func(v map[string]any) { v["rules"].([]any)[0].(map[string]any)["status"] = "ok" }, "$.rules[0].status"},
		{"NaN as string", func(v map[string]any) { v["measured"].(map[string]any)["soc_pct"] = "NaN" }, "$.measured.soc_pct: type"},
		{"local time", func(v map[string]any) { v["time"] = "2026-05-01 08:00" }, "does not match"},
	}
	for _, b := range broken {
		v := asAny(t, first)
		b.mod(v)
		errs := validate(root, root, v, "$")
		if !strings.Contains(strings.Join(errs, "\n"), b.want) {
			t.Errorf("%s: errors %v, want %q", b.name, errs, b.want)
		}
	}
}
