package data

import (
	"bytes"
	"context"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/apache/arrow/go/v15/arrow"
	"github.com/apache/arrow/go/v15/arrow/array"
	"github.com/apache/arrow/go/v15/arrow/memory"
	"github.com/apache/arrow/go/v15/parquet"
	"github.com/apache/arrow/go/v15/parquet/pqarrow"
)

// InputError is a problem with an input file that the user can fix. Row is
// the 1-based data row (0 when the problem is not tied to a row) and Column
// the column name ("" when none applies).
type InputError struct {
	File   string
	Row    int
	Column string
	Msg    string
}

func (e *InputError) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Row > 0 {
		fmt.Fprintf(&b, ": row %d", e.Row)
	}
	if e.Column != "" {
		if e.Row > 0 {
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
// as text (CSV, or Parquet text columns) or as numbers (Parquet numeric
// columns); the accessors convert and validate on request.
type Table struct {
	File  string // path as given, used in error messages
	Names []string
	index map[string]int
	text  [][]string
	num   [][]float64
	rows  int
	order []int // original 0-based row of each current row; nil means identity
}

// Len returns the number of data rows.
func (t *Table) Len() int { return t.rows }

// Has reports whether the table has a column called name.
func (t *Table) Has(name string) bool { _, ok := t.index[name]; return ok }

// Row returns the 1-based data row in the file of the current row i.
func (t *Table) Row(i int) int {
	if t.order == nil {
		return i + 1
	}
	return t.order[i] + 1
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
	if t.num[c] != nil {
		for i, v := range t.num[c] {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, inputErr(t.File, t.Row(i), name, "%v is not a finite number", v)
			}
			out[i] = v
		}
		return out, nil
	}
	for i, s := range t.text[c] {
		s = strings.TrimSpace(s)
		if s == "" {
			return nil, inputErr(t.File, t.Row(i), name, "empty cell where a number is needed")
		}
		v, err := strconv.ParseFloat(s, 64)
		if err != nil {
			return nil, inputErr(t.File, t.Row(i), name, "%q is not a number", s)
		}
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, inputErr(t.File, t.Row(i), name, "%q is not a finite number", s)
		}
		out[i] = v
	}
	return out, nil
}

// Strings returns the named column as non-empty text identifiers. Numeric
// Parquet columns are formatted in the shortest form that round-trips.
func (t *Table) Strings(name string) ([]string, error) {
	c, err := t.col(name)
	if err != nil {
		return nil, err
	}
	out := make([]string, t.rows)
	if t.num[c] != nil {
		for i, v := range t.num[c] {
			if math.IsNaN(v) {
				return nil, inputErr(t.File, t.Row(i), name, "missing identifier")
			}
			out[i] = strconv.FormatFloat(v, 'g', -1, 64)
		}
		return out, nil
	}
	for i, s := range t.text[c] {
		s = strings.TrimSpace(s)
		if s == "" {
			return nil, inputErr(t.File, t.Row(i), name, "empty identifier")
		}
		out[i] = s
	}
	return out, nil
}

// permute reorders the rows so that new row i is old row perm[i].
func (t *Table) permute(perm []int) {
	for c := range t.Names {
		if t.text[c] != nil {
			old := t.text[c]
			nw := make([]string, len(old))
			for i, p := range perm {
				nw[i] = old[p]
			}
			t.text[c] = nw
		}
		if t.num[c] != nil {
			old := t.num[c]
			nw := make([]float64, len(old))
			for i, p := range perm {
				nw[i] = old[p]
			}
			t.num[c] = nw
		}
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
	r.ReuseRecord = false
	header, err := r.Read()
	if err != nil {
		return nil, csvErr(name, err)
	}
	t := &Table{File: name, index: make(map[string]int, len(header))}
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
	t.text = make([][]string, len(header))
	t.num = make([][]float64, len(header))
	for {
		rec, err := r.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, csvErr(name, err)
		}
		for c := range rec {
			t.text[c] = append(t.text[c], rec[c])
		}
		t.rows++
	}
	if t.rows == 0 {
		return nil, inputErr(name, 0, "", "the table has a header but no data rows")
	}
	return t, nil
}

func csvErr(name string, err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		row := pe.StartLine - 1 // line 1 is the header
		if errors.Is(pe.Err, csv.ErrFieldCount) {
			return inputErr(name, row, "", "wrong number of fields (truncated or misaligned line %d)", pe.Line)
		}
		return inputErr(name, row, "", "malformed CSV on line %d: %v", pe.Line, pe.Err)
	}
	return inputErr(name, 0, "", "%v", err)
}

func readParquet(path string) (*Table, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, openErr(path, err)
	}
	defer f.Close()
	tbl, err := pqarrow.ReadTable(context.Background(), f, parquet.NewReaderProperties(memory.DefaultAllocator),
		pqarrow.ArrowReadProperties{}, memory.DefaultAllocator)
	if err != nil {
		return nil, inputErr(path, 0, "", "not a readable Parquet file: %v", err)
	}
	defer tbl.Release()
	n := int(tbl.NumRows())
	if n == 0 {
		return nil, inputErr(path, 0, "", "the table has no data rows")
	}
	sc := tbl.Schema()
	t := &Table{File: path, rows: n, index: map[string]int{}}
	t.text = make([][]string, sc.NumFields())
	t.num = make([][]float64, sc.NumFields())
	for c, fld := range sc.Fields() {
		if _, dup := t.index[fld.Name]; dup {
			return nil, inputErr(path, 0, fld.Name, "appears twice in the schema")
		}
		t.index[fld.Name] = c
		t.Names = append(t.Names, fld.Name)
		if err := t.fillArrow(c, fld, tbl.Column(c).Data()); err != nil {
			return nil, err
		}
	}
	return t, nil
}

func (t *Table) fillArrow(c int, fld arrow.Field, ch *arrow.Chunked) error {
	row := 0
	isText := false
	switch fld.Type.ID() {
	case arrow.STRING, arrow.LARGE_STRING:
		isText = true
		t.text[c] = make([]string, 0, t.rows)
	case arrow.FLOAT64, arrow.FLOAT32, arrow.INT8, arrow.INT16, arrow.INT32, arrow.INT64,
		arrow.UINT8, arrow.UINT16, arrow.UINT32, arrow.UINT64:
		t.num[c] = make([]float64, 0, t.rows)
	default:
		return inputErr(t.File, 0, fld.Name, "has Parquet/Arrow type %s; want a number or text", fld.Type)
	}
	for _, arr := range ch.Chunks() {
		for i := 0; i < arr.Len(); i++ {
			row++
			if arr.IsNull(i) {
				if isText {
					t.text[c] = append(t.text[c], "")
				} else {
					t.num[c] = append(t.num[c], math.NaN())
				}
				continue
			}
			switch a := arr.(type) {
			case *array.String:
				t.text[c] = append(t.text[c], a.Value(i))
			case *array.LargeString:
				t.text[c] = append(t.text[c], a.Value(i))
			case *array.Float64:
				t.num[c] = append(t.num[c], a.Value(i))
			case *array.Float32:
				t.num[c] = append(t.num[c], float64(a.Value(i)))
			case *array.Int8:
				t.num[c] = append(t.num[c], float64(a.Value(i)))
			case *array.Int16:
				t.num[c] = append(t.num[c], float64(a.Value(i)))
			case *array.Int32:
				t.num[c] = append(t.num[c], float64(a.Value(i)))
			case *array.Int64:
				t.num[c] = append(t.num[c], float64(a.Value(i)))
			case *array.Uint8:
				t.num[c] = append(t.num[c], float64(a.Value(i)))
			case *array.Uint16:
				t.num[c] = append(t.num[c], float64(a.Value(i)))
			case *array.Uint32:
				t.num[c] = append(t.num[c], float64(a.Value(i)))
			case *array.Uint64:
				t.num[c] = append(t.num[c], float64(a.Value(i)))
			default:
				return inputErr(t.File, row, fld.Name, "unsupported Arrow array %T", arr)
			}
		}
	}
	return nil
}
