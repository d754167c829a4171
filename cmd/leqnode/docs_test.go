package main

import (
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"unicode"
)

// docPages are the project's Markdown pages whose links are checked: the README, the
// developers' guide, every page under docs/ and the README of the shared test inputs.
func docPages(t *testing.T, root string) []string {
	t.Helper()
	pages := []string{"README.md", "DEVELOPERS.md", "testdata/README.md"}
	docs, err := filepath.Glob(filepath.Join(root, "docs", "*.md"))
	if err != nil {
		t.Fatal(err)
	}
	if len(docs) == 0 {
		t.Fatalf("no pages under %s", filepath.Join(root, "docs"))
	}
	for _, d := range docs {
		pages = append(pages, filepath.ToSlash(strings.TrimPrefix(d, root+string(filepath.Separator))))
	}
	return pages
}

// markdownLink finds inline links and images: [text](target) and ![alt](target).
var markdownLink = regexp.MustCompile(`\]\(([^)\s]+)\)`)

// proseLines returns a page's lines outside fenced code blocks, with inline code spans
// blanked, so that a link written as an example inside code is not taken for one.
func proseLines(page string) []string {
	var out []string
	fenced := false
	span := regexp.MustCompile("`[^`]*`")
	for _, l := range strings.Split(page, "\n") {
		if strings.HasPrefix(strings.TrimSpace(l), "```") {
			fenced = !fenced
			continue
		}
		if fenced {
			continue
		}
		out = append(out, span.ReplaceAllString(l, "``"))
	}
	return out
}

// headingAnchors returns the anchors a Markdown renderer (GitHub's rule) gives the page's
// headings: the text in lower case, everything but letters, digits, spaces, '-' and '_'
// removed, spaces turned into '-', and "-1", "-2" ... added to repeats.
func headingAnchors(page string) map[string]bool {
	anchors := map[string]bool{}
	seen := map[string]int{}
	fenced := false
	for _, l := range strings.Split(page, "\n") {
		if strings.HasPrefix(strings.TrimSpace(l), "```") {
			fenced = !fenced
		}
		if fenced || !strings.HasPrefix(l, "#") {
			continue
		}
		text := strings.TrimSpace(strings.TrimLeft(l, "#"))
		var b strings.Builder
		for _, r := range strings.ToLower(text) {
			switch {
			case unicode.IsLetter(r) || unicode.IsDigit(r) || r == '-' || r == '_':
				b.WriteRune(r)
			case r == ' ':
				b.WriteRune('-')
			}
		}
		a := b.String()
		if n := seen[a]; n > 0 {
			seen[a]++
			a += "-" + strconv.Itoa(n)
		} else {
			seen[a] = 1
		}
		anchors[a] = true
	}
	return anchors
}

// TestDocsLinks: every relative link in the README, the developers' guide and docs/ names a
// file or directory that exists, and every #anchor names a heading of its page, so moving a
// section cannot leave a dead link behind.
func TestDocsLinks(t *testing.T) {
	root, err := filepath.Abs(filepath.Join("..", ".."))
	if err != nil {
		t.Fatal(err)
	}
	anchorsOf := map[string]map[string]bool{}
	anchors := func(path string) map[string]bool {
		if a, ok := anchorsOf[path]; ok {
			return a
		}
		b, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		anchorsOf[path] = headingAnchors(string(b))
		return anchorsOf[path]
	}
	links := 0
	for _, page := range docPages(t, root) {
		path := filepath.Join(root, filepath.FromSlash(page))
		b, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		for n, line := range proseLines(string(b)) {
			for _, m := range markdownLink.FindAllStringSubmatch(line, -1) {
				target := m[1]
				if strings.Contains(target, "://") || strings.HasPrefix(target, "mailto:") {
					continue
				}
				links++
				file, frag, _ := strings.Cut(target, "#")
				dest := path
				if file != "" {
					if filepath.IsAbs(file) {
						t.Errorf("%s:%d: link %q is absolute; write it relative to the page", page, n+1, target)
						continue
					}
					dest = filepath.Join(filepath.Dir(path), filepath.FromSlash(file))
					if _, err := os.Stat(dest); err != nil {
						t.Errorf("%s:%d: link %q: %s does not exist", page, n+1, target, dest)
						continue
					}
				}
				if frag != "" {
					if !strings.HasSuffix(dest, ".md") {
						t.Errorf("%s:%d: link %q: an anchor into a file that is not Markdown", page, n+1, target)
					} else if !anchors(dest)[frag] {
						t.Errorf("%s:%d: link %q: %s has no heading with the anchor #%s", page, n+1, target, filepath.Base(dest), frag)
					}
				}
			}
		}
	}
	if links < 20 {
		t.Errorf("only %d relative links found: is the link pattern still right?", links)
	}
}

// TestDocsOneTopicPerHeading: each page under docs/ has one title, and no heading names the
// same topic twice across docs/, so a topic lives in one place.
func TestDocsOneTopicPerHeading(t *testing.T) {
	root := filepath.Join("..", "..")
	docs, err := filepath.Glob(filepath.Join(root, "docs", "*.md"))
	if err != nil {
		t.Fatal(err)
	}
	where := map[string]string{}
	for _, d := range docs {
		b, err := os.ReadFile(d)
		if err != nil {
			t.Fatal(err)
		}
		titles := 0
		fenced := false
		for _, l := range strings.Split(string(b), "\n") {
			if strings.HasPrefix(strings.TrimSpace(l), "```") {
				fenced = !fenced
			}
			if fenced || !strings.HasPrefix(l, "#") {
				continue
			}
			if strings.HasPrefix(l, "# ") {
				titles++
			}
			h := strings.ToLower(strings.TrimSpace(strings.TrimLeft(l, "#")))
			if prev, ok := where[h]; ok {
				t.Errorf("heading %q is in %s and in %s: keep a topic in one place", h, prev, filepath.Base(d))
			}
			where[h] = filepath.Base(d)
		}
		if titles != 1 {
			t.Errorf("%s has %d titles (# headings), want 1", filepath.Base(d), titles)
		}
	}
}
