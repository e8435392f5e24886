package data

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/apache/arrow/go/v15/arrow"
	"github.com/apache/arrow/go/v15/arrow/array"
	"github.com/apache/arrow/go/v15/arrow/memory"
	"github.com/apache/arrow/go/v15/parquet"
	"github.com/apache/arrow/go/v15/parquet/file"
	"github.com/apache/arrow/go/v15/parquet/pqarrow"
)

// arrowColumn is a column for writeArrow: a field and its cells as JSON.
type arrowColumn struct {
	field arrow.Field
	json  string
}

// writeArrow writes cols with Arrow's own Parquet writer, in row groups of at
// most rowGroup rows, and returns the path.
func writeArrow(t *testing.T, name string, rowGroup int64, props *parquet.WriterProperties, cols ...arrowColumn) string {
	t.Helper()
	fields := make([]arrow.Field, len(cols))
	arrs := make([]arrow.Array, len(cols))
	for c, col := range cols {
		arr, _, err := array.FromJSON(memory.DefaultAllocator, col.field.Type, strings.NewReader(col.json), array.WithUseNumber())
		if err != nil {
			t.Fatalf("column %s: %v", col.field.Name, err)
		}
		defer arr.Release()
		fields[c], arrs[c] = col.field, arr
	}
	sc := arrow.NewSchema(fields, nil)
	rows := int64(0)
	if len(arrs) > 0 {
		rows = int64(arrs[0].Len())
	}
	rec := array.NewRecord(sc, arrs, rows)
	defer rec.Release()
	tbl := array.NewTableFromRecords(sc, []arrow.Record{rec})
	defer tbl.Release()
	path := filepath.Join(t.TempDir(), name)
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if props == nil {
		props = parquet.NewWriterProperties()
	}
	// WriteTable closes f.
	if err := pqarrow.WriteTable(tbl, f, rowGroup, props, pqarrow.DefaultWriterProps()); err != nil {
		t.Fatal(err)
	}
	return path
}

// TestParquetWriterReadByArrow: a Frame written by writeParquet, over more
// than one row group, reads back with Arrow's pqarrow as a required string
// column and an optional float64 column whose NaNs are nulls; and with
// ReadTable as the same cells.
func TestParquetWriterReadByArrow(t *testing.T) {
	n := rowGroupRows + batchRows + 3
	ids := make([]string, n)
	xs := make([]float64, n)
	for i := range ids {
		ids[i] = fmt.Sprintf("id%d", i)
		xs[i] = float64(i) / 4
		if i%7 == 3 {
			xs[i] = math.NaN()
		}
	}
	var fr Frame
	fr.Add("id", ids)
	fr.Add("x", xs)
	path := filepath.Join(t.TempDir(), "f.parquet")
	if err := WriteFrame(path, nil, &fr); err != nil {
		t.Fatal(err)
	}

	r, err := file.OpenParquetFile(path, false)
	if err != nil {
		t.Fatal(err)
	}
	if got := r.NumRowGroups(); got != 2 {
		t.Errorf("%d row groups, want 2", got)
	}
	r.Close()

	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	tbl, err := pqarrow.ReadTable(context.Background(), f, parquet.NewReaderProperties(memory.DefaultAllocator), pqarrow.ArrowReadProperties{}, memory.DefaultAllocator)
	if err != nil {
		t.Fatal(err)
	}
	defer tbl.Release()
	if tbl.NumRows() != int64(n) || tbl.NumCols() != 2 {
		t.Fatalf("Arrow reads %d rows of %v, want %d rows of id and x", tbl.NumRows(), tbl.Schema(), n)
	}
	want := []arrow.Field{
		{Name: "id", Type: arrow.BinaryTypes.String},
		{Name: "x", Type: arrow.PrimitiveTypes.Float64, Nullable: true},
	}
	for c, w := range want {
		got := tbl.Schema().Field(c)
		if got.Name != w.Name || !arrow.TypeEqual(got.Type, w.Type) || got.Nullable != w.Nullable {
			t.Fatalf("Arrow reads column %d as %v, want %v", c, got, w)
		}
	}
	row := 0
	for _, chunk := range tbl.Column(0).Data().Chunks() {
		s := chunk.(*array.String)
		for i := range s.Len() {
			if s.IsNull(i) || s.Value(i) != ids[row] {
				t.Fatalf("Arrow reads id %q in row %d, want %q", s.Value(i), row, ids[row])
			}
			row++
		}
	}
	row = 0
	for _, chunk := range tbl.Column(1).Data().Chunks() {
		x := chunk.(*array.Float64)
		for i := range x.Len() {
			if math.IsNaN(xs[row]) != x.IsNull(i) || !x.IsNull(i) && x.Value(i) != xs[row] {
				t.Fatalf("Arrow reads x %v (null %t) in row %d, want %v", x.Value(i), x.IsNull(i), row, xs[row])
			}
			row++
		}
	}

	tab, err := ReadTable(path)
	if err != nil {
		t.Fatal(err)
	}
	gotIDs, err := tab.Strings("id")
	if err != nil {
		t.Fatal(err)
	}
	for i := range ids {
		if gotIDs[i] != ids[i] || math.IsNaN(xs[i]) != math.IsNaN(tab.cols[1].num[i]) ||
			!math.IsNaN(xs[i]) && tab.cols[1].num[i] != xs[i] {
			t.Fatalf("ReadTable reads row %d as %q, %v; want %q, %v", i, gotIDs[i], tab.cols[1].num[i], ids[i], xs[i])
		}
	}
}

// TestParquetNumberTypes: every integer width, signed or not, and FLOAT and
// DOUBLE, written by Arrow in row groups of two rows with nulls, read into
// the cells the Table keeps.
func TestParquetNumberTypes(t *testing.T) {
	intCol := func(name string, typ arrow.DataType, json string) arrowColumn {
		return arrowColumn{arrow.Field{Name: name, Type: typ, Nullable: true}, json}
	}
	path := writeArrow(t, "n.parquet", 2, nil,
		intCol("i8", arrow.PrimitiveTypes.Int8, "[-128, null, 127]"),
		intCol("i16", arrow.PrimitiveTypes.Int16, "[-32768, 1, null]"),
		intCol("i32", arrow.PrimitiveTypes.Int32, "[-2147483648, 2, 2147483647]"),
		intCol("i64", arrow.PrimitiveTypes.Int64, "[-9223372036854775808, null, 9223372036854775807]"),
		intCol("u8", arrow.PrimitiveTypes.Uint8, "[255, 0, null]"),
		intCol("u16", arrow.PrimitiveTypes.Uint16, "[65535, null, 1]"),
		intCol("u32", arrow.PrimitiveTypes.Uint32, "[4294967295, 2147483648, null]"),
		intCol("u64", arrow.PrimitiveTypes.Uint64, "[18446744073709551615, null, 1]"),
		arrowColumn{arrow.Field{Name: "f32", Type: arrow.PrimitiveTypes.Float32, Nullable: true}, "[0.5, null, -2]"},
		arrowColumn{arrow.Field{Name: "f64", Type: arrow.PrimitiveTypes.Float64}, "[0.1, 1e300, -0.25]"},
		arrowColumn{arrow.Field{Name: "s", Type: arrow.BinaryTypes.String, Nullable: true}, `["a", null, "ü"]`},
		arrowColumn{arrow.Field{Name: "ls", Type: arrow.BinaryTypes.LargeString}, `["x", "", "z"]`},
	)
	tab, err := ReadTable(path)
	if err != nil {
		t.Fatal(err)
	}
	if tab.Len() != 3 || strings.Join(tab.Names, ",") != "i8,i16,i32,i64,u8,u16,u32,u64,f32,f64,s,ls" {
		t.Fatalf("%d rows of %v", tab.Len(), tab.Names)
	}
	ints := []struct {
		name     string
		want     []string // "" for a null
		unsigned bool
	}{
		{"i8", []string{"-128", "", "127"}, false},
		{"i16", []string{"-32768", "1", ""}, false},
		{"i32", []string{"-2147483648", "2", "2147483647"}, false},
		{"i64", []string{"-9223372036854775808", "", "9223372036854775807"}, false},
		{"u8", []string{"255", "0", ""}, false},
		{"u16", []string{"65535", "", "1"}, false},
		{"u32", []string{"4294967295", "2147483648", ""}, false},
		{"u64", []string{"18446744073709551615", "", "1"}, true},
	}
	for _, tc := range ints {
		col := &tab.cols[tab.index[tc.name]]
		if col.ints == nil || col.unsigned != tc.unsigned {
			t.Errorf("%s: not read as integers (unsigned %t)", tc.name, tc.unsigned)
			continue
		}
		got, _ := tab.StringsOrEmpty(tc.name)
		if strings.Join(got, ",") != strings.Join(tc.want, ",") {
			t.Errorf("%s: %q, want %q", tc.name, got, tc.want)
		}
		for i, w := range tc.want {
			if col.isNull(i) != (w == "") {
				t.Errorf("%s row %d: null %t, want %t", tc.name, i+1, col.isNull(i), w == "")
			}
		}
	}
	f32 := tab.cols[tab.index["f32"]].num
	if len(f32) != 3 || f32[0] != 0.5 || !math.IsNaN(f32[1]) || f32[2] != -2 {
		t.Errorf("f32: %v, want [0.5 NaN -2]", f32)
	}
	// A null where a number is needed is named as missing, as an empty
	// CSV cell is, not as the NaN that holds its place.
	if _, err := tab.Floats("f32"); err == nil || !strings.Contains(err.Error(), `data row 2, column "f32": missing value (null or NaN)`) {
		t.Errorf("f32 with a null: %v", err)
	}
	if f64, err := tab.Floats("f64"); err != nil || f64[0] != 0.1 || f64[1] != 1e300 || f64[2] != -0.25 {
		t.Errorf("f64: %v (%v)", f64, err)
	}
	if s := tab.cols[tab.index["s"]].text; strings.Join(s, ",") != "a,,ü" {
		t.Errorf("s: %q", s)
	}
	if s := tab.cols[tab.index["ls"]].text; strings.Join(s, ",") != "x,,z" {
		t.Errorf("ls: %q", s)
	}
}

// TestParquetTextAcrossPages: plain-encoded text in many small pages and
// more rows than one batch reads back value for value, in order.
func TestParquetTextAcrossPages(t *testing.T) {
	n := 3*batchRows + 5
	want := make([]string, n)
	quoted := make([]string, n)
	for i := range want {
		want[i] = fmt.Sprintf("product-%06d", i)
		quoted[i] = `"` + want[i] + `"`
	}
	props := parquet.NewWriterProperties(parquet.WithDictionaryDefault(false), parquet.WithDataPageSize(512))
	path := writeArrow(t, "text.parquet", int64(n), props,
		arrowColumn{arrow.Field{Name: "product", Type: arrow.BinaryTypes.String}, "[" + strings.Join(quoted, ",") + "]"})
	tab, err := ReadTable(path)
	if err != nil {
		t.Fatal(err)
	}
	got, err := tab.Strings("product")
	if err != nil {
		t.Fatal(err)
	}
	for i := range want {
		if got[i] != want[i] {
			t.Fatalf("row %d: %q, want %q", i+1, got[i], want[i])
		}
	}
}

// TestParquetRejections: a column that is not a number or text, a name used
// twice, a file without rows and a file that is not Parquet are each one
// *InputError naming the file and, where one applies, the column.
func TestParquetRejections(t *testing.T) {
	ok := arrowColumn{arrow.Field{Name: "ok", Type: arrow.PrimitiveTypes.Float64}, "[1]"}
	tests := []struct {
		name   string
		col    arrowColumn
		column string
		msg    string
	}{
		{"boolean", arrowColumn{arrow.Field{Name: "flag", Type: arrow.FixedWidthTypes.Boolean}, "[true]"},
			"flag", "has Parquet type BOOLEAN; want a number or text"},
		{"bytes", arrowColumn{arrow.Field{Name: "blob", Type: arrow.BinaryTypes.Binary}, `["AAE="]`},
			"blob", "has Parquet type BYTE_ARRAY; want a number or text"},
		{"timestamp", arrowColumn{arrow.Field{Name: "when", Type: arrow.FixedWidthTypes.Timestamp_ms}, `["2024-01-02T03:04:05"]`},
			"when", "has Parquet type INT64 (Timestamp); want a number or text"},
		{"date", arrowColumn{arrow.Field{Name: "day", Type: arrow.FixedWidthTypes.Date32}, `["2024-01-02"]`},
			"day", "has Parquet type INT32 (Date); want a number or text"},
		{"decimal", arrowColumn{arrow.Field{Name: "price", Type: &arrow.Decimal128Type{Precision: 9, Scale: 2}}, `["1.25"]`},
			"price", "has Parquet type FIXED_LEN_BYTE_ARRAY (Decimal); want a number or text"},
		{"list", arrowColumn{arrow.Field{Name: "nu", Type: arrow.ListOf(arrow.PrimitiveTypes.Float64)}, "[[1, 2]]"},
			"nu", "has Parquet type group (List); want a number or text"},
		{"struct", arrowColumn{arrow.Field{Name: "pt", Type: arrow.StructOf(arrow.Field{Name: "x", Type: arrow.PrimitiveTypes.Float64})}, `[{"x": 1}]`},
			"pt", "has Parquet type group; want a number or text"},
		{"name twice", arrowColumn{arrow.Field{Name: "ok", Type: arrow.PrimitiveTypes.Float64}, "[2]"},
			"ok", "appears twice in the schema"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			path := writeArrow(t, "bad.parquet", 1024, nil, ok, tc.col)
			_, err := ReadTable(path)
			var ie *InputError
			if !errors.As(err, &ie) || ie.File != path || ie.Column != tc.column || ie.Msg != tc.msg {
				t.Fatalf("got %v, want an *InputError for column %q: %s", err, tc.column, tc.msg)
			}
		})
	}

	empty := writeArrow(t, "empty.parquet", 1024, nil, arrowColumn{ok.field, "[]"})
	if _, err := ReadTable(empty); err == nil || err.Error() != empty+": the table has no data rows" {
		t.Errorf("no rows: got %v", err)
	}
	notParquet := filepath.Join(t.TempDir(), "csv.parquet")
	if err := os.WriteFile(notParquet, []byte("market,product\n1,a\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := ReadTable(notParquet); err == nil || err.Error() != notParquet+": not a Parquet file: it does not begin with the Parquet mark PAR1 (a CSV or other file named .parquet?)" {
		t.Errorf("not Parquet: got %v", err)
	}
	// The mark at the start but not a Parquet file after it.
	fake := filepath.Join(t.TempDir(), "fake.parquet")
	if err := os.WriteFile(fake, []byte("PAR1 and then nothing of the kind"), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := ReadTable(fake); err == nil || !strings.HasPrefix(err.Error(), fake+": not a readable Parquet file: ") {
		t.Errorf("PAR1 and garbage: got %v", err)
	}
}

// TestParquetCorruptPage: a file whose compressed data is damaged, on which
// the Parquet library panics, is an *InputError, not a crash.
func TestParquetCorruptPage(t *testing.T) {
	xs := make([]float64, 1000)
	for i := range xs {
		xs[i] = math.Sqrt(float64(i))
	}
	var fr Frame
	fr.Add("x", xs)
	path := filepath.Join(t.TempDir(), "c.parquet")
	if err := WriteFrame(path, nil, &fr); err != nil {
		t.Fatal(err)
	}
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	// The data follows the magic "PAR1", a dictionary page header and the
	// start of its Snappy block; overwrite part of the block.
	for i := 40; i < 200; i++ {
		raw[i] = 0xff
	}
	if err := os.WriteFile(path, raw, 0o644); err != nil {
		t.Fatal(err)
	}
	_, err = ReadTable(path)
	var ie *InputError
	if !errors.As(err, &ie) || !strings.Contains(ie.Msg, "not a readable Parquet file") {
		t.Fatalf("got %v, want an *InputError for an unreadable file", err)
	}
}

// TestParquetFooterOverstatesRows: a footer that claims 2^40 rows where the
// row groups hold 777 is an unreadable file, not an attempt to reserve
// terabytes for the columns. The footer is Thrift's compact encoding of
// FileMetaData, where num_rows (field 3, an i64) follows the schema list as
// the byte 0x16 and a zigzag varint: its first occurrence (the row group's
// own num_rows and the column chunk's num_values, encoded alike, follow).
func TestParquetFooterOverstatesRows(t *testing.T) {
	const n = 777
	xs := make([]float64, n)
	var fr Frame
	fr.Add("x", xs)
	path := filepath.Join(t.TempDir(), "f.parquet")
	if err := WriteFrame(path, nil, &fr); err != nil {
		t.Fatal(err)
	}
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	varint := func(v uint64) []byte { return binary.AppendUvarint([]byte{0x16}, v) }
	size := int(binary.LittleEndian.Uint32(raw[len(raw)-8:]))
	meta := raw[len(raw)-8-size : len(raw)-8]
	old := varint(2 * n) // zigzag(777)
	if !bytes.Contains(meta, old) {
		t.Fatalf("num_rows %x not found in the footer", old)
	}
	meta = bytes.Replace(meta, old, varint(2*(1<<40)), 1)
	out := append(slices.Clone(raw[:len(raw)-8-size]), meta...)
	out = binary.LittleEndian.AppendUint32(out, uint32(len(meta)))
	out = append(out, "PAR1"...)
	if err := os.WriteFile(path, out, 0o644); err != nil {
		t.Fatal(err)
	}
	_, err = ReadTable(path)
	if err == nil || !strings.Contains(err.Error(), "its row groups hold 777 rows, its footer says 1099511627776") {
		t.Fatalf("got %v, want the row counts that disagree", err)
	}
}
