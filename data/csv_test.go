package data

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// sameAsQuoted checks that parseCSV, which splits a plain file only into
// lines, reads raw exactly as encoding/csv does: the same error, or the same
// header, rows, lines and cells.
func sameAsQuoted(t *testing.T, raw string) {
	t.Helper()
	body := strings.TrimPrefix(raw, "\ufeff")
	if strings.TrimSpace(body) == "" || checkEncoding("f.csv", body) != nil {
		return // refused as empty, or as not UTF-8, before either reader runs
	}
	got, gerr := parseCSV("f.csv", raw)
	want, werr := parseQuoted("f.csv", body)
	if fmt.Sprint(gerr) != fmt.Sprint(werr) {
		t.Fatalf("%q: error %v, encoding/csv %v", raw, gerr, werr)
	}
	if gerr != nil {
		return
	}
	if strings.Join(got.Names, "|") != strings.Join(want.Names, "|") || got.Len() != want.Len() {
		t.Fatalf("%q: header %q with %d rows, encoding/csv %q with %d", raw, got.Names, got.Len(), want.Names, want.Len())
	}
	for i := range got.Len() {
		if got.Line(i) != want.Line(i) {
			t.Fatalf("%q: row %d on line %d, encoding/csv %d", raw, i, got.Line(i), want.Line(i))
		}
		for c := range got.cols {
			if g, w := got.text(&got.cols[c], i), want.text(&want.cols[c], i); g != w {
				t.Fatalf("%q: cell (%d, %d) %q, encoding/csv %q", raw, i, c, g, w)
			}
		}
	}
}

// wide returns a CSV file of c columns and three rows, the last with extra
// fields more (or fewer, when negative), and cells of varied width.
func wide(c, extra int) string {
	var b strings.Builder
	for r := range 4 {
		n := c
		if r == 3 {
			n += extra
		}
		for k := range n {
			if k > 0 {
				b.WriteByte(',')
			}
			if r == 0 {
				fmt.Fprintf(&b, "c%d", k)
			} else {
				b.WriteString(strings.Repeat("7", (r*k)%5) + fmt.Sprint(k))
			}
		}
		b.WriteString("\r\n")
	}
	return b.String()
}

// TestPlainCSVAsEncodingCSV: the files the plain reader takes (no quotes,
// no blank lines, no ragged rows) and those it hands on read the same as
// with encoding/csv alone.
func TestPlainCSVAsEncodingCSV(t *testing.T) {
	for _, raw := range []string{
		"a,b\n1,2\n",
		"a,b\n1,2",
		"a,b\r\n1,2\r\n3,4",
		"a,b\r\n1,2\r",
		"\ufeffa, b \n 1 ,2\n",
		"a,b\n1,2\n\n3,4\n",                                           // blank line: encoding/csv
		"a,b\n1,2,3\n",                                                // too many fields
		"a,b\n1\n",                                                    // too few
		"a,b\n\"1\",2\n",                                              // quoted
		"a,b\n1\"x,2\n",                                               // bare quote
		"a\n1\n2\n",                                                   // one column
		"a;b\n1;2\n",                                                  // wrong separator
		"a,a\n1,2\n",                                                  // duplicate
		"a,\n1,2\n",                                                   // empty header field
		"a,b\n",                                                       // no rows
		"\na,b\n1,2\n",                                                // leading blank line
		"a,b\n1,2\r\r\n",                                              // a carriage return kept in the last field
		"a,b\n,\n",                                                    // empty cells
		"a,b,c\nx\ry,2,3\n",                                           // a lone carriage return inside a field
		wide(20, 0), wide(17, 0), wide(16, 0), wide(9, 0), wide(8, 0), // marks every 8 fields
		wide(20, 1), wide(20, -1), wide(17, -1), wide(9, 1), // a ragged last row
	} {
		sameAsQuoted(t, raw)
	}
	for _, raw := range []string{"a,b\n1,2", "a,b\r\n1,2\r\n", "a\n1\n", "a,b\n,\n", wide(20, 0), wide(9, 0)} {
		if _, _, ok := plainLines(raw); !ok {
			t.Errorf("%q: not read as plain", raw)
		}
	}
}

// TestReadCSVFile: a file on disk reads as its content does, and a folder
// is refused as unreadable.
func TestReadCSVFile(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "t.csv")
	if err := os.WriteFile(path, []byte("m,x\n1,0.5\n2,-1e3\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	tab, err := ReadTable(path)
	if err != nil {
		t.Fatal(err)
	}
	if x, err := tab.Floats("x"); err != nil || x[0] != 0.5 || x[1] != -1e3 {
		t.Fatalf("x = %v, %v", x, err)
	}
	sub := filepath.Join(dir, "d.csv")
	if err := os.Mkdir(sub, 0o755); err != nil {
		t.Fatal(err)
	}
	if _, err := ReadTable(sub); err == nil || !strings.Contains(err.Error(), "cannot read") {
		t.Fatalf("folder: %v", err)
	}
}

// TestParallelFloatsNameFirstRow: a column long enough to be parsed in
// parts reports the first bad row, whichever part finds it.
func TestParallelFloatsNameFirstRow(t *testing.T) {
	var b strings.Builder
	b.WriteString("x\n")
	const n = 1 << 15
	for i := range n {
		switch i {
		case 3, n - 2:
			b.WriteString("bad\n")
		default:
			fmt.Fprintf(&b, "%d.5\n", i)
		}
	}
	tab, err := ParseCSV("long.csv", []byte(b.String()))
	if err != nil {
		t.Fatal(err)
	}
	_, err = tab.Floats("x")
	if err == nil || !strings.Contains(err.Error(), "data row 4 (line 5)") {
		t.Fatalf("error %v, want data row 4", err)
	}
	sel := tab.Select([]int{n - 1, 5})
	x, err := sel.Floats("x")
	if err != nil || x[0] != n-1+0.5 || x[1] != 5.5 {
		t.Fatalf("selected rows %v, %v", x, err)
	}
}

func FuzzPlainCSV(f *testing.F) {
	f.Add([]byte("market,product,share\n1,a,0.2\n1,b,0.3\n"))
	f.Add([]byte("a,b\r\n1,2\r\n"))
	f.Add([]byte("a,b\n1,2\n\n3\n"))
	f.Add([]byte(wide(19, 0)))
	f.Add([]byte(wide(12, 1)))
	f.Fuzz(func(t *testing.T, raw []byte) { sameAsQuoted(t, string(raw)) })
}

// TestParseNumbers: columns parsed ahead read as before; a column with a bad
// cell is left for Floats to report exactly as it would have.
func TestParseNumbers(t *testing.T) {
	raw := []byte("m,x,y,id\n2,0.5,1,007\n1,-1e3,oops,8\n")
	want, _ := ParseCSV("t.csv", raw)
	tab, _ := ParseCSV("t.csv", raw)
	tab.ParseNumbers([]string{"x", "y", "nope"})
	if tab.cols[1].num == nil || tab.cols[2].num != nil {
		t.Fatalf("x parsed %v, y parsed %v: want x only", tab.cols[1].num != nil, tab.cols[2].num != nil)
	}
	tab.ParseNumbers([]string{"x"}) // already numbers: left alone
	sel, wsel := tab.Select([]int{1, 0}), want.Select([]int{1, 0})
	for _, name := range []string{"x", "y"} {
		got, gerr := sel.Floats(name)
		exp, werr := wsel.Floats(name)
		if fmt.Sprint(got, gerr) != fmt.Sprint(exp, werr) {
			t.Errorf("%s: %v %v, want %v %v", name, got, gerr, exp, werr)
		}
	}
	if id, _ := sel.Strings("id"); id[1] != "007" {
		t.Errorf("id %q: a column not named changed", id)
	}
}

// TestParseFloatsPanicOnCaller: a panic in one of the parts (here a column
// shorter than the rows asked for, which no table has) is raised again on
// the caller's goroutine, where the command's recovery reports it, instead
// of ending the process from a goroutine of its own.
func TestParseFloatsPanicOnCaller(t *testing.T) {
	tab := &Table{File: "t.csv", rows: 1 << 15}
	col := &column{text: []string{"1"}}
	defer func() {
		if recover() == nil {
			t.Fatal("no panic on the caller's goroutine")
		}
	}()
	tab.parseFloats(col, "x", make([]float64, 1<<15))
}

// TestNotUTF8: content that is not UTF-8 text is refused with a message
// that says what it probably is and what to do, at the line of the first
// offending byte, instead of being read with its names garbled.
func TestNotUTF8(t *testing.T) {
	utf16 := func(s string, bom bool) string {
		var b []byte
		if bom {
			b = append(b, 0xff, 0xfe)
		}
		for _, c := range []byte(s) {
			b = append(b, c, 0)
		}
		return string(b)
	}
	for _, tc := range []struct{ raw, want string }{
		{utf16("a,b\r\n1,2\r\n", true), "f.csv: the file is UTF-16 text: save it as UTF-8"},
		{utf16("a,b\r\n1,2\r\n", false), "f.csv: line 1: the file has NUL bytes"},
		{"product,price\nHarbor Roast,1\nHarbor Caf\xe9,2\n", "f.csv: line 3: byte 0xE9 is not UTF-8 text (Latin-1 or Windows-1252"},
		{"\"Caf\xe9, Dark\",1\n", "f.csv: line 1: byte 0xE9"},
	} {
		if _, err := ParseCSV("f.csv", []byte(tc.raw)); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%q: %v, want %q", tc.raw, err, tc.want)
		}
	}
	if _, err := ParseCSV("f.csv", []byte("product,price\nHarbor Café,1\n")); err != nil {
		t.Errorf("UTF-8 with an accent: %v", err)
	}
}

// TestDecimalComma: a number written with a decimal comma (quoted, as a
// spreadsheet set to a European locale writes it) is refused with a hint;
// a thousands separator gets no such hint.
func TestDecimalComma(t *testing.T) {
	tab, err := ParseCSV("p.csv", []byte("x,y\n\"1,5\",\"1,000.5\"\n"))
	if err != nil {
		t.Fatal(err)
	}
	if _, err := tab.Floats("x"); err == nil || !strings.Contains(err.Error(), `"1,5" is not a number (a decimal comma? numbers take a decimal point: 1.5)`) {
		t.Errorf("x: %v", err)
	}
	if _, err := tab.Floats("y"); err == nil || strings.Contains(err.Error(), "decimal comma") {
		t.Errorf("y: %v", err)
	}
}
