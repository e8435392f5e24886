package main

import (
	"encoding/json"
	"path/filepath"
	"strings"
	"testing"
)

// TestMessagesThatHelp (tracker #14, point 10): each message names the
// real problem. The cases run through the built binary; every one exits 1
// with one line on stderr.
func TestMessagesThatHelp(t *testing.T) {
	bin := sharedBinary(t)
	dir := demoCopy(t)
	spec := readFile(t, filepath.Join(dir, "spec.toml"))
	writeFile(t, filepath.Join(dir, "typo.toml"), strings.Replace(spec, `price = "price"`, `price = "unitprice"`, 1))
	writeFile(t, filepath.Join(dir, "nested/rel.toml"), strings.Replace(strings.Replace(spec, `"products.csv"`, `"nested/../products.csv"`, 1), `"agents.csv"`, `"../agents.csv"`, 1))
	// Caffeine fixed per brand: collinear with brand fixed effects.
	rows := strings.Split(strings.TrimRight(readFile(t, filepath.Join(dir, "products.csv")), "\n"), "\n")
	for i := 1; i < len(rows); i++ {
		c := strings.Split(rows[i], ",")
		c[5] = "1." + strings.Repeat("2", len(c[1])%5+1) // the same for every row of a brand
		rows[i] = strings.Join(c, ",")
	}
	writeFile(t, filepath.Join(dir, "sku.csv"), strings.Join(rows, "\n")+"\n")
	fe := "[data]\nproducts = \"sku.csv\"\n[columns]\nmarket = \"city\"\nproduct = \"brand\"\n[demand]\nlinear = [\"price\", \"caffeine\", \"sweetness\"]\nabsorb = [\"brand\"]\n[instruments]\nexcluded = [\"bean_cost\"]\n"
	writeFile(t, filepath.Join(dir, "fe.toml"), fe)
	writeFile(t, filepath.Join(dir, "voodoo.toml"), strings.Replace(fe, "sku.csv", "products.csv", 1)+"[integration]\nrule = \"voodoo\"\n")
	truth := readFile(t, "../../examples/coldbrew/truth.toml")
	writeFile(t, filepath.Join(dir, "truth.toml"), truth)
	tests := []struct {
		name string
		args []string
		want []string
	}{
		{"misspelt price column", []string{"check", "typo.toml"}, []string{"products.csv", `column "unitprice"`, "no such column", "city, brand, firm", "[columns] price"}},
		{"path relative to the working directory", []string{"check", "nested/rel.toml"}, []string{"does not exist", "relative to the spec's folder", `"../products.csv"`}},
		{"spec given as the truth", []string{"synth", "--spec", "spec.toml", "--truth", "spec.toml", "--out", "sim"}, []string{"spec.toml", "spec file", "not a truth file"}},
		{"truth given as the spec", []string{"check", "truth.toml"}, []string{"truth.toml", "truth file", "synth --truth"}},
		{"check: a column the fixed effects absorb", []string{"check", "fe.toml"}, []string{"fe.toml", `"caffeine"`, "collinear with the fixed effects"}},
		{"estimate: the same", []string{"estimate", "fe.toml", "--quiet"}, []string{"fe.toml", `"caffeine"`, "collinear with the fixed effects"}},
		{"unknown rule, unused", []string{"check", "voodoo.toml"}, []string{"voodoo.toml", `"voodoo"`}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, errs := mustRun(t, bin, dir, 1, tc.args...)
			if strings.Count(strings.TrimRight(errs, "\n"), "\n") != 0 {
				t.Errorf("more than one line: %q", errs)
			}
			for _, w := range tc.want {
				if !strings.Contains(errs, w) {
					t.Errorf("stderr %q lacks %q", errs, w)
				}
			}
		})
	}
	// A binary characteristic skipped by the differentiation instruments:
	// a note on stderr (check and estimate) and in the results.
	rows = strings.Split(strings.TrimRight(readFile(t, filepath.Join(dir, "products.csv")), "\n"), "\n")
	rows[0] += ",organic"
	for i := 1; i < len(rows); i++ {
		rows[i] += "," + []string{"0", "1"}[i%2]
	}
	writeFile(t, filepath.Join(dir, "bin.csv"), strings.Join(rows, "\n")+"\n")
	bs := strings.Replace(strings.Replace(spec, `"products.csv"`, `"bin.csv"`, 1), `"sweetness"]`, `"sweetness", "organic"]`, 1)
	bs = strings.Replace(bs, `generate = ["rival-sums", "differentiation-quadratic"]`, `generate = ["differentiation-local"]`, 1)
	writeFile(t, filepath.Join(dir, "bin.toml"), bs)
	for _, args := range [][]string{{"check", "bin.toml"}, {"estimate", "bin.toml", "--out", "bin.json"}} {
		c := args[0]
		_, errs := mustRun(t, bin, dir, 0, args...)
		if !strings.Contains(errs, `"organic" is binary`) {
			t.Errorf("%s: stderr %q has no note on the binary characteristic", c, errs)
		}
	}
	var res struct{ Notes []string }
	json.Unmarshal([]byte(readFile(t, filepath.Join(dir, "bin.json"))), &res)
	if !strings.Contains(strings.Join(res.Notes, "\n"), `"organic" is binary`) {
		t.Errorf("results notes %q lack the binary characteristic", res.Notes)
	}
}
