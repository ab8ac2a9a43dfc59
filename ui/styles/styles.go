// Package styles is the one place that decides how stackfit's editor
// looks: every colour and text attribute the views use comes from Styles.
// Only the 16 basic ANSI colours are used, so the editor reads the same on
// 16-colour, 256-colour and true-colour terminals; with NO_COLOR (or no
// colour support) the layout, marks and gauge glyphs carry the meaning.
package styles

import "github.com/charmbracelet/lipgloss"

// Styles holds the text styles of the editor.
type Styles struct {
	Title    lipgloss.Style // the top line
	Modified lipgloss.Style // the unsaved-changes mark
	Cursor   lipgloss.Style // the selected row
	Range    lipgloss.Style // rows in a selected range
	Dim      lipgloss.Style // secondary text
	Block    lipgloss.Style // block headers
	Error    lipgloss.Style
	Warning  lipgloss.Style
	Note     lipgloss.Style
	Good     lipgloss.Style // "fits"
	Bad      lipgloss.Style // "does not fit"
	Delta    lipgloss.Style // changes against the baseline
	Label    lipgloss.Style // form labels
	Help     lipgloss.Style
	// Gauge colours the budget gauge's categories, in Memory.Categories order.
	Gauge [6]lipgloss.Style
	// GaugeGlyph draws each category so it reads without colour too.
	GaugeGlyph [6]string
	// Free is the gauge's unused part; Reserve the headroom kept free.
	Free, Reserve lipgloss.Style
	// SelectMarks go either side of a text field's selected value (the
	// one typing replaces), drawn in Cursor: empty where Cursor shows it,
	// marks where it cannot (no colour: no attributes either).
	SelectMarks [2]string
}

// DefaultStyles returns stackfit's look.
func DefaultStyles() Styles {
	c := func(s string) lipgloss.Color { return lipgloss.Color(s) }
	return Styles{
		Title:    lipgloss.NewStyle().Bold(true).Foreground(c("6")),
		Modified: lipgloss.NewStyle().Bold(true).Foreground(c("3")),
		Cursor:   lipgloss.NewStyle().Reverse(true),
		Range:    lipgloss.NewStyle().Underline(true),
		Dim:      lipgloss.NewStyle().Foreground(c("8")),
		Block:    lipgloss.NewStyle().Foreground(c("5")).Bold(true),
		Error:    lipgloss.NewStyle().Foreground(c("1")).Bold(true),
		Warning:  lipgloss.NewStyle().Foreground(c("3")),
		Note:     lipgloss.NewStyle().Foreground(c("4")),
		Good:     lipgloss.NewStyle().Foreground(c("2")).Bold(true),
		Bad:      lipgloss.NewStyle().Foreground(c("1")).Bold(true),
		Delta:    lipgloss.NewStyle().Foreground(c("5")),
		Label:    lipgloss.NewStyle().Foreground(c("6")),
		Help:     lipgloss.NewStyle().Foreground(c("8")),
		Gauge: [6]lipgloss.Style{
			lipgloss.NewStyle().Foreground(c("4")),
			lipgloss.NewStyle().Foreground(c("5")),
			lipgloss.NewStyle().Foreground(c("3")),
			lipgloss.NewStyle().Foreground(c("2")),
			lipgloss.NewStyle().Foreground(c("6")),
			lipgloss.NewStyle().Foreground(c("7")),
		},
		GaugeGlyph: [6]string{"█", "▓", "▒", "░", "=", "-"},
		Free:       lipgloss.NewStyle().Foreground(c("8")),
		Reserve:    lipgloss.NewStyle().Foreground(c("1")),
	}
}

// NoColorStyles returns the look for NO_COLOR and terminals without
// colour, where no colour nor attribute (reverse video included) shows:
// DefaultStyles, with marks for what only a style showed there, as the
// list's and the picker's cursor marks and the gauge's glyphs do. A text
// field's selected value shows as ‹value›.
func NoColorStyles() Styles {
	st := DefaultStyles()
	st.SelectMarks = [2]string{"‹", "›"}
	return st
}
