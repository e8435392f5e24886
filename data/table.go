package data

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"sync"
)

// InputError is a problem with an input file that the user can fix.
//
// Row is the 1-based data row: the first row of data is row 1 in a CSV file
// (the header is not counted) and in a Parquet file (which has no header).
// Line is, for a CSV file, the line on which that row starts as an editor or
// a spreadsheet numbers it (the header is line 1); it differs from Row + 1
// when the file has blank lines or quoted fields that span lines. Either is 0
// when the problem is not tied to a row or the format has no lines. Column is
// the column name ("" when none applies).
//
// The message reads "file: data row 17 (line 18), column "share": …" for a
// CSV file and "file: data row 17, column "share": …" for a Parquet file, so
// no one has to guess whether the header was counted.
type InputError struct {
	File   string
	Row    int
	Line   int
	Column string
	Msg    string
}

func (e *InputError) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	switch {
	case e.Row > 0 && e.Line > 0:
		fmt.Fprintf(&b, ": data row %d (line %d)", e.Row, e.Line)
	case e.Row > 0:
		fmt.Fprintf(&b, ": data row %d", e.Row)
	case e.Line > 0:
		fmt.Fprintf(&b, ": line %d", e.Line)
	}
	if e.Column != "" {
		if e.Row > 0 || e.Line > 0 {
			b.WriteString(",")
		} else {
			b.WriteString(":")
		}
		fmt.Fprintf(&b, " column %q", e.Column)
	}
	b.WriteString(": ")
	b.WriteString(e.Msg)
	return b.String()
}

func inputErr(file string, row int, col, format string, args ...any) *InputError {
	return &InputError{File: file, Row: row, Column: col, Msg: fmt.Sprintf(format, args...)}
}

// Table is a rectangular table read from a file. Each column keeps its cells
// as they were stored: text (CSV, Parquet text), floating point or integers
// (Parquet); the accessors convert and validate on request.
type Table struct {
	File  string // path as given, used in error messages
	Names []string
	index map[string]int
	cols  []column
	rows  int
	order []int // original 0-based row of each current row; nil means identity
	csv   bool  // read from CSV, so rows have line numbers
	lines []int // line of each original row; nil when row r is on line r+2

	source *Input // fingerprint of the file's bytes, when read whole (see Source)
}

// Source returns the fingerprint (SHA-256 and size; no role or path) of the
// bytes of the file the table was parsed from, or false when that is not
// known: a table parsed from memory, a Parquet file (read in parts), or a
// table derived with other rows or columns (Select, WithFloats,
// WithStrings). NewProducts and NewAgents, which only reorder, keep it.
func (t *Table) Source() (Input, bool) {
	if t.source == nil {
		return Input{}, false
	}
	return *t.source, true
}

// column holds one column's cells; exactly one of file, text, num and ints
// is set. Cells in file are found by file row (Table.Row); the others are
// held in the table's current row order.
type column struct {
	file     *csvText  // a plain CSV file's content; the cells are its field
	field    int       // the field of each line of file
	text     []string  // other CSV cells and Parquet text
	num      []float64 // Parquet floating point; NaN marks a null
	ints     []int64   // Parquet integers, kept exact (a uint64's bits when unsigned)
	null     []bool    // nulls of an integer column; nil when there are none
	unsigned bool
}

func (c *column) isNull(i int) bool { return c.null != nil && c.null[i] }

// float returns integer cell i as a number (rounded beyond 2^53).
func (c *column) float(i int) float64 {
	if c.unsigned {
		return float64(uint64(c.ints[i]))
	}
	return float64(c.ints[i])
}

// format returns integer cell i in full.
func (c *column) format(i int) string {
	if c.unsigned {
		return strconv.FormatUint(uint64(c.ints[i]), 10)
	}
	return strconv.FormatInt(c.ints[i], 10)
}

// Len returns the number of data rows.
func (t *Table) Len() int { return t.rows }

// Has reports whether the table has a column called name.
func (t *Table) Has(name string) bool { _, ok := t.index[name]; return ok }

// Row returns the 1-based data row in the file of the current row i (the
// header of a CSV file is not counted).
func (t *Table) Row(i int) int {
	if t.order == nil {
		return i + 1
	}
	return t.order[i] + 1
}

// Line returns, for a CSV file, the line on which the current row i starts
// (the header is line 1), and 0 for a Parquet file.
func (t *Table) Line(i int) int {
	if !t.csv {
		return 0
	}
	r := t.Row(i) - 1
	if t.lines == nil {
		return r + 2
	}
	return t.lines[r]
}

// Errorf returns an *InputError about the current row i and the named column
// ("" for none), with the data row and, for CSV, the line filled in.
func (t *Table) Errorf(i int, column, format string, args ...any) *InputError {
	return &InputError{File: t.File, Row: t.Row(i), Line: t.Line(i), Column: column, Msg: fmt.Sprintf(format, args...)}
}

func (t *Table) col(name string) (int, error) {
	c, ok := t.index[name]
	if !ok {
		return 0, inputErr(t.File, 0, name, "no such column (columns are: %s)", strings.Join(t.Names, ", "))
	}
	return c, nil
}

// Floats returns the named column as finite numbers, or an error naming the
// first offending row.
func (t *Table) Floats(name string) ([]float64, error) {
	c, err := t.col(name)
	if err != nil {
		return nil, err
	}
	out := make([]float64, t.rows)
	col := &t.cols[c]
	switch {
	case col.num != nil:
		for i, v := range col.num {
			if math.IsNaN(v) {
				return nil, t.Errorf(i, name, "missing value (null or NaN) where a number is needed")
			}
			if math.IsInf(v, 0) {
				return nil, t.Errorf(i, name, "%v is not a finite number", v)
			}
			out[i] = v
		}
		return out, nil
	case col.ints != nil:
		for i := range col.ints {
			if col.isNull(i) {
				return nil, t.Errorf(i, name, "missing (null) value where a number is needed")
			}
			out[i] = col.float(i)
		}
		return out, nil
	}
	if err := t.parseFloats(col, name, out); err != nil {
		return nil, err
	}
	return out, nil
}

// numbers is Floats without the copy, for a column that already holds finite
// numbers (as after ParseNumbers): the slice is the table's own and must
// not be written to. Any other column is read by Floats.
func (t *Table) numbers(name string) ([]float64, error) {
	if c, ok := t.index[name]; ok {
		if v := t.cols[c].num; v != nil && allFinite(v) {
			return v, nil
		}
	}
	return t.Floats(name)
}

func allFinite(v []float64) bool {
	for _, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return false
		}
	}
	return true
}

// ParseNumbers parses each named text column in which every cell is a
// finite number, and keeps the numbers in place of the text, so that later
// Floats calls only copy them; it is for tables read ahead of their checks.
// A column with any other cell, a column that is not text and a name the
// table does not have are left as they are, for Floats to report in turn.
func (t *Table) ParseNumbers(names []string) {
	for _, name := range names {
		c, ok := t.index[name]
		if !ok || (t.cols[c].file == nil && t.cols[c].text == nil) {
			continue
		}
		out := make([]float64, t.rows)
		if t.parseFloats(&t.cols[c], name, out) == nil {
			t.cols[c] = column{num: out}
		}
	}
}

// parseFloats parses the text of col into out, its rows split among the
// processors when there are many. The error names the first offending row.
func (t *Table) parseFloats(col *column, name string, out []float64) error {
	parts := 1
	if len(out) >= 1<<14 {
		parts = runtime.GOMAXPROCS(0)
	}
	errs := make([]error, parts)
	panics := make([]any, parts) // a part's panic, raised again on the caller's goroutine
	var wg sync.WaitGroup
	for p := range parts {
		lo, hi := p*len(out)/parts, (p+1)*len(out)/parts
		wg.Go(func() {
			defer func() { panics[p] = recover() }()
			errs[p] = t.parseFloatRows(col, name, out, lo, hi)
		})
	}
	wg.Wait()
	for _, r := range panics {
		if r != nil {
			panic(r)
		}
	}
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}

// parseFloatRows parses rows [lo, hi) of col into out.
func (t *Table) parseFloatRows(col *column, name string, out []float64, lo, hi int) error {
	for i := lo; i < hi; i++ {
		s := strings.TrimSpace(t.text(col, i))
		if s == "" {
			return t.Errorf(i, name, "empty cell where a number is needed")
		}
		v, err := strconv.ParseFloat(s, 64)
		if err != nil {
			return t.Errorf(i, name, "%q is not a number%s", s, decimalCommaHint(s))
		}
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return t.Errorf(i, name, "%q is not a finite number", s)
		}
		out[i] = v
	}
	return nil
}

// decimalCommaHint returns a hint for a cell such as "1,5" or "-0,25" that
// would be a number with a decimal point, else "".
func decimalCommaHint(s string) string {
	if v, err := strconv.ParseFloat(strings.Replace(s, ",", ".", 1), 64); err == nil && strings.Count(s, ",") == 1 && !strings.ContainsAny(s, "._") {
		return fmt.Sprintf(" (a decimal comma? numbers take a decimal point: %v)", v)
	}
	return ""
}

// text returns the text of current row i of a CSV or Parquet text column.
func (t *Table) text(col *column, i int) string {
	if col.file != nil {
		return col.file.cell(t.Row(i)-1, col.field)
	}
	return col.text[i]
}

// Strings returns the named column as non-empty text identifiers. Integer
// Parquet columns are written out in full, every digit exact (int64 and
// uint64 alike). Floating-point Parquet columns are written as integers when
// the value is one and below 2^53 in magnitude (1234567, not 1.234567e+06,
// so they match the same identifier in a CSV file), otherwise in the
// shortest form that round-trips; beyond 2^53 a float64 cannot hold every
// integer, so store large identifiers as integers or text.
func (t *Table) Strings(name string) ([]string, error) {
	c, err := t.col(name)
	if err != nil {
		return nil, err
	}
	out := make([]string, t.rows)
	col := &t.cols[c]
	switch {
	case col.num != nil:
		for i, v := range col.num {
			if math.IsNaN(v) {
				return nil, t.Errorf(i, name, "missing identifier")
			}
			out[i] = formatID(v)
		}
		return out, nil
	case col.ints != nil:
		for i := range col.ints {
			if col.isNull(i) {
				return nil, t.Errorf(i, name, "missing identifier")
			}
			out[i] = col.format(i)
		}
		return out, nil
	}
	for i := range out {
		s := strings.TrimSpace(t.text(col, i))
		if s == "" {
			return nil, t.Errorf(i, name, "empty identifier")
		}
		out[i] = s
	}
	return out, nil
}

// StringsOrEmpty is Strings for a column whose empty cells (and nulls)
// mean "not given": they come back as "".
func (t *Table) StringsOrEmpty(name string) ([]string, error) {
	c, err := t.col(name)
	if err != nil {
		return nil, err
	}
	col := &t.cols[c]
	out := make([]string, t.rows)
	for i := range out {
		switch {
		case col.num != nil && !math.IsNaN(col.num[i]):
			out[i] = formatID(col.num[i])
		case col.ints != nil && !col.isNull(i):
			out[i] = col.format(i)
		case col.text != nil || col.file != nil:
			out[i] = strings.TrimSpace(t.text(col, i))
		}
	}
	return out, nil
}

// formatID formats a floating-point identifier: an integer below 2^53 in
// magnitude as an integer ("1234567"; −0 as "0"), anything else in the
// shortest form that round-trips.
func formatID(v float64) string {
	if v == math.Trunc(v) && math.Abs(v) < 1<<53 {
		if v == 0 {
			return "0"
		}
		return strconv.FormatFloat(v, 'f', -1, 64)
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

// permuted returns the slice whose element i is s[perm[i]] (len(perm)
// elements; perm may repeat rows); nil stays nil.
func permuted[T any](s []T, perm []int) []T {
	if s == nil {
		return nil
	}
	out := make([]T, len(perm))
	for i, p := range perm {
		out[i] = s[p]
	}
	return out
}

// permute reorders the rows so that new row i is old row perm[i] (perm may
// repeat or leave out rows: the caller sets t.rows). It replaces the
// columns' cells rather than writing into them, so a shallow copy can be
// permuted without changing the table it was copied from.
func (t *Table) permute(perm []int) {
	for c := range t.cols {
		col := &t.cols[c]
		col.text = permuted(col.text, perm)
		col.num = permuted(col.num, perm)
		col.ints = permuted(col.ints, perm)
		col.null = permuted(col.null, perm)
	}
	order := make([]int, len(perm))
	for i, p := range perm {
		if t.order == nil {
			order[i] = p
		} else {
			order[i] = t.order[p]
		}
	}
	t.order = order
}

// ReadTable reads a CSV or Parquet file, chosen by its extension.
func ReadTable(path string) (*Table, error) {
	switch strings.ToLower(filepath.Ext(path)) {
	case ".csv":
		return readCSV(path)
	case ".parquet", ".pq":
		return readParquet(path)
	default:
		return nil, inputErr(path, 0, "", "unknown table format %q: use .csv or .parquet", filepath.Ext(path))
	}
}

func openErr(path string, err error) error {
	if errors.Is(err, os.ErrNotExist) {
		return inputErr(path, 0, "", "file does not exist")
	}
	return inputErr(path, 0, "", "cannot read: %v", err)
}
