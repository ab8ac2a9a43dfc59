// Package cells fits text into terminal cells: every line the editor and
// its overlays draw goes through it, so a wide character or a styled
// string is measured the way the terminal will show it.
package cells

import (
	"strings"

	"github.com/charmbracelet/x/ansi"
)

// Fit pads or cuts s to exactly w cells, marking a cut with "…".
func Fit(s string, w int) string {
	if w <= 0 {
		return ""
	}
	n := ansi.StringWidth(s)
	if n > w {
		return ansi.Truncate(s, w, "…")
	}
	return s + strings.Repeat(" ", w-n)
}

// Right pads s on the left to w cells (cutting it when longer).
func Right(s string, w int) string {
	n := ansi.StringWidth(s)
	if n >= w {
		return ansi.Truncate(s, w, "")
	}
	return strings.Repeat(" ", w-n) + s
}

// Block draws lines as exactly n lines of w cells, each ending in a
// newline: missing lines are blank, extra ones are left out.
func Block(lines []string, n, w int) string {
	var b strings.Builder
	for i := 0; i < n; i++ {
		s := ""
		if i < len(lines) {
			s = lines[i]
		}
		b.WriteString(Fit(s, w))
		b.WriteByte('\n')
	}
	return b.String()
}

// Width is the number of cells s takes.
func Width(s string) int { return ansi.StringWidth(s) }
