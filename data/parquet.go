package data

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"

	"github.com/apache/arrow/go/v15/parquet"
	"github.com/apache/arrow/go/v15/parquet/compress"
	"github.com/apache/arrow/go/v15/parquet/file"
	"github.com/apache/arrow/go/v15/parquet/schema"
)

// batchRows is the number of values read from or written to a column chunk
// at a time, which bounds the buffers of reading and writing.
const batchRows = 4096

// rowGroupRows is the largest number of rows in a row group written.
const rowGroupRows = 64 * 1024

// maxReserve is the most cells reserved for a column before its rows are
// read.
const maxReserve = 1 << 20

// readParquet reads a Parquet file whose top-level fields are each one
// column of numbers or text, one row group and one batch of rows at a time.
//
// The Parquet library panics on some malformed files (a corrupt compressed
// page, a footer without a schema); such a panic is returned as the
// *InputError of an unreadable file.
func readParquet(path string) (t *Table, err error) {
	defer func() {
		if r := recover(); r != nil {
			t, err = nil, inputErr(path, 0, "", "not a readable Parquet file: %v", r)
		}
	}()
	f, err := os.Open(path)
	if err != nil {
		return nil, openErr(path, err)
	}
	defer f.Close()
	var magic [4]byte
	if _, err := io.ReadFull(f, magic[:]); err != nil || string(magic[:]) != "PAR1" {
		return nil, inputErr(path, 0, "", "not a Parquet file: it does not begin with the Parquet mark PAR1 (a CSV or other file named %s?)", filepath.Ext(path))
	}
	props := parquet.NewReaderProperties(nil)
	props.BufferedStreamEnabled = true // read pages through a buffer, not a whole column chunk at once
	r, err := file.NewParquetReader(f, file.WithReadProps(props))
	if err != nil {
		return nil, inputErr(path, 0, "", "not a readable Parquet file: %v", err)
	}
	t, err = newParquetTable(path, r.MetaData().Schema, r.NumRows())
	if err != nil {
		return nil, err
	}
	rows := 0
	for g := range r.NumRowGroups() {
		rg := r.RowGroup(g)
		if err := t.readRowGroup(rg); err != nil {
			return nil, err
		}
		rows += int(rg.NumRows())
	}
	if rows != t.rows {
		return nil, inputErr(path, 0, "", "not a readable Parquet file: its row groups hold %d rows, its footer says %d", rows, t.rows)
	}
	return t, nil
}

// newParquetTable returns a Table without cells for a Parquet file of rows
// rows and schema sc: one column per top-level field, with cells of the
// kind the field's type calls for. It returns an *InputError when there are
// no rows, or a field's name is taken or its type is not a number or text.
func newParquetTable(path string, sc *schema.Schema, rows int64) (*Table, error) {
	switch {
	case rows < 0:
		return nil, inputErr(path, 0, "", "not a readable Parquet file: its footer gives %d rows", rows)
	case rows == 0:
		return nil, inputErr(path, 0, "", "the table has no data rows")
	}
	root := sc.Root()
	t := &Table{File: path, rows: int(rows), index: make(map[string]int, root.NumFields())}
	t.cols = make([]column, root.NumFields())
	for c := range t.cols {
		fld := root.Field(c)
		name := fld.Name()
		if _, dup := t.index[name]; dup {
			return nil, inputErr(path, 0, name, "appears twice in the schema")
		}
		t.index[name] = c
		t.Names = append(t.Names, name)
		if !t.cols[c].init(fld, t.rows) {
			return nil, inputErr(path, 0, name, "has Parquet type %s; want a number or text", describeParquet(fld))
		}
	}
	return t, nil
}

// init makes col the column for the Parquet field n, with room for rows
// cells (at most maxReserve: the count comes from the file's footer, which
// a damaged file may get wrong by any amount; beyond it the columns grow as
// rows are read), and reports whether n is a column of numbers or text: a required
// or optional (not repeated) leaf that is an integer (INT32 or INT64 without
// a logical type or with an Int one), a FLOAT or DOUBLE, or a BYTE_ARRAY
// annotated as a String.
func (col *column) init(n schema.Node, rows int) bool {
	rows = min(rows, maxReserve)
	p, ok := n.(*schema.PrimitiveNode)
	if !ok || n.RepetitionType() == parquet.Repetitions.Repeated {
		return false
	}
	lt := p.LogicalType()
	intType, isInt := lt.(*schema.IntLogicalType)
	switch p.PhysicalType() {
	case parquet.Types.ByteArray:
		if _, ok := lt.(schema.StringLogicalType); !ok {
			return false
		}
		col.text = make([]string, 0, rows)
	case parquet.Types.Float, parquet.Types.Double:
		col.num = make([]float64, 0, rows)
	case parquet.Types.Int32, parquet.Types.Int64:
		if !lt.IsNone() && !isInt {
			return false
		}
		col.ints = make([]int64, 0, rows)
		col.unsigned = isInt && !intType.IsSigned() && p.PhysicalType() == parquet.Types.Int64
	default:
		return false
	}
	return true
}

// describeParquet names the Parquet type of the field n for an error
// message: its physical type, or "group", with its logical type if any, as
// in "INT64 (Timestamp)" or "repeated DOUBLE".
func describeParquet(n schema.Node) string {
	var b strings.Builder
	if n.RepetitionType() == parquet.Repetitions.Repeated {
		b.WriteString("repeated ")
	}
	if p, ok := n.(*schema.PrimitiveNode); ok {
		b.WriteString(p.PhysicalType().String())
	} else {
		b.WriteString("group")
	}
	if lt := n.LogicalType(); lt != nil && !lt.IsNone() {
		name, _, _ := strings.Cut(lt.String(), "(")
		fmt.Fprintf(&b, " (%s)", name)
	}
	return b.String()
}

// readRowGroup appends the cells of the row group rg to the table's columns.
func (t *Table) readRowGroup(rg *file.RowGroupReader) error {
	for c := range t.cols {
		cr, err := rg.Column(c)
		if err == nil {
			err = t.cols[c].readChunk(cr, rg.NumRows())
		}
		if err != nil {
			return inputErr(t.File, 0, t.Names[c], "not a readable Parquet file: %v", err)
		}
	}
	return nil
}

// readChunk appends the rows cells of the column chunk read by cr to col,
// converting them as init chose: text copied out of the reader's buffers,
// FLOAT and DOUBLE to float64, integers to int64 (an unsigned INT32 by its
// value, an unsigned INT64 by its bits).
func (col *column) readChunk(cr file.ColumnChunkReader, rows int64) error {
	descr := cr.Descriptor()
	maxDef := descr.MaxDefinitionLevel()
	switch r := cr.(type) {
	case *file.ByteArrayColumnChunkReader:
		return readBatches(r, rows, maxDef, col.addText, col.appendNull)
	case *file.Float64ColumnChunkReader:
		return readBatches(r, rows, maxDef, col.addFloat, col.appendNull)
	case *file.Float32ColumnChunkReader:
		return readBatches(r, rows, maxDef, func(v float32) { col.addFloat(float64(v)) }, col.appendNull)
	case *file.Int32ColumnChunkReader:
		if lt, ok := descr.LogicalType().(*schema.IntLogicalType); ok && !lt.IsSigned() {
			return readBatches(r, rows, maxDef, func(v int32) { col.addInt(int64(uint32(v))) }, col.appendNull)
		}
		return readBatches(r, rows, maxDef, func(v int32) { col.addInt(int64(v)) }, col.appendNull)
	case *file.Int64ColumnChunkReader:
		return readBatches(r, rows, maxDef, col.addInt, col.appendNull)
	}
	return fmt.Errorf("column chunk of Parquet type %s", cr.Type())
}

// batchReader is the part of a typed column chunk reader of package
// parquet/file, such as *file.Float64ColumnChunkReader, that readBatches
// uses.
type batchReader[T any] interface {
	ReadBatch(batchSize int64, values []T, defLvls, repLvls []int16) (total int64, valuesRead int, err error)
	Err() error
}

// readBatches reads rows values from r, batchRows at a time, and passes
// each to add, calling null instead for each null (a definition level below
// maxDef, which is 0 for a required column and 1 for an optional one).
func readBatches[T any](r batchReader[T], rows int64, maxDef int16, add func(T), null func()) error {
	vals := make([]T, min(rows, batchRows))
	var defs []int16
	if maxDef > 0 {
		defs = make([]int16, len(vals))
	}
	for rows > 0 {
		n, nv, err := r.ReadBatch(min(rows, batchRows), vals, defs, nil)
		if err == nil && n == 0 {
			if err = r.Err(); err == nil {
				err = errors.New("a column chunk holds fewer values than its row group has rows")
			}
		}
		if err != nil {
			return err
		}
		v := 0 // ReadBatch packs the values that are not null at the front
		for i := range n {
			if defs != nil && defs[i] < maxDef {
				null()
				continue
			}
			add(vals[v])
			v++
		}
		if v != nv {
			return fmt.Errorf("%d values are defined but %d were decoded", v, nv)
		}
		rows -= n
	}
	return nil
}

// addText appends b as a text cell. It copies b, which points into a page
// buffer that belongs to the reader and its allocator.
func (c *column) addText(b parquet.ByteArray) { c.text = append(c.text, string(b)) }

// addFloat appends a floating-point cell.
func (c *column) addFloat(v float64) { c.num = append(c.num, v) }

// addInt appends an integer cell that is not null.
func (c *column) addInt(v int64) {
	c.ints = append(c.ints, v)
	if c.null != nil {
		c.null = append(c.null, false)
	}
}

// appendNull appends a null: "" for text, NaN for floating point, 0 marked
// in the null mask for integers (the mask is made at the first null).
func (c *column) appendNull() {
	switch {
	case c.text != nil:
		c.text = append(c.text, "")
	case c.num != nil:
		c.num = append(c.num, math.NaN())
	default:
		if c.null == nil {
			c.null = make([]bool, len(c.ints), cap(c.ints))
		}
		c.ints = append(c.ints, 0)
	}
	if c.null != nil {
		c.null = append(c.null, true)
	}
}

// writeParquet writes f as a Snappy-compressed Parquet file in row groups of
// at most rowGroupRows rows: a text column as a required BYTE_ARRAY String,
// a number column as an optional DOUBLE whose NaNs are nulls.
func (f *Frame) writeParquet(w io.Writer) error {
	sc, err := f.parquetSchema()
	if err != nil {
		return err
	}
	props := parquet.NewWriterProperties(parquet.WithCompression(compress.Codecs.Snappy))
	pw := file.NewParquetWriter(w, sc, file.WithWriterProps(props))
	n := f.rows()
	for lo := 0; lo < n; lo += rowGroupRows {
		if err := f.writeRowGroup(pw.AppendRowGroup(), lo, min(lo+rowGroupRows, n)); err != nil {
			return err
		}
	}
	return pw.Close()
}

// parquetSchema returns the Parquet schema of f, or an error for a column
// that is neither []string nor []float64 or whose length is not that of the
// first column.
func (f *Frame) parquetSchema() (*schema.GroupNode, error) {
	n := f.rows()
	fields := make(schema.FieldList, len(f.Cols))
	for c, col := range f.Cols {
		var (
			node schema.Node
			rows int
			err  error
		)
		switch v := col.(type) {
		case []string:
			rows = len(v)
			node, err = schema.NewPrimitiveNodeLogical(f.Names[c], parquet.Repetitions.Required, schema.StringLogicalType{}, parquet.Types.ByteArray, -1, -1)
		case []float64:
			rows = len(v)
			node, err = schema.NewPrimitiveNodeLogical(f.Names[c], parquet.Repetitions.Optional, nil, parquet.Types.Double, -1, -1)
		default:
			return nil, fmt.Errorf("column %q: unsupported type %T", f.Names[c], col)
		}
		if err == nil && rows != n {
			err = fmt.Errorf("%d rows where the first column has %d", rows, n)
		}
		if err != nil {
			return nil, fmt.Errorf("column %q: %w", f.Names[c], err)
		}
		fields[c] = node
	}
	return schema.NewGroupNode("schema", parquet.Repetitions.Required, fields, -1)
}

// writeRowGroup writes rows lo to hi-1 of f as the row group rg.
func (f *Frame) writeRowGroup(rg file.SerialRowGroupWriter, lo, hi int) error {
	for c, col := range f.Cols {
		cw, err := rg.NextColumn()
		if err == nil {
			switch v := col.(type) {
			case []string:
				err = writeStrings(cw.(*file.ByteArrayColumnChunkWriter), v[lo:hi])
			case []float64:
				err = writeFloats(cw.(*file.Float64ColumnChunkWriter), v[lo:hi])
			}
		}
		if err == nil {
			err = cw.Close()
		}
		if err != nil {
			return fmt.Errorf("column %q: %w", f.Names[c], err)
		}
	}
	return rg.Close()
}

// writeStrings writes v to a required BYTE_ARRAY column, batchRows values at
// a time.
func writeStrings(w *file.ByteArrayColumnChunkWriter, v []string) error {
	vals := make([]parquet.ByteArray, min(len(v), batchRows))
	for lo := 0; lo < len(v); lo += batchRows {
		batch := v[lo:min(lo+batchRows, len(v))]
		for i, s := range batch {
			vals[i] = parquet.ByteArray(s)
		}
		if _, err := w.WriteBatch(vals[:len(batch)], nil, nil); err != nil {
			return err
		}
	}
	return nil
}

// writeFloats writes v to an optional DOUBLE column, batchRows values at a
// time, a NaN as a null (definition level 0) and any other value as itself
// (definition level 1).
func writeFloats(w *file.Float64ColumnChunkWriter, v []float64) error {
	defs := make([]int16, min(len(v), batchRows))
	vals := make([]float64, 0, len(defs))
	for lo := 0; lo < len(v); lo += batchRows {
		batch := v[lo:min(lo+batchRows, len(v))]
		vals = vals[:0]
		for i, x := range batch {
			defs[i] = 0
			if !math.IsNaN(x) {
				defs[i] = 1
				vals = append(vals, x)
			}
		}
		if _, err := w.WriteBatch(vals, defs[:len(batch)], nil); err != nil {
			return err
		}
	}
	return nil
}
