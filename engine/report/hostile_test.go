package report

import (
	"bytes"
	"encoding/csv"
	"strings"
	"testing"
	"unicode/utf8"

	"stackfit/engine"
	"stackfit/engine/textsafe"
)

// Hostile text: xterm's window-title command (OSC 0 ; text BEL), the
// erase-display control sequence (CSI 2 J), the 8-bit CSI byte 0x9B and
// its UTF-8 form U+009B (ECMA-48's C1 set), a carriage return, invalid
// UTF-8, an HTML tag that runs script when a markdown renderer passes raw
// HTML through (CommonMark allows raw HTML), and a table pipe (GitHub
// Flavored Markdown's table cells end at an unescaped |). All from memory
// of those documents.
const (
	hostileTitle = "\x1b]0;pwned\x07<img src=x onerror=alert(1)> | net"
	hostileLayer = "stem\x1b[2J|<img src=x onerror=alert(1)>\r\u009bx\x9b\xff&amp;[a](http://x)`"
	hostileFrom  = "gone\x1b[2J<script>alert(1)</script>|"
)

func hostileAnalysis(t *testing.T) *engine.Analysis {
	t.Helper()
	s := &engine.Stack{
		Name:  hostileTitle,
		Note:  "note\x1b]0;pwned\x07",
		Input: engine.Shape{C: 3, H: 16, W: 16},
		Layers: []engine.Layer{
			{Kind: engine.KindConv, Filters: 8, Kernel: engine.Square(3), Name: hostileLayer},
			{Kind: engine.KindConcat, From: hostileLayer},
			{Kind: engine.KindAdd, From: hostileFrom}, // unknown: an error diagnostic quoting it
		},
	}
	an := engine.Analyze(s, s.Training, engine.DefaultAssumptions())
	if an.Result.Errors == 0 {
		t.Fatal("the unknown merge source gave no error; the test needs a diagnostic that quotes a name")
	}
	return an
}

// noControls fails when out holds anything a terminal acts on: it must be
// valid UTF-8 whose only control character is the line feed.
func noControls(t *testing.T, what, out string) {
	t.Helper()
	if !utf8.ValidString(out) {
		t.Errorf("%s is not valid UTF-8", what)
	}
	for i, line := range strings.Split(out, "\n") {
		if !textsafe.Safe(line) {
			t.Errorf("%s line %d holds a control character: %q", what, i+1, line)
		}
	}
}

func TestTextReportHostileNames(t *testing.T) {
	an := hostileAnalysis(t)
	var b bytes.Buffer
	if err := WriteText(&b, an); err != nil {
		t.Fatal(err)
	}
	out := b.String()
	noControls(t, "the text report", out)
	for _, want := range []string{
		`\x1b]0;pwned\a<img src=x onerror=alert(1)> | net  ·  input 3×16×16`,                  // the title, visible
		`[stem\x1b[2J|<img src=x onerror=alert(1)>\r\u009bx\x9b\xff&amp;[a](http://x)` + "`]", // the layer's name
		`gone\x1b[2J<script>alert(1)</script>|`,                                               // the diagnostic's quote
	} {
		if !strings.Contains(out, want) {
			t.Errorf("the report lacks %q:\n%s", want, out)
		}
	}
}

func TestMarkdownReportHostileNames(t *testing.T) {
	an := hostileAnalysis(t)
	var b bytes.Buffer
	if err := WriteMarkdown(&b, an); err != nil {
		t.Fatal(err)
	}
	out := b.String()
	noControls(t, "the markdown report", out)
	// HTML: no tag may open (a raw < would start one, CommonMark section
	// 6.6 raw HTML), and & is written as &amp; (HTML character references).
	for _, bad := range []string{"<img", "<script", "</script", "&amp;[a]"} {
		if strings.Contains(out, bad) {
			t.Errorf("the markdown holds %q:\n%s", bad, out)
		}
	}
	if !strings.HasPrefix(out, `## \\x1b\]0;pwned\\a&lt;img src=x onerror=alert(1)&gt; \| net`+"\n") {
		t.Errorf("title line: %q", strings.SplitN(out, "\n", 2)[0])
	}
	for _, want := range []string{
		"&lt;script&gt;alert(1)&lt;/script&gt;",
		`&amp;amp;\[a\](http://x)` + "\\`", // no link, no code span (CommonMark backslash escapes)
	} {
		if !strings.Contains(out, want) {
			t.Errorf("the markdown lacks %q:\n%s", want, out)
		}
	}
	// Every table row keeps its seven cells: the pipes in names are
	// escaped (GFM tables: "\|" is a pipe inside a cell).
	named, in := 0, false
	for _, line := range strings.Split(out, "\n") {
		if strings.HasPrefix(line, "| at |") {
			in = true
		}
		if in && line == "" {
			break
		}
		if !in || strings.HasPrefix(line, "| ---") {
			continue
		}
		if n := markdownCells(line); n != 7 {
			t.Errorf("row %q has %d cells, want 7", line, n)
		}
		if strings.Contains(line, "stem") {
			named++
		}
	}
	if named < 2 { // the convolution and the concat naming it
		t.Errorf("%d table rows name the layer:\n%s", named, out)
	}
}

// markdownCells counts the cells of a table row, an escaped pipe being
// part of a cell.
func markdownCells(line string) int {
	pipes := 0
	for i := 0; i < len(line); i++ {
		switch line[i] {
		case '\\':
			i++
		case '|':
			pipes++
		}
	}
	return pipes - 1
}

func TestCSVReportHostileNames(t *testing.T) {
	an := hostileAnalysis(t)
	var b bytes.Buffer
	if err := WriteCSV(&b, an); err != nil {
		t.Fatal(err)
	}
	out := b.String()
	noControls(t, "the CSV", out)
	recs, err := csv.NewReader(strings.NewReader(out)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(recs) != 1+len(an.Result.Rows) {
		t.Fatalf("%d records for %d rows", len(recs), len(an.Result.Rows))
	}
	if got, want := recs[1][2], textsafe.Line(hostileLayer); got != want {
		t.Errorf("name cell %q, want %q", got, want)
	}
}
