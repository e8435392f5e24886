package main

import (
	"fmt"
	"io"
	"math"
	"strings"
	"unicode/utf8"

	"rcdemand/demand"
)

// Terminal tables: every table rcdemand prints goes through textTable, so
// columns line up whatever the names, numbers in a column share their
// decimals, and long names are cut with an ellipsis the same way everywhere.

// pageWidth is the widest line rcdemand prints.
const pageWidth = 100

// col describes one column of a textTable.
type col struct {
	head string // lines separated by "\n"
	left bool   // left-aligned (names); numbers are right-aligned
	max  int    // cut cells longer than this with an ellipsis; 0: no limit
}

// textTable is a table of text cells printed in aligned columns.
type textTable struct {
	indent string
	cols   []col
	rows   [][]string // a nil row is a horizontal rule
}

func newTable(indent string, cols ...col) *textTable {
	return &textTable{indent: indent, cols: cols}
}

// add appends a row; missing cells are empty.
func (t *textTable) add(cells ...string) {
	row := make([]string, len(t.cols))
	copy(row, cells)
	t.rows = append(t.rows, row)
}

// rule appends a horizontal rule.
func (t *textTable) rule() { t.rows = append(t.rows, nil) }

// title appends a line of text across the columns (a group's title): not
// cut, and not counted in the columns' widths.
func (t *textTable) title(text string) { t.rows = append(t.rows, []string{"\x00" + text}) }

// isTitle reports whether row r is a title.
func isTitle(r []string) bool { return len(r) == 1 && strings.HasPrefix(r[0], "\x00") }

// widths returns each column's width after cutting.
func (t *textTable) widths() []int {
	w := make([]int, len(t.cols))
	for k, c := range t.cols {
		for _, h := range strings.Split(c.head, "\n") {
			w[k] = max(w[k], runeLen(cut(h, c.max)))
		}
		for _, r := range t.rows {
			if r != nil && !isTitle(r) {
				w[k] = max(w[k], runeLen(cut(r[k], c.max)))
			}
		}
	}
	return w
}

// write prints the header, a rule and the rows.
func (t *textTable) write(out io.Writer) {
	w := t.widths()
	total := 0
	for _, x := range w {
		total += x
	}
	total += 2 * (len(w) - 1)
	line := func(cells []string) {
		var b strings.Builder
		b.WriteString(t.indent)
		for k, c := range t.cols {
			s := cut(cells[k], c.max)
			pad := strings.Repeat(" ", w[k]-runeLen(s))
			if k > 0 {
				b.WriteString("  ")
			}
			if c.left {
				b.WriteString(s)
				if k < len(t.cols)-1 {
					b.WriteString(pad)
				}
			} else {
				b.WriteString(pad + s)
			}
		}
		fmt.Fprintln(out, strings.TrimRight(b.String(), " "))
	}
	lines := 1
	for _, c := range t.cols {
		lines = max(lines, strings.Count(c.head, "\n")+1)
	}
	for i := 0; i < lines; i++ {
		heads := make([]string, len(t.cols))
		for k, c := range t.cols {
			hs := strings.Split(c.head, "\n")
			if j := i - (lines - len(hs)); j >= 0 {
				heads[k] = hs[j] // bottom-aligned
			}
		}
		line(heads)
	}
	fmt.Fprintln(out, t.indent+strings.Repeat("─", total))
	for _, r := range t.rows {
		switch {
		case r == nil:
			fmt.Fprintln(out, t.indent+strings.Repeat("─", total))
		case isTitle(r):
			fmt.Fprintln(out, t.indent+r[0][1:])
		default:
			line(r)
		}
	}
}

func runeLen(s string) int { return utf8.RuneCountInString(s) }

// cut shortens s to n characters, the last an ellipsis; n ≤ 0 leaves s.
func cut(s string, n int) string {
	if n <= 0 || runeLen(s) <= n {
		return s
	}
	r := []rune(s)
	return string(r[:n-1]) + "…"
}

// decimals returns the number of decimals that shows the largest |x| of xs
// with sig significant digits (at least 0, at most 6), so that one column
// of numbers shares its decimals.
func decimals(sig int, xs ...float64) int {
	big := 0.0
	for _, x := range xs {
		if !math.IsNaN(x) && !math.IsInf(x, 0) {
			big = math.Max(big, math.Abs(x))
		}
	}
	if big == 0 {
		return sig - 1
	}
	d := sig - 1 - int(math.Floor(math.Log10(big)))
	return min(max(d, 0), 6)
}

// fixed formats x with d decimals, "—" for NaN.
func fixed(x float64, d int) string {
	if math.IsNaN(x) {
		return "—"
	}
	return trimNegZero(fmt.Sprintf("%.*f", d, x))
}

// signed formats x with d decimals and a sign.
func signed(x float64, d int) string {
	if math.IsNaN(x) {
		return "—"
	}
	return trimNegZero(fmt.Sprintf("%+.*f", d, x))
}

// trimNegZero turns "-0.00" into "0.00" (and "+0.00" stays).
func trimNegZero(s string) string {
	if strings.HasPrefix(s, "-") && strings.Trim(s[1:], "0.") == "" {
		return s[1:]
	}
	return s
}

// pValue formats a p-value as a reader expects: "p = 0.093", "p < 0.001".
func pValue(p float64) string {
	if math.IsNaN(p) {
		return "p not available"
	}
	return demand.PText(p)
}

// wrap breaks text into lines of at most pageWidth characters, each
// starting with indent.
func wrap(text, indent string) string {
	var b strings.Builder
	line := indent
	for _, word := range strings.Fields(text) {
		if runeLen(line)+1+runeLen(word) > pageWidth && strings.TrimSpace(line) != "" {
			b.WriteString(line + "\n")
			line = indent
		}
		if strings.TrimSpace(line) != "" {
			line += " "
		}
		line += word
	}
	b.WriteString(line)
	return b.String()
}

// thousands formats a whole number with thin separators: 1,800.
func thousands(x float64) string {
	if math.IsNaN(x) {
		return "—"
	}
	s := fmt.Sprintf("%.0f", math.Abs(x))
	var b strings.Builder
	for i, r := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteByte(',')
		}
		b.WriteRune(r)
	}
	if x < 0 && s != "0" {
		return "-" + b.String()
	}
	return b.String()
}

// matrixBlocks prints a labelled matrix (rows × columns of numbers, NaN
// printed as "·") in blocks of columns that fit pageWidth, each column
// headed by its name cut to the column width.
func matrixBlocks(out io.Writer, rowNames, colNames []string, at func(r, c int) float64, d int) {
	cell := func(r, c int) string {
		if v := at(r, c); !math.IsNaN(v) {
			return fixed(v, d)
		}
		return "·"
	}
	columnBlocks(out, blockLayout{labelMax: 20, cellMax: 14}, rowNames, colNames, cell)
}

// blockLayout is the shape of a table printed by columnBlocks: the head of
// its column of row names, and the widths at which row names and column
// heads are cut (0: never).
type blockLayout struct {
	corner            string
	labelMax, cellMax int
}

// columnBlocks prints a table of text cells, each row led by its name, in
// blocks of as many columns as fit pageWidth, every block repeating the
// row names.
func columnBlocks(out io.Writer, l blockLayout, rowNames, colNames []string, cell func(r, c int) string) {
	label := runeLen(l.corner)
	for _, n := range rowNames {
		label = max(label, runeLen(cut(n, l.labelMax)))
	}
	width := 0
	for c := range colNames {
		width = max(width, runeLen(cut(colNames[c], l.cellMax)))
		for r := range rowNames {
			width = max(width, runeLen(cut(cell(r, c), l.cellMax)))
		}
	}
	per := max(1, (pageWidth-2-label)/(width+2))
	for start := 0; start < len(colNames); start += per {
		end := min(start+per, len(colNames))
		cols := []col{{head: l.corner, left: true, max: l.labelMax}}
		for c := start; c < end; c++ {
			cols = append(cols, col{head: colNames[c], max: l.cellMax})
		}
		t := newTable("  ", cols...)
		for r, n := range rowNames {
			cells := []string{n}
			for c := start; c < end; c++ {
				cells = append(cells, cell(r, c))
			}
			t.add(cells...)
		}
		if start > 0 {
			fmt.Fprintln(out)
		}
		t.write(out)
	}
}
