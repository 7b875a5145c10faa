package metrics

import (
	"os"
	"strings"
	"testing"
)

// The README's example rules are the file the Prometheus test loads.
func TestReadmeRules(t *testing.T) {
	readme, err := os.ReadFile("../README.md")
	if err != nil {
		t.Fatal(err)
	}
	rules, err := os.ReadFile("testdata/rules.yml")
	if err != nil {
		t.Fatal(err)
	}
	const marker = "<!-- rules: metrics/testdata/rules.yml"
	_, after, ok := strings.Cut(string(readme), marker)
	if !ok {
		t.Fatalf("README.md has no %q marker before its example rules", marker)
	}
	_, block, ok := strings.Cut(after, "```yaml\n")
	if !ok {
		t.Fatal("README.md: no yaml block after the rules marker")
	}
	block, _, ok = strings.Cut(block, "```")
	if !ok || block != string(rules) {
		t.Errorf("README.md's example rules differ from metrics/testdata/rules.yml; copy the file into the README")
	}
}
