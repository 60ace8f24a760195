package demo

import (
	"go/ast"
	"go/parser"
	"go/token"
	"strconv"
	"strings"
	"testing"
	"unicode"
)

// wordsOf splits text into its words: runs of letters, lower-cased.
func wordsOf(s string) []string {
	return strings.FieldsFunc(strings.ToLower(s), func(r rune) bool { return !unicode.IsLetter(r) })
}

// vocabulary returns every word written in a string literal of names.go.
func vocabulary(t *testing.T) map[string]bool {
	t.Helper()
	f, err := parser.ParseFile(token.NewFileSet(), "names.go", nil, 0)
	if err != nil {
		t.Fatal(err)
	}
	out := map[string]bool{}
	ast.Inspect(f, func(n ast.Node) bool {
		if lit, ok := n.(*ast.BasicLit); ok && lit.Kind == token.STRING {
			s, err := strconv.Unquote(lit.Value)
			if err != nil {
				t.Fatal(err)
			}
			for _, w := range wordsOf(s) {
				out[w] = true
			}
		}
		return true
	})
	return out
}

// TestNamesComeFromTheWordLists checks that every name and every piece of
// free text in the generated files (sites, areas, makers, models, tags,
// serials, parts, descriptions, notes) is built only from words written in
// names.go, where every name of the scenario is invented. A real name
// cannot slip in from another file without failing here.
func TestNamesComeFromTheWordLists(t *testing.T) {
	t.Parallel()
	vocab := vocabulary(t)
	s := demoScenario()
	textColumns := map[string][]string{
		FileSites:         {"name", "time_zone", "notes"},
		FileAreas:         {"site", "name", "notes"},
		FileModels:        {"name", "maker", "notes"},
		FilePositions:     {"site", "area", "tag", "description", "notes"},
		FileDrives:        {"serial", "model", "site", "stores_area", "notes"},
		FileInstallations: {"serial", "site", "position"},
		FileComponents:    {"serial", "part", "notes"},
		FileEvents:        {"serial", "site", "position", "notes"},
	}
	checked := 0
	for name, cols := range textColumns {
		tb, err := s.table(name)
		if err != nil {
			t.Fatal(err)
		}
		for _, col := range cols {
			j := -1
			for k, h := range tb.header {
				if h == col {
					j = k
				}
			}
			if j < 0 {
				t.Fatalf("%s has no column %s", name, col)
			}
			for _, row := range tb.rows {
				for _, w := range wordsOf(row[j]) {
					checked++
					if !vocab[w] {
						t.Errorf("%s %s %q: word %q is not in names.go", name, col, row[j], w)
					}
				}
			}
		}
	}
	for r := range s.Readings() {
		for _, w := range append(wordsOf(r.Site), wordsOf(r.Position)...) {
			if !vocab[w] {
				t.Fatalf("readings: word %q is not in names.go", w)
			}
		}
		break
	}
	if checked < 1000 {
		t.Errorf("only %d words checked; the test is not looking at the files", checked)
	}
}
