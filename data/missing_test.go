package data

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestMissingValues: a NaN in an output table is an empty cell in CSV and a
// null in Parquet, and reads back as "not given"; the output's folder is
// created.
func TestMissingValues(t *testing.T) {
	dir := t.TempDir()
	var f Frame
	f.Add("product", []string{"a", "b"})
	f.Add("diversion", []float64{0.25, math.NaN()})
	for _, name := range []string{"sub/t.csv", "sub/t.parquet"} {
		path := filepath.Join(dir, name)
		if err := WriteFrame(path, nil, &f); err != nil {
			t.Fatal(err)
		}
		tab, err := ReadTable(path)
		if err != nil {
			t.Fatal(err)
		}
		got, err := tab.StringsOrEmpty("diversion")
		if err != nil || got[0] != "0.25" || got[1] != "" {
			t.Errorf("%s: %q, %v", name, got, err)
		}
	}
	raw, _ := os.ReadFile(filepath.Join(dir, "sub/t.csv"))
	if string(raw) != "product,diversion\na,0.25\nb,\n" || strings.Contains(strings.ToLower(string(raw)), "nan") {
		t.Errorf("CSV %q", raw)
	}
}
