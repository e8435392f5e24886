package data

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
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
}

// column holds one column's cells; exactly one of text, num and ints is set.
type column struct {
	text     []string  // CSV cells and Parquet text
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
			if math.IsNaN(v) || math.IsInf(v, 0) {
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
	for i, s := range col.text {
		s = strings.TrimSpace(s)
		if s == "" {
			return nil, t.Errorf(i, name, "empty cell where a number is needed")
		}
		v, err := strconv.ParseFloat(s, 64)
		if err != nil {
			return nil, t.Errorf(i, name, "%q is not a number", s)
		}
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, t.Errorf(i, name, "%q is not a finite number", s)
		}
		out[i] = v
	}
	return out, nil
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
	for i, s := range col.text {
		s = strings.TrimSpace(s)
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
		case col.text != nil:
			out[i] = strings.TrimSpace(col.text[i])
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

func readCSV(path string) (*Table, error) {
	raw, err := os.ReadFile(path)
	if err != nil {
		return nil, openErr(path, err)
	}
	return ParseCSV(path, raw)
}

// ParseCSV parses CSV content; name is used in error messages.
func ParseCSV(name string, raw []byte) (*Table, error) {
	raw = bytes.TrimPrefix(raw, []byte("\xef\xbb\xbf"))
	if len(bytes.TrimSpace(raw)) == 0 {
		return nil, inputErr(name, 0, "", "file is empty")
	}
	r := csv.NewReader(bytes.NewReader(raw))
	r.ReuseRecord = true // the fields are substrings of a string per record, kept by the columns
	header, err := r.Read()
	if err != nil {
		return nil, csvErr(name, 0, nil, nil, err)
	}
	t := &Table{File: name, index: make(map[string]int, len(header)), csv: true}
	for i, h := range header {
		h = strings.TrimSpace(h)
		if h == "" {
			return nil, inputErr(name, 0, "", "header field %d is empty", i+1)
		}
		if _, dup := t.index[h]; dup {
			return nil, inputErr(name, 0, h, "appears twice in the header")
		}
		t.index[h] = i
		t.Names = append(t.Names, h)
	}
	if len(header) == 1 {
		for _, d := range []string{";", "\t", "|"} {
			if strings.Contains(header[0], d) {
				return nil, inputErr(name, 0, "", "the header is one field containing %q: the file must be comma separated", d)
			}
		}
	}
	t.cols = make([]column, len(header))
	rows := bytes.Count(raw, []byte{'\n'})
	for c := range t.cols {
		t.cols[c].text = make([]string, 0, rows)
	}
	for {
		rec, err := r.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, csvErr(name, t.rows+1, header, rec, err)
		}
		for c := range rec {
			t.cols[c].text = append(t.cols[c].text, rec[c])
		}
		t.noteLine(r)
		t.rows++
	}
	if t.rows == 0 {
		return nil, inputErr(name, 0, "", "the table has a header but no data rows")
	}
	return t, nil
}

// noteLine records the line on which the record just read starts, keeping
// t.lines only once some record is not on line row+2 (after a blank line or
// a quoted field spanning lines).
func (t *Table) noteLine(r *csv.Reader) {
	line, _ := r.FieldPos(0)
	if t.lines == nil && line == t.rows+2 {
		return
	}
	if t.lines == nil {
		t.lines = make([]int, t.rows, t.rows+1024)
		for i := range t.lines {
			t.lines[i] = i + 2
		}
	}
	t.lines = append(t.lines, line)
}

// csvErr turns a CSV parse error in data row row (0 for the header) into an
// *InputError; rec is the record read with it, if any.
func csvErr(name string, row int, header, rec []string, err error) error {
	var pe *csv.ParseError
	if !errors.As(err, &pe) {
		return inputErr(name, 0, "", "%v", err)
	}
	e := &InputError{File: name, Row: row, Line: pe.StartLine}
	switch {
	case errors.Is(pe.Err, csv.ErrFieldCount):
		e.Msg = fmt.Sprintf("wrong number of fields: %d, the header has %d (truncated or misaligned)", len(rec), len(header))
	case pe.Line != pe.StartLine:
		e.Msg = fmt.Sprintf("malformed CSV on line %d: %v", pe.Line, pe.Err)
	default:
		e.Msg = fmt.Sprintf("malformed CSV: %v", pe.Err)
	}
	return e
}
