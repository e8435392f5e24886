package data

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

var cols = Columns{Market: "market", Product: "product", Firm: "firm", Share: "share", Price: "price"}

const good = "market,product,firm,share,price,x\n1,a,F,0.2,1.5,0.1\n1,b,G,0.3,2.0,0.2\n2,a,F,0.25,1.4,0.3\n"

// TestRejections runs every rejection of the products loader and checks the
// message names the file, row and column. row is the data row (header not
// counted); the line is then row+1 in these files, which have no blank lines
// and no quoted line breaks.
func TestRejections(t *testing.T) {
	tests := []struct {
		name    string
		csv     string
		row     int
		column  string
		message string
	}{
		{"missing column", "market,product,firm,share\n1,a,F,0.2\n", 0, "price", "no such column"},
		{"empty value", "market,product,firm,share,price,x\n1,a,F,0.2,,0.1\n", 1, "price", "empty"},
		{"text in number", "market,product,firm,share,price,x\n1,a,F,0.2,1.5,0.1\n1,b,F,0.2,cheap,0.1\n", 2, "price", "not a number"},
		{"NaN", "market,product,firm,share,price,x\n1,a,F,0.2,1.5,NaN\n", 1, "x", "finite"},
		{"Inf", "market,product,firm,share,price,x\n1,a,F,0.2,Inf,0.1\n", 1, "price", "finite"},
		{"share zero", "market,product,firm,share,price,x\n1,a,F,0,1.5,0.1\n", 1, "share", "not in (0, 1)"},
		{"share negative", "market,product,firm,share,price,x\n1,a,F,-0.1,1.5,0.1\n", 1, "share", "not in (0, 1)"},
		{"share one", "market,product,firm,share,price,x\n1,a,F,1,1.5,0.1\n", 1, "share", "not in (0, 1)"},
		{"inside shares sum to one", "market,product,firm,share,price,x\n1,a,F,0.6,1.5,0.1\n1,b,F,0.4,1.5,0.1\n", 2, "share", "sum to 1"},
		{"duplicate product", "market,product,firm,share,price,x\n1,a,F,0.2,1.5,0.1\n2,a,F,0.2,1.5,0.1\n1,a,G,0.1,1.5,0.1\n", 3, "product", "appears twice"},
		{"zero rows", "market,product,firm,share,price,x\n", 0, "", "no data rows"},
		{"empty file", "", 0, "", "empty"},
		{"truncated line", "market,product,firm,share,price,x\n1,a,F,0.2,1.5,0.1\n1,b,F,0.2\n", 2, "", "wrong number of fields: 4, the header has 6"},
		{"bare quote", "market,product,firm,share,price,x\n1,a,F,0.2,1.5,0.1\n1,b\"c,F,0.2,1.5,0.1\n", 2, "", "malformed CSV: bare \""},
		{"semicolons", "market;product;firm;share;price;x\n1;a;F;0.2;1.5;0.1\n", 0, "", "comma separated"},
		{"duplicate header", "market,product,firm,share,price,price\n1,a,F,0.2,1.5,0.1\n", 0, "price", "twice in the header"},
		{"empty identifier", "market,product,firm,share,price,x\n1,,F,0.2,1.5,0.1\n", 1, "product", "empty identifier"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			tab, err := ParseCSV("products.csv", []byte(tc.csv))
			if err == nil {
				_, err = NewProducts(tab, cols, []string{"x"})
			}
			if err == nil {
				t.Fatal("accepted")
			}
			var ie *InputError
			if !errors.As(err, &ie) {
				t.Fatalf("not an InputError: %v", err)
			}
			msg := err.Error()
			if ie.File != "products.csv" || ie.Row != tc.row || ie.Column != tc.column || !strings.Contains(msg, tc.message) {
				t.Fatalf("got %q (row %d, column %q), want row %d, column %q, text %q", msg, ie.Row, ie.Column, tc.row, tc.column, tc.message)
			}
			if tc.row > 0 {
				where := fmt.Sprintf("products.csv: data row %d (line %d)", tc.row, tc.row+1)
				if ie.Line != tc.row+1 || !strings.HasPrefix(msg, where) {
					t.Fatalf("got %q (line %d), want it to start %q", msg, ie.Line, where)
				}
			}
		})
	}
}

func TestGroupingAndBOM(t *testing.T) {
	raw := "\xef\xbb\xbf" + "market,product,firm,share,price\n2,a,F,0.2,1\n1,a,F,0.1,1\n2,b,G,0.3,1\n"
	tab, err := ParseCSV("p.csv", []byte(raw))
	if err != nil {
		t.Fatal(err)
	}
	p, err := NewProducts(tab, cols, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(p.Markets) != 2 || p.Markets[0].ID != "2" || p.Markets[0].Len() != 2 || p.Product[1] != "b" || p.Row(1) != 3 || p.Row(2) != 2 {
		t.Fatalf("markets %+v products %v", p.Markets, p.Product)
	}
	if s0 := p.OutsideShare(p.Markets[0]); s0 < 0.49999 || s0 > 0.50001 {
		t.Fatalf("outside share %v", s0)
	}
}

func TestParquetRoundTripAndAtomicWrite(t *testing.T) {
	dir := t.TempDir()
	tab, err := ParseCSV("p.csv", []byte(good))
	if err != nil {
		t.Fatal(err)
	}
	p, err := NewProducts(tab, cols, []string{"x"})
	if err != nil {
		t.Fatal(err)
	}
	x, _ := p.Floats("x")
	var f Frame
	f.Add("market", p.Market)
	f.Add("product", p.Product)
	f.Add("firm", p.Firm)
	f.Add("share", p.Share)
	f.Add("price", p.Price)
	f.Add("x", x)
	path := filepath.Join(dir, "p.parquet")
	if err := WriteFrame(path, nil, &f); err != nil {
		t.Fatal(err)
	}
	q, err := LoadProducts(path, cols, []string{"x"})
	if err != nil {
		t.Fatal(err)
	}
	if q.Len() != 3 || q.Share[1] != 0.3 || q.Product[2] != "a" {
		t.Fatalf("round trip: %+v", q.Share)
	}
	// A wrongly typed Parquet column is named.
	var bad Frame
	bad.Add("market", p.Market)
	bad.Add("product", p.Product)
	bad.Add("firm", p.Firm)
	bad.Add("share", []string{"lots", "0.3", "0.2"})
	bad.Add("price", p.Price)
	bp := filepath.Join(dir, "bad.parquet")
	WriteFrame(bp, nil, &bad)
	if _, err := LoadProducts(bp, cols, nil); err == nil || !strings.Contains(err.Error(), `column "share"`) {
		t.Fatalf("want an error on column share, got %v", err)
	}
	// Writing over an input is refused and leaves it untouched; no temporaries remain.
	before, _ := os.ReadFile(path)
	if err := WriteFrame(path, []string{path}, &f); err == nil {
		t.Fatal("overwrote an input")
	}
	after, _ := os.ReadFile(path)
	if string(before) != string(after) {
		t.Fatal("input changed")
	}
	out := filepath.Join(dir, "out.json")
	os.WriteFile(out, []byte("old"), 0o644)
	if err := WriteAtomic(out, nil, func(w io.Writer) error {
		w.Write([]byte("partial"))
		return errors.New("boom")
	}); err == nil {
		t.Fatal("error lost")
	}
	if b, _ := os.ReadFile(out); string(b) != "old" {
		t.Fatalf("existing output changed to %q", b)
	}
	entries, _ := os.ReadDir(dir)
	for _, e := range entries {
		if strings.Contains(e.Name(), ".tmp-") {
			t.Fatalf("temporary %s left behind", e.Name())
		}
	}
}

// TestRowWording: data rows are counted from 1 without the header; for CSV
// the message adds the line where the row starts, which is not row+1 once a
// blank line or a quoted line break intervenes, nor after regrouping.
func TestRowWording(t *testing.T) {
	tests := []struct {
		name, csv, want string
	}{
		{"plain", "market,product,firm,share,price\n1,a,F,0.2,1\n1,b,F,x,1\n",
			`p.csv: data row 2 (line 3), column "share": "x" is not a number`},
		{"after a blank line", "market,product,firm,share,price\n1,a,F,0.2,1\n\n1,b,F,x,1\n",
			`p.csv: data row 2 (line 4), column "share": "x" is not a number`},
		{"after a quoted line break", "market,product,firm,share,price\n1,\"a\nb\",F,0.2,1\n1,b,F,x,1\n",
			`p.csv: data row 2 (line 4), column "share": "x" is not a number`},
		{"regrouped by market", "market,product,firm,share,price\n1,a,F,0.2,1\n2,a,F,0.2,1\n\n1,a,G,0.1,1\n",
			`p.csv: data row 3 (line 5), column "product": product "a" appears twice in market "1"`},
		{"truncated after a blank line", "market,product,firm,share,price\n\n1,a,F\n",
			"p.csv: data row 1 (line 3): wrong number of fields: 3, the header has 5 (truncated or misaligned)"},
		{"malformed header", "market,\"product\n",
			`p.csv: line 1: malformed CSV: extraneous or missing " in quoted-field`},
		{"malformed quoted field spanning lines", "market,product,firm,share,price\n1,\"a\nb\"c,F,0.2,1\n",
			`p.csv: data row 1 (line 2): malformed CSV on line 3: extraneous or missing " in quoted-field`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			tab, err := ParseCSV("p.csv", []byte(tc.csv))
			if err == nil {
				_, err = NewProducts(tab, cols, nil)
			}
			if err == nil || err.Error() != tc.want {
				t.Fatalf("got  %v\nwant %s", err, tc.want)
			}
		})
	}

	// Parquet has no header and no lines: data row N, counted from 1.
	var f Frame
	f.Add("market", []string{"1", "1"})
	f.Add("product", []string{"a", "b"})
	f.Add("share", []float64{0.2, 1.5})
	f.Add("price", []float64{1, 1})
	path := filepath.Join(t.TempDir(), "p.parquet")
	if err := WriteFrame(path, nil, &f); err != nil {
		t.Fatal(err)
	}
	_, err := LoadProducts(path, cols, nil)
	var ie *InputError
	if !errors.As(err, &ie) || ie.Line != 0 || err.Error() != path+`: data row 2, column "share": 1.5 is not in (0, 1)` {
		t.Fatalf("parquet: %v", err)
	}

	// An error built outside the package with only Row set still says "data row".
	if got := (&InputError{File: "d.csv", Row: 4, Column: "diversion", Msg: "2 is not in [0, 1]"}).Error(); got != `d.csv: data row 4, column "diversion": 2 is not in [0, 1]` {
		t.Fatalf("got %q", got)
	}
}

// BenchmarkReadAgents parses and types an agents table of 100 markets × 300
// agents with three numeric columns, the size of the medium estimation's.
func BenchmarkReadAgents(b *testing.B) {
	var buf bytes.Buffer
	buf.WriteString("market,weight,nu_price,nu_x1,income\n")
	for t := 0; t < 100; t++ {
		for i := 0; i < 300; i++ {
			fmt.Fprintf(&buf, "%d,%v,%v,%v,%v\n", t, 1.0/300, math.Sin(float64(t*300+i)), math.Cos(float64(t*300+i)), 0.5+float64(i)/600)
		}
	}
	raw := buf.Bytes()
	b.SetBytes(int64(len(raw)))
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		tab, err := ParseCSV("agents.csv", raw)
		if err != nil {
			b.Fatal(err)
		}
		for _, c := range []string{"weight", "nu_price", "nu_x1", "income"} {
			if _, err := tab.Floats(c); err != nil {
				b.Fatal(err)
			}
		}
	}
}
