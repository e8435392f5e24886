package data

import (
	"crypto/sha256"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strings"
	"unicode/utf8"
)

// readCSV reads a CSV file. The content is read straight into the string
// the cells are taken from, so the file is held in memory once, and through
// SHA-256 on the way: the table's Source is the fingerprint of the bytes it
// was parsed from.
func readCSV(path string) (*Table, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, openErr(path, err)
	}
	defer f.Close()
	var b strings.Builder
	if fi, err := f.Stat(); err == nil && fi.Mode().IsRegular() {
		b.Grow(int(fi.Size()))
	}
	h := sha256.New()
	n, err := io.Copy(io.MultiWriter(&b, h), f)
	if err != nil {
		return nil, openErr(path, err)
	}
	t, err := parseCSV(path, b.String())
	if err != nil {
		return nil, err
	}
	src := sum(h, n)
	t.source = &src
	return t, nil
}

// ParseCSV parses CSV content; name is used in error messages.
func ParseCSV(name string, raw []byte) (*Table, error) {
	return parseCSV(name, string(raw))
}

// parseCSV parses CSV content held in a string. A file without quoting,
// blank lines or ragged rows (what programs write) is only split into lines:
// its cells stay in raw and are found when a column is read. Any other file
// is parsed by encoding/csv, which also reports what is malformed.
func parseCSV(name, raw string) (*Table, error) {
	raw = strings.TrimPrefix(raw, "\ufeff")
	if strings.TrimSpace(raw) == "" {
		return nil, inputErr(name, 0, "", "file is empty")
	}
	if err := checkEncoding(name, raw); err != nil {
		return nil, err
	}
	header, text, ok := plainLines(raw)
	if !ok {
		return parseQuoted(name, raw)
	}
	t, err := newCSVTable(name, header)
	if err != nil {
		return nil, err
	}
	t.rows = len(text.start) - 1
	if t.rows == 0 {
		return nil, errNoRows(name)
	}
	for c := range t.cols {
		t.cols[c] = column{file: text, field: c}
	}
	return t, nil
}

// markEvery is the spacing of the fields whose offsets a plain CSV file
// keeps for each row (see csvText): a cell is then at most markEvery−1
// commas from a known place, however wide the file.
const markEvery = 8

// checkEncoding refuses CSV content that is not UTF-8 text, which would
// otherwise be read with its names garbled: UTF-16 (what a spreadsheet
// saves as "Unicode text"; its mark, or the NUL bytes of its ASCII
// characters), and bytes that are not UTF-8 (Latin-1 or Windows-1252, what
// older spreadsheets save as plain CSV), named by line and byte.
func checkEncoding(name, raw string) error {
	if strings.HasPrefix(raw, "\xff\xfe") || strings.HasPrefix(raw, "\xfe\xff") {
		return inputErr(name, 0, "", "the file is UTF-16 text: save it as UTF-8 (in a spreadsheet, as \"CSV UTF-8\")")
	}
	if i := strings.IndexByte(raw, 0); i >= 0 {
		return &InputError{File: name, Line: 1 + strings.Count(raw[:i], "\n"),
			Msg: "the file has NUL bytes, so it is not UTF-8 text (UTF-16 without its byte-order mark, or not a CSV file): save it as UTF-8"}
	}
	if utf8.ValidString(raw) {
		return nil
	}
	i := 0
	for i < len(raw) {
		r, size := utf8.DecodeRuneInString(raw[i:])
		if r == utf8.RuneError && size == 1 {
			break
		}
		i += size
	}
	return &InputError{File: name, Line: 1 + strings.Count(raw[:i], "\n"),
		Msg: fmt.Sprintf("byte 0x%02X is not UTF-8 text (Latin-1 or Windows-1252, as older spreadsheets save CSV?): save the file as UTF-8", raw[i])}
}

// plainLines splits raw into lines when it is CSV in its plain form: no
// double quote anywhere, no blank line, and every line with as many fields
// as the first. It returns the first line's fields and a csvText; ok is
// false when raw is not plain.
func plainLines(raw string) (header []string, text *csvText, ok bool) {
	if strings.IndexByte(raw, '"') >= 0 {
		return nil, nil, false
	}
	pos := 0
	line := func() string {
		end := strings.IndexByte(raw[pos:], '\n')
		if end < 0 {
			end = len(raw) - pos
		}
		l := raw[pos : pos+end]
		pos += end + 1
		return strings.TrimSuffix(l, "\r")
	}
	first := line()
	if first == "" {
		return nil, nil, false
	}
	header = strings.Split(first, ",")
	commas := len(header) - 1
	rows := strings.Count(raw, "\n") + 1
	x := &csvText{data: raw, start: make([]int, 0, rows), stride: commas / markEvery}
	if x.stride > 0 {
		x.marks = make([]uint32, 0, rows*x.stride)
	}
	for pos < len(raw) {
		x.start = append(x.start, pos)
		l := line()
		if l == "" || len(l) > math.MaxUint32 {
			return nil, nil, false
		}
		if x.stride == 0 {
			if strings.Count(l, ",") != commas {
				return nil, nil, false
			}
			continue
		}
		n := 0
		for off := 0; ; n++ {
			i := strings.IndexByte(l[off:], ',')
			if i < 0 || n == commas {
				if i >= 0 || n < commas {
					return nil, nil, false
				}
				break
			}
			off += i + 1
			if (n+1)%markEvery == 0 {
				x.marks = append(x.marks, uint32(off))
			}
		}
	}
	x.start = append(x.start, pos)
	return header, x, true
}

// csvText is the content of a plain CSV file, split only into lines: data
// row r is data[start[r]:start[r+1]-1] (start has one more entry, one past
// the end of the last line's newline, real or not) with a trailing "\r"
// removed. Its cells are found on request rather than split out; for a
// file wider than markEvery fields, marks holds, stride to a row, where
// fields markEvery, 2·markEvery, … start within their line.
type csvText struct {
	data   string
	start  []int
	marks  []uint32
	stride int
}

// cell returns field c of data row r, both 0-based in file order.
func (x *csvText) cell(r, c int) string {
	line := x.data[x.start[r] : x.start[r+1]-1]
	if m := c / markEvery; m > 0 {
		line = line[x.marks[r*x.stride+m-1]:]
		c -= m * markEvery
	}
	for ; c > 0; c-- {
		line = line[strings.IndexByte(line, ',')+1:]
	}
	if i := strings.IndexByte(line, ','); i >= 0 {
		return line[:i]
	}
	return strings.TrimSuffix(line, "\r")
}

// newCSVTable returns an empty table with the given header, after checking
// that its fields are named, distinct and not one field holding another
// separator.
func newCSVTable(name string, header []string) (*Table, error) {
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
	return t, nil
}

func errNoRows(name string) error {
	return inputErr(name, 0, "", "the table has a header but no data rows")
}

// parseQuoted parses CSV content with encoding/csv: quoted fields, blank
// lines and every kind of malformed record. Its cells are split out into
// strings.
func parseQuoted(name, raw string) (*Table, error) {
	r := csv.NewReader(strings.NewReader(raw))
	r.ReuseRecord = true // the fields are substrings of a string per record, kept by the columns
	header, err := r.Read()
	if err != nil {
		return nil, csvErr(name, 0, nil, nil, err)
	}
	t, err := newCSVTable(name, header)
	if err != nil {
		return nil, err
	}
	rows := strings.Count(raw, "\n")
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
		return nil, errNoRows(name)
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
