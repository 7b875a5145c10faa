package sim

import (
	"fmt"
	"regexp"
	"regexp/syntax"
	"strings"
	"unicode"
)

// lineGen writes console lines that a line pattern matches: the inverse of
// matching. It walks the pattern's syntax tree once: literals are copied as
// they are, capture groups are filled with the text the caller gives for
// them (or generated from their own sub-pattern), character classes give one
// matching character, repetitions their minimum count (at least one for +),
// alternations their first branch, anchors nothing.
type lineGen struct {
	re   *regexp.Regexp
	tree *syntax.Regexp
	// groupRe holds, per capture index, the group's own pattern anchored at
	// both ends, to check a filled-in text.
	groupRe map[int]*regexp.Regexp
}

func newLineGen(re *regexp.Regexp) (*lineGen, error) {
	tree, err := syntax.Parse(re.String(), syntax.Perl)
	if err != nil {
		return nil, fmt.Errorf("pattern %q: %w", re.String(), err)
	}
	tree = tree.Simplify()
	g := &lineGen{re: re, tree: tree, groupRe: map[int]*regexp.Regexp{}}
	var walk func(t *syntax.Regexp)
	walk = func(t *syntax.Regexp) {
		if t.Op == syntax.OpCapture {
			if gr, err := regexp.Compile(`^(?:` + t.Sub[0].String() + `)$`); err == nil {
				g.groupRe[t.Cap] = gr
			}
		}
		for _, s := range t.Sub {
			walk(s)
		}
	}
	walk(tree)
	return g, nil
}

// Generate writes a line, with fill[cap] as the text of capture group cap
// where given. It checks that the pattern matches the result and that each
// filled group captured exactly its text.
func (g *lineGen) Generate(fill map[int]string) (string, error) {
	var b strings.Builder
	g.write(&b, g.tree, fill)
	s := b.String()
	sub := g.re.FindStringSubmatch(s)
	if sub == nil {
		return "", fmt.Errorf("pattern %q: generated %q does not match it", g.re.String(), s)
	}
	for c, want := range fill {
		if c < len(sub) && sub[c] != want {
			return "", fmt.Errorf("pattern %q: generated %q, but group %d captures %q instead of %q", g.re.String(), s, c, sub[c], want)
		}
	}
	return s, nil
}

// Fits reports whether text is something capture group cap can hold.
func (g *lineGen) Fits(cap int, text string) bool {
	gr := g.groupRe[cap]
	return gr != nil && gr.MatchString(text)
}

func (g *lineGen) write(b *strings.Builder, t *syntax.Regexp, fill map[int]string) {
	switch t.Op {
	case syntax.OpLiteral:
		for _, r := range t.Rune {
			if t.Flags&syntax.FoldCase != 0 {
				r = unicode.ToLower(r)
			}
			b.WriteRune(r)
		}
	case syntax.OpCharClass:
		b.WriteRune(classRune(t.Rune))
	case syntax.OpAnyChar, syntax.OpAnyCharNotNL:
		b.WriteByte('x')
	case syntax.OpCapture:
		if s, ok := fill[t.Cap]; ok {
			b.WriteString(s)
			return
		}
		g.write(b, t.Sub[0], fill)
	case syntax.OpConcat:
		for _, s := range t.Sub {
			g.write(b, s, fill)
		}
	case syntax.OpAlternate:
		g.write(b, t.Sub[0], fill)
	case syntax.OpPlus:
		g.write(b, t.Sub[0], fill)
	case syntax.OpRepeat:
		for k := 0; k < t.Min; k++ {
			g.write(b, t.Sub[0], fill)
		}
	case syntax.OpStar, syntax.OpQuest, syntax.OpEmptyMatch, syntax.OpNoMatch,
		syntax.OpBeginLine, syntax.OpEndLine, syntax.OpBeginText, syntax.OpEndText,
		syntax.OpWordBoundary, syntax.OpNoWordBoundary:
	}
}

// classRune picks one character of a class given as [lo, hi] pairs: a
// letter or digit if the class has one, else a printable character, else
// its first.
func classRune(ranges []rune) rune {
	pick := func(ok func(rune) bool) (rune, bool) {
		for k := 0; k+1 < len(ranges); k += 2 {
			lo, hi := ranges[k], ranges[k+1]
			for r := lo; r <= hi && r-lo < 256; r++ {
				if ok(r) {
					return r, true
				}
			}
		}
		return 0, false
	}
	if r, ok := pick(func(r rune) bool { return r < 128 && (unicode.IsLetter(r) || unicode.IsDigit(r)) }); ok {
		return r
	}
	if r, ok := pick(func(r rune) bool { return r < 128 && unicode.IsPrint(r) }); ok {
		return r
	}
	if r, ok := pick(unicode.IsPrint); ok {
		return r
	}
	if len(ranges) > 0 {
		return ranges[0]
	}
	return 'x'
}
