package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestOutputsCheckedFirst: estimate, check and elasticities check every
// output path and table format before they work. An unknown table format
// is a usage error (exit 2), a path that cannot be written an input error
// (exit 1); either way nothing is printed to stdout and nothing written.
func TestOutputsCheckedFirst(t *testing.T) {
	bin := sharedBinary(t)
	dir := demoCopy(t)
	mustRun(t, bin, dir, 0, "estimate", "spec.toml", "--out", "results.json", "--quiet")
	writeFile(t, filepath.Join(dir, "blocker"), "a file where a folder would go\n")
	tests := []struct {
		name string
		code int
		args []string
		want []string
	}{
		{"estimate: unknown table format", 2, []string{"estimate", "spec.toml", "--out", "new.json", "--products-out", "rows.txt"}, []string{"--products-out", "rows.txt", ".csv or .parquet"}},
		{"estimate: --out folder cannot be made", 1, []string{"estimate", "spec.toml", "--out", "blocker/new.json"}, []string{"blocker/new.json", "blocker is a file"}},
		{"estimate: --latex folder cannot be made", 1, []string{"estimate", "spec.toml", "--out", "new3.json", "--latex", "blocker/t/t.tex"}, []string{"blocker/t/t.tex", "is a file"}},
		{"estimate: --products-out folder cannot be made", 1, []string{"estimate", "spec.toml", "--out", "new4.json", "--products-out", "blocker/rows.csv"}, []string{"blocker/rows.csv"}},
		{"check: output over an input", 1, []string{"check", "spec.toml", "--instruments-out", "products.csv"}, []string{"products.csv", "over an input"}},
		{"check: unknown table format", 2, []string{"check", "spec.toml", "--instruments-out", "z.xlsx"}, []string{"--instruments-out", "z.xlsx"}},
		{"elasticities: unknown table format", 2, []string{"elasticities", "results.json", "--out", "e.txt"}, []string{"--out", "e.txt"}},
		{"elasticities: folder cannot be made", 1, []string{"elasticities", "results.json", "--out", "blocker/e.csv"}, []string{"blocker/e.csv", "is a file"}},
		{"elasticities: output over an input", 1, []string{"elasticities", "results.json", "--out", "agents.csv"}, []string{"agents.csv", "over an input"}},
		{"merger: folder cannot be made", 1, []string{"merger", "results.json", "--combine", "Harbor Roast,Lumen Beverages", "--out", "blocker/m.json"}, []string{"blocker/m.json", "is a file"}},
		{"merger: output over an input", 1, []string{"merger", "results.json", "--combine", "Harbor Roast,Lumen Beverages", "--out", "results.json"}, []string{"results.json", "over an input"}},
		{"report: folder cannot be made", 1, []string{"report", "results.json", "--out", "blocker/r.html"}, []string{"blocker/r.html", "is a file"}},
		{"study: folder cannot be made", 1, []string{"study", "results.json", "--replications", "2", "--out", "blocker/s.json"}, []string{"blocker/s.json", "is a file"}},
		{"screen: output over an input", 1, []string{"screen", "spec.toml", "--combine", "Harbor Roast,Lumen Beverages", "--out", "spec.toml"}, []string{"spec.toml", "over an input"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			before := listing(t, dir)
			out, errs := mustRun(t, bin, dir, tc.code, tc.args...)
			if out != "" {
				t.Errorf("stdout before refusing:\n%s", out)
			}
			for _, w := range tc.want {
				if !strings.Contains(errs, w) {
					t.Errorf("stderr %q lacks %q", errs, w)
				}
			}
			if after := listing(t, dir); after != before {
				t.Errorf("files changed:\nbefore %s\nafter  %s", before, after)
			}
		})
	}
}

// listing names the files under dir with their sizes.
func listing(t *testing.T, dir string) string {
	t.Helper()
	var b strings.Builder
	filepath.Walk(dir, func(p string, info os.FileInfo, err error) error {
		if err == nil {
			fmt.Fprintf(&b, "%s:%d ", strings.TrimPrefix(p, dir), info.Size())
		}
		return nil
	})
	return b.String()
}
