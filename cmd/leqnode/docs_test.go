package main

import (
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"unicode"

	"github.com/leqnode/leqnode/node/testrig"
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

// TestDocumentedCalibration: the calibrate example of docs/calibration.md is true. The recording
// is made with the sox command the page gives (Debian package sox: `synth sine 1000 vol 0.5248`
// is a sine of peak 0.5248, 20 lg 0.5248 = -5.60 dBFS by AES17's definition of full scale), and
// each documented `leqnode calibrate ... --format json check.wav` line prints the JSON object
// shown under it, with the exit status the page states (0 when it states none).
func TestDocumentedCalibration(t *testing.T) {
	t.Setenv("LEQNODE_CONFIG", "none")
	sox := testrig.Need(t, "sox", "sox")
	b, err := os.ReadFile(filepath.Join("..", "..", "docs", "calibration.md"))
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(string(b), "\n")
	dir := t.TempDir()
	made, checked := false, 0
	for i, l := range lines {
		l = strings.TrimSpace(l)
		if _, cmd, ok := strings.Cut(l, "here made with: sox "); ok {
			args := strings.Fields(strings.TrimSuffix(cmd, ")"))
			c := exec.Command(sox, args...)
			c.Dir = dir // the command names check.wav: it lands in dir
			if out, err := c.CombinedOutput(); err != nil {
				t.Fatalf("the page's sox command %q: %v\n%s", cmd, err, out)
			}
			made = true
			continue
		}
		if !strings.HasPrefix(l, "leqnode calibrate ") || !strings.Contains(l, "--format json") {
			continue
		}
		if !made {
			t.Fatalf("docs/calibration.md: %q comes before the sox command that makes its recording", l)
		}
		cmd, comment, _ := strings.Cut(l, "#")
		cmd = strings.TrimSpace(cmd)
		wantCode := 0
		if _, n, ok := strings.Cut(comment, "exit status "); ok {
			wantCode, err = strconv.Atoi(strings.TrimSpace(n))
			if err != nil {
				t.Fatalf("docs/calibration.md: exit status in %q: %v", l, err)
			}
		}
		if i+1 >= len(lines) {
			t.Fatalf("docs/calibration.md: no output after %q", l)
		}
		var want map[string]any
		if err := json.Unmarshal([]byte(strings.TrimSpace(lines[i+1])), &want); err != nil {
			t.Fatalf("docs/calibration.md: the output shown after %q is not JSON: %v", l, err)
		}
		args := strings.Fields(cmd)[1:]
		for j, a := range args {
			if a == "check.wav" {
				args[j] = filepath.Join(dir, "check.wav")
			}
		}
		code, out, errs := runCmd(t, nil, args...)
		var got map[string]any
		if err := json.Unmarshal([]byte(out), &got); err != nil {
			t.Fatalf("%s: output %q: %v (stderr %q)", cmd, out, err, errs)
		}
		if code != wantCode || !reflect.DeepEqual(got, want) {
			t.Errorf("%s: exit %d, %s; docs/calibration.md shows exit %d, %s", cmd, code, strings.TrimSpace(out), wantCode, strings.TrimSpace(lines[i+1]))
		}
		checked++
	}
	if checked < 2 {
		t.Errorf("docs/calibration.md: %d calibrate examples with JSON output checked, want the two the page has", checked)
	}
}
