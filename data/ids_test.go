package data

import (
	"errors"
	"os"
	"path/filepath"
	"testing"

	"github.com/apache/arrow/go/v15/arrow"
	"github.com/apache/arrow/go/v15/arrow/array"
	"github.com/apache/arrow/go/v15/arrow/memory"
	"github.com/apache/arrow/go/v15/parquet"
	"github.com/apache/arrow/go/v15/parquet/pqarrow"
)

// TestNumericParquetIdentifiers: a Parquet agents table whose market column
// is numeric must match a CSV products table whose market column holds the
// same integers written out in full.
func TestNumericParquetIdentifiers(t *testing.T) {
	dir := t.TempDir()
	prodPath := filepath.Join(dir, "products.csv")
	prodCSV := "market,product,firm,share,price\n1234567,a,F,0.2,1\n1234567,b,G,0.3,2\n7,a,F,0.1,1\n"
	if err := os.WriteFile(prodPath, []byte(prodCSV), 0o644); err != nil {
		t.Fatal(err)
	}
	p, err := LoadProducts(prodPath, cols, nil)
	if err != nil {
		t.Fatal(err)
	}

	var ag Frame
	ag.Add("market", []float64{1234567, 7, 1234567, 7})
	ag.Add("weight", []float64{0.5, 0.5, 0.5, 0.5})
	ag.Add("nu", []float64{-1, -1, 1, 1})
	agPath := filepath.Join(dir, "agents.parquet")
	if err := WriteFrame(agPath, nil, &ag); err != nil {
		t.Fatal(err)
	}
	at, err := ReadTable(agPath)
	if err != nil {
		t.Fatal(err)
	}
	a, err := NewAgents(at, "market", "weight", []string{"nu"}, p)
	if err != nil {
		t.Fatal(err)
	}
	if ids, _ := a.Strings("market"); ids[0] != "1234567" || ids[2] != "7" {
		t.Fatalf("agent market ids %q, want 1234567 and 7", ids)
	}
	if a.Markets[0].ID != "1234567" || a.Markets[0].Len() != 2 {
		t.Fatalf("agent markets %+v", a.Markets)
	}

	// A Parquet products table with numeric ids reads them as integers too.
	var pf Frame
	pf.Add("market", []float64{1234567, 1234567})
	pf.Add("product", []float64{1, 2})
	pf.Add("share", []float64{0.2, 0.3})
	pf.Add("price", []float64{1, 2})
	pp := filepath.Join(dir, "products.parquet")
	if err := WriteFrame(pp, nil, &pf); err != nil {
		t.Fatal(err)
	}
	q, err := LoadProducts(pp, cols, nil)
	if err != nil {
		t.Fatal(err)
	}
	if q.Market[0] != "1234567" || q.Product[1] != "2" {
		t.Fatalf("parquet ids %q %q", q.Market, q.Product)
	}
}

// TestFloatIdentifierFormat: integral values print as integers, the rest in
// the shortest form that round-trips (strconv 'g', -1).
func TestFloatIdentifierFormat(t *testing.T) {
	tests := []struct {
		name string
		v    float64
		want string
	}{
		{"integer", 1234567, "1234567"},
		{"zero", 0, "0"},
		{"negative zero", negZero(), "0"},
		{"negative integer", -42, "-42"},
		{"largest exact integer below 2^53", 1<<53 - 1, "9007199254740991"},
		{"2^53 is not exact", 1 << 53, "9.007199254740992e+15"},
		{"fraction", 0.5, "0.5"},
		{"tiny", 1e-300, "1e-300"},
		{"huge", 1e300, "1e+300"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := formatID(tc.v); got != tc.want {
				t.Fatalf("formatID(%v) = %q, want %q", tc.v, got, tc.want)
			}
		})
	}
}

func negZero() float64 { z := 0.0; return -z }

// TestIntegerParquetIdentifiersExact: int64 and uint64 identifiers beyond
// 2^53 keep every digit, and still convert to numbers on request.
func TestIntegerParquetIdentifiersExact(t *testing.T) {
	mem := memory.DefaultAllocator
	ib := array.NewInt64Builder(mem)
	ib.AppendValues([]int64{9007199254740993, -9007199254740993, 12}, nil)
	ub := array.NewUint64Builder(mem)
	ub.AppendValues([]uint64{18446744073709551615, 1, 0}, nil)
	nb := array.NewInt32Builder(mem)
	nb.AppendValues([]int32{1, 0, 3}, []bool{true, false, true})
	arrs := []arrow.Array{ib.NewArray(), ub.NewArray(), nb.NewArray()}
	sc := arrow.NewSchema([]arrow.Field{
		{Name: "big", Type: arrow.PrimitiveTypes.Int64},
		{Name: "ubig", Type: arrow.PrimitiveTypes.Uint64},
		{Name: "gappy", Type: arrow.PrimitiveTypes.Int32, Nullable: true},
	}, nil)
	rec := array.NewRecord(sc, arrs, 3)
	tbl := array.NewTableFromRecords(sc, []arrow.Record{rec})
	path := filepath.Join(t.TempDir(), "ints.parquet")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := pqarrow.WriteTable(tbl, f, 1024, parquet.NewWriterProperties(), pqarrow.DefaultWriterProps()); err != nil {
		t.Fatal(err)
	}
	f.Close()

	tab, err := ReadTable(path)
	if err != nil {
		t.Fatal(err)
	}
	big, err := tab.Strings("big")
	if err != nil || big[0] != "9007199254740993" || big[1] != "-9007199254740993" || big[2] != "12" {
		t.Fatalf("int64 ids %q (%v)", big, err)
	}
	ubig, err := tab.Strings("ubig")
	if err != nil || ubig[0] != "18446744073709551615" || ubig[2] != "0" {
		t.Fatalf("uint64 ids %q (%v)", ubig, err)
	}
	x, err := tab.Floats("ubig")
	if err != nil || x[0] != 18446744073709551615.0 || x[1] != 1 {
		t.Fatalf("uint64 as numbers %v (%v)", x, err)
	}
	// The null is the second data row, after a value and before another.
	for _, get := range []func(string) error{
		func(c string) error { _, err := tab.Strings(c); return err },
		func(c string) error { _, err := tab.Floats(c); return err },
	} {
		var ie *InputError
		if err := get("gappy"); !errors.As(err, &ie) || ie.Row != 2 || ie.Column != "gappy" {
			t.Fatalf("null in row 2: got %v", err)
		}
	}
}
