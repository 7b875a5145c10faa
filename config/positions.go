package config

import (
	"strconv"
	"strings"

	"github.com/pelletier/go-toml/v2/unstable"
)

// Pos is a place in a profile file, 1-based.
type Pos struct {
	Line, Col int
}

// keyPos is where a key and its value stand.
type keyPos struct {
	Key, Val Pos
}

// positions maps a key path such as "frame[1].field[0].bind" to where the key
// and its value stand in the file. Tables and array tables map their header.
type positions map[string]keyPos

// scanPositions walks the TOML document with go-toml's position-preserving
// parser and records every key's place. Parse errors are left to the decoder,
// which reports them with their own positions.
func scanPositions(data []byte) positions {
	pos := positions{}
	p := unstable.Parser{}
	p.Reset(data)
	counts := map[string]int{} // array-table path -> next index
	prefix := ""
	at := func(r unstable.Range) Pos {
		sh := p.Shape(r)
		return Pos{Line: sh.Start.Line, Col: sh.Start.Column}
	}
	for p.NextExpression() {
		e := p.Expression()
		switch e.Kind {
		case unstable.Table, unstable.ArrayTable:
			parts, first := keyParts(e.Key())
			path := resolve(parts, counts, e.Kind == unstable.ArrayTable)
			prefix = path
			pos[path] = keyPos{Key: at(first.Raw), Val: at(first.Raw)}
		case unstable.KeyValue:
			parts, first := keyParts(e.Key())
			path := join(prefix, strings.Join(parts, "."))
			walkValue(&p, e.Value(), path, at(first.Raw), pos, at)
		}
	}
	return pos
}

// resolve turns a table header into an indexed path: [[frame.field]] under the
// third [[frame]] becomes "frame[2].field[k]".
func resolve(parts []string, counts map[string]int, array bool) string {
	path := ""
	for i, part := range parts {
		path = join(path, part)
		if n, ok := counts[path]; ok && (i < len(parts)-1 || !array) {
			path += "[" + strconv.Itoa(n-1) + "]"
		}
	}
	if array {
		n := counts[path]
		counts[path] = n + 1
		path += "[" + strconv.Itoa(n) + "]"
	}
	return path
}

func walkValue(p *unstable.Parser, v *unstable.Node, path string, keyAt Pos, pos positions, at func(unstable.Range) Pos) {
	val := keyAt
	if v.Raw.Length > 0 {
		val = at(v.Raw)
	}
	pos[path] = keyPos{Key: keyAt, Val: val}
	switch v.Kind {
	case unstable.InlineTable:
		it := v.Children()
		for it.Next() {
			kv := it.Node()
			if kv.Kind != unstable.KeyValue {
				continue
			}
			parts, first := keyParts(kv.Key())
			walkValue(p, kv.Value(), join(path, strings.Join(parts, ".")), at(first.Raw), pos, at)
		}
	case unstable.Array:
		it := v.Children()
		i := 0
		for it.Next() {
			el := it.Node()
			if el.Kind == unstable.Comment {
				continue
			}
			walkValue(p, el, path+"["+strconv.Itoa(i)+"]", at(el.Raw), pos, at)
			i++
		}
	}
}

func keyParts(it unstable.Iterator) ([]string, *unstable.Node) {
	var parts []string
	var first *unstable.Node
	for it.Next() {
		n := it.Node()
		if first == nil {
			first = n
		}
		parts = append(parts, string(n.Data))
	}
	return parts, first
}

func join(a, b string) string {
	if a == "" {
		return b
	}
	return a + "." + b
}
