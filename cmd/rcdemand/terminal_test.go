package main

import (
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"rcdemand/merger"
)

const longName = "caffeine_milligrams_per_serving_bottled"

// TestTerminalTables (tracker #14, point 8): long names keep the columns
// aligned, wide matrices are wrapped to 100 characters with names cut the
// same way, decimals are fixed within a column, p-values read "p < 0.001",
// and a warning prints once, on stderr.
func TestTerminalTables(t *testing.T) {
	bin := sharedBinary(t)
	dir := demoCopy(t)
	products := readFile(t, filepath.Join(dir, "products.csv"))
	products = strings.Replace(products, "caffeine", longName, 1)
	products = strings.ReplaceAll(products, "Harbor Original", "Harbor Original Cold Brew Family Size")
	writeFile(t, filepath.Join(dir, "products.csv"), products)
	spec := strings.ReplaceAll(readFile(t, filepath.Join(dir, "spec.toml")), `"caffeine"`, `"`+longName+`"`)
	writeFile(t, filepath.Join(dir, "spec.toml"), spec)
	logit := "[data]\nproducts = \"products.csv\"\n[columns]\nmarket = \"city\"\nproduct = \"brand\"\n[demand]\n" +
		"linear = [\"1\", \"price\", \"" + longName + "\", \"sweetness\"]\n[instruments]\nexcluded = [\"bean_cost\"]\n" +
		"generate = [\"rival-sums\", \"differentiation-quadratic\"]\n"
	writeFile(t, filepath.Join(dir, "logit.toml"), logit)
	out, errs := mustRun(t, bin, dir, 0, "estimate", "logit.toml", "--out", "logit.json", "--quiet")
	// The decimal points of the estimates line up, four decimals each.
	est := regexp.MustCompile(`(?m)^    \S.*?  +(-?\d+)\.(\d+)  +(\d+)\.(\d+)  +\[`)
	pos := -1
	for _, line := range strings.Split(out, "\n") {
		m := est.FindStringSubmatchIndex(line)
		if m == nil {
			continue
		}
		if dot := runeLen(line[:m[3]]); pos >= 0 && dot != pos {
			t.Errorf("misaligned estimate: %q", line)
		} else {
			pos = dot // in characters: names may hold an ellipsis
		}
		if len(line[m[4]:m[5]]) != 4 {
			t.Errorf("not four decimals: %q", line)
		}
	}
	if pos < 0 || !strings.Contains(out, "caffeine_milligrams_per_serving…") {
		t.Errorf("no estimates table with the long name cut:\n%s", out)
	}
	if !strings.Contains(out, "p < 0.001") || strings.Contains(out+errs, "p = 0.000") {
		t.Errorf("p-value not written as p < 0.001:\n%s", out)
	}
	const warning = "rejects the over-identifying restrictions"
	if strings.Count(out+errs, warning) != 1 || !strings.Contains(errs, "warning: ") || !strings.Contains(errs, warning) {
		t.Errorf("the warning must print once, on stderr\nstdout:\n%s\nstderr:\n%s", out, errs)
	}
	mustRun(t, bin, dir, 0, "estimate", "spec.toml", "--out", "results.json", "--quiet")
	el, _ := mustRun(t, bin, dir, 0, "elasticities", "results.json")
	mg, _ := mustRun(t, bin, dir, 0, "merger", "results.json", "--combine", "Harbor Roast,Lumen Beverages", "--out", "m.json", "--quiet")
	for _, text := range []string{out, el, mg} {
		for _, l := range strings.Split(text, "\n") {
			if runeLen(l) > pageWidth {
				t.Errorf("line of %d characters: %q", runeLen(l), l)
			}
		}
	}
	if !strings.Contains(el, "Harbor Original Col…") || strings.Contains(el, "Harbor Original Cold Brew Family Size") {
		t.Error("long product names are not cut with an ellipsis")
	}
	// The two-line heads of the parties' products table, each on its line.
	heads := regexp.MustCompile(`(?m)^ +price +range over +cost\n +product +owner before +owner after +markets +change +markets, % +offset$`)
	if strings.Contains(mg, "price pre price post") || !heads.MatchString(mg) {
		t.Errorf("merger column heads run together:\n%s", mg)
	}
}

// TestOwnershipChange: the merger's title and the screen's describe the
// same change of ownership in the same words.
func TestOwnershipChange(t *testing.T) {
	tests := []struct {
		name             string
		combine          []string
		into, ownership  string
		parties          []string
		want, wantMerger string
	}{
		{"combine", []string{"A", "B"}, "A", "", []string{"A"}, "a merger of A + B (merged firm: A)", "Merger of A + B (merged firm: A)"},
		{"combine in a screen", []string{"A", "B"}, "", "", []string{"A"}, "a merger of A + B", ""},
		{"table", nil, "", "owners.csv", []string{"B"}, "the ownership changes of owners.csv; parties (firms gaining products): B",
			"Ownership changes of owners.csv; parties (firms gaining products): B"},
		{"both", []string{"A", "B"}, "A", "divest.csv", []string{"A", "D"},
			"a merger of A + B (merged firm: A) with the ownership changes of divest.csv; parties (firms gaining products): A, D",
			"Merger of A + B (merged firm: A) with the ownership changes of divest.csv; parties (firms gaining products): A, D"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := ownershipChange(tc.combine, tc.into, tc.ownership, tc.parties); got != tc.want {
				t.Errorf("got %q, want %q", got, tc.want)
			}
			r := &merger.Result{Combine: tc.combine, Into: tc.into, Ownership: tc.ownership, Parties: tc.parties}
			if got := scenarioTitle(r); tc.wantMerger != "" && got != tc.wantMerger {
				t.Errorf("merger title %q, want %q", got, tc.wantMerger)
			}
		})
	}
}
