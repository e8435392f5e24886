package data

import (
	"maps"
	"slices"
)

// Select returns a new table whose row i is the current row rows[i] of t
// (rows may repeat, for resampling). Error messages about a selected row
// still name its row in the file.
func (t *Table) Select(rows []int) *Table {
	out := t.derived()
	out.rows = len(rows)
	out.permute(rows)
	return out
}

// WithFloats returns a copy of t in which each named column holds the given
// numbers (one per row), added when t has no such column. The other columns
// are shared with t, which is left unchanged.
func (t *Table) WithFloats(cols map[string][]float64) *Table {
	out := t.derived()
	for _, name := range slices.Sorted(maps.Keys(cols)) {
		v := cols[name]
		out.setColumn(name, column{num: append([]float64(nil), v...)})
	}
	return out
}

// WithStrings is WithFloats for text columns (identifiers).
func (t *Table) WithStrings(cols map[string][]string) *Table {
	out := t.derived()
	for _, name := range slices.Sorted(maps.Keys(cols)) {
		out.setColumn(name, column{text: append([]string(nil), cols[name]...)})
	}
	return out
}

// derived is shallow for a table whose content will differ from the file's
// (rows selected, columns replaced): it has no Source.
func (t *Table) derived() *Table {
	out := t.shallow()
	out.source = nil
	return out
}

// shallow copies the table's header, index and column headers; the cells
// are shared until a column is replaced. A reordered copy (NewProducts,
// NewAgents) holds the file's content still, and keeps its Source.
func (t *Table) shallow() *Table {
	out := *t
	out.Names = append([]string(nil), t.Names...)
	out.index = maps.Clone(t.index)
	out.cols = append([]column(nil), t.cols...)
	return &out
}

func (t *Table) setColumn(name string, c column) {
	if k, ok := t.index[name]; ok {
		t.cols[k] = c
		return
	}
	t.index[name] = len(t.Names)
	t.Names = append(t.Names, name)
	t.cols = append(t.cols, c)
}
