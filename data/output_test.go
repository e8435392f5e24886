package data

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestCheckOutput: an output that cannot be written is refused before any
// work, and the check itself leaves nothing behind.
func TestCheckOutput(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "products.csv")
	os.WriteFile(file, []byte("x\n"), 0o644)
	tests := []struct {
		name, path string
		want       string // "" for no error
	}{
		{"new file", filepath.Join(dir, "out.json"), ""},
		{"new nested folders", filepath.Join(dir, "a", "b", "out.csv"), ""},
		{"an input", file, "over an input"},
		{"a folder", dir, "is a folder"},
		{"under a file", filepath.Join(file, "out.json"), "is a file"},
		{"deeper under a file", filepath.Join(file, "x", "out.json"), "is a file"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			err := CheckOutput(tc.path, []string{file})
			switch {
			case tc.want == "" && err != nil:
				t.Fatalf("unexpected error %v", err)
			case tc.want != "" && (err == nil || !strings.Contains(err.Error(), tc.want) || !strings.HasPrefix(err.Error(), tc.path+": ")):
				t.Fatalf("error %v, want one naming %s with %q", err, tc.path, tc.want)
			}
		})
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 1 {
		t.Errorf("the check left %d entries in the folder, want only products.csv", len(entries))
	}
}

// TestTableFormat: the format of an output table comes from its extension.
func TestTableFormat(t *testing.T) {
	for path, want := range map[string]string{"a.csv": "csv", "A.CSV": "csv", "b.parquet": "parquet", "c.pq": "parquet", "d.txt": "", "e": ""} {
		got, err := TableFormat(path)
		if got != want || (want == "") != (err != nil) {
			t.Errorf("%s: %q, %v; want %q", path, got, err, want)
		}
	}
}
