package report

import (
	"bufio"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

var (
	cssFamily    = regexp.MustCompile(`font-family\s*[:=]\s*"?([^;}"<]+)`)
	cssShorthand = regexp.MustCompile(`(?:^|[\s{;"])font\s*:\s*([^;}"<]+)`)
	cssVar       = regexp.MustCompile(`--(?:sans|mono)\s*:\s*([^;}"<]+)`)
	fontSize     = regexp.MustCompile(`^[0-9.]+(px|pt|em|rem|%)(/[0-9.]+[a-z%]*)?$`)
	// vendorFont matches the font families that vendors ship and that
	// pages commonly name (common practice), and the vendor keywords.
	vendorFont = regexp.MustCompile(`(?i)liberation|dejavu|helvetica|arial|arimo|cousine|tinos|segoe|roboto|` +
		`sfmono|sf mono|sf pro|san francisco|-apple-system|blinkmacsystemfont|ui-monospace|ui-sans-serif|menlo|monaco|` +
		`consolas|courier|lucida|verdana|tahoma|georgia|times new roman|noto sans|noto mono|ubuntu mono|cantarell|` +
		`oxygen-sans|fira sans|fira mono|fira code|open sans|source sans|source code pro|jetbrains|cascadia|inconsolata|` +
		`droid sans|\bInter\b`)
)

// allowedFamily lists the only font families a page may name.
var allowedFamily = map[string]bool{
	"system-ui": true, "sans-serif": true, "monospace": true,
	"var(--sans)": true, "var(--mono)": true, "inherit": true,
}

// families returns every font family that the CSS (or SVG style) in s
// names, in font-family declarations and attributes, font shorthands and
// the page's --sans/--mono stacks.
func families(s string) []string {
	var lists []string
	for _, m := range cssFamily.FindAllStringSubmatch(s, -1) {
		lists = append(lists, m[1])
	}
	for _, m := range cssVar.FindAllStringSubmatch(s, -1) {
		lists = append(lists, m[1])
	}
	for _, m := range cssShorthand.FindAllStringSubmatch(s, -1) {
		v := strings.TrimSpace(m[1])
		if v == "inherit" {
			lists = append(lists, v)
			continue
		}
		// The family list follows the size (and line height).
		f := strings.Fields(v)
		for i, tok := range f {
			if fontSize.MatchString(tok) {
				lists = append(lists, strings.Join(f[i+1:], " "))
				break
			}
		}
	}
	var out []string
	for _, l := range lists {
		for _, f := range strings.Split(l, ",") {
			out = append(out, strings.Trim(strings.TrimSpace(f), `'"`))
		}
	}
	return out
}

func checkFamilies(t *testing.T, name, s string) {
	t.Helper()
	fs := families(s)
	if len(fs) == 0 {
		t.Errorf("%s names no font family: the test looks at the wrong text", name)
	}
	for _, f := range fs {
		if !allowedFamily[f] {
			t.Errorf("%s names font family %q; only system-ui, sans-serif and monospace are allowed", name, f)
		}
	}
	if m := vendorFont.FindString(s); m != "" {
		t.Errorf("%s names the vendor font %q", name, m)
	}
}

// TestFontStacks holds every page the project writes (the report with
// its charts, the index page, the watch page) to the generic font
// stacks: no family a vendor ships.
func TestFontStacks(t *testing.T) {
	if got := families("a{font-family:'Liberation Sans',Arial}b{font: 12px/1 Menlo, monospace}"); strings.Join(got, "|") != "Liberation Sans|Arial|Menlo|monospace" {
		t.Fatalf("families parses %q", got)
	}
	page, err := HTML(demoData())
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(page), "<svg ") {
		t.Fatal("the demo report has no chart: the SVG fonts go unchecked")
	}
	checkFamilies(t, "report.html", string(page))
	idx := filepath.Join(t.TempDir(), "index.html")
	if err := WriteIndex(idx, "runs", []IndexEntry{{Href: "a/report.html", Title: "a", About: "b"}}); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(idx)
	if err != nil {
		t.Fatal(err)
	}
	checkFamilies(t, "index.html", string(b))
	w, err := os.ReadFile(filepath.Join("..", "watch", "page.html"))
	if err != nil {
		t.Fatal(err)
	}
	checkFamilies(t, "watch page.html", string(w))
}

// TestNoVendorFontsInRepo looks through the repository's pages, styles,
// templates, sources and docs for a vendor font name on any line that
// speaks of fonts (sources and docs) or anywhere (pages and styles).
func TestNoVendorFontsInRepo(t *testing.T) {
	root := filepath.Join("..", "..")
	if _, err := os.Stat(filepath.Join(root, "go.mod")); err != nil {
		t.Fatalf("repository root not found: %v", err)
	}
	self, _ := filepath.Abs("fonts_test.go")
	seen := 0
	err := filepath.WalkDir(root, func(path string, d os.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.IsDir() {
			if n := d.Name(); n == ".git" || n == "node_modules" {
				return filepath.SkipDir
			}
			return nil
		}
		ext := filepath.Ext(path)
		page := ext == ".html" || ext == ".tmpl" || ext == ".css" || ext == ".svg"
		if !page && ext != ".go" && ext != ".md" {
			return nil
		}
		if abs, _ := filepath.Abs(path); abs == self {
			return nil
		}
		f, err := os.Open(path)
		if err != nil {
			return err
		}
		defer f.Close()
		seen++
		sc := bufio.NewScanner(f)
		sc.Buffer(nil, 1<<22)
		for n := 1; sc.Scan(); n++ {
			line := sc.Text()
			if !page && !strings.Contains(strings.ToLower(line), "font") {
				continue
			}
			if m := vendorFont.FindString(line); m != "" {
				t.Errorf("%s:%d names the vendor font %q", path, n, m)
			}
		}
		return sc.Err()
	})
	if err != nil {
		t.Fatal(err)
	}
	if seen < 10 {
		t.Fatalf("looked at %d files only", seen)
	}
}
