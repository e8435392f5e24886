package main

import (
	"encoding/csv"
	"path/filepath"
	"strings"
	"testing"
)

func readCSV(t *testing.T, path string) [][]string {
	t.Helper()
	rows, err := csv.NewReader(strings.NewReader(readFile(t, path))).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	return rows
}

// TestOutputsFitTogether (tracker #14, point 6): the tables rcdemand writes
// share one vocabulary (market, product, to_product), leave empty the cells
// that have no figure (no NaN, no −1), honour --market with --out, and the
// elasticities table feeds screen --diversion as it is.
func TestOutputsFitTogether(t *testing.T) {
	bin := sharedBinary(t)
	dir := demoCopy(t)
	mustRun(t, bin, dir, 0, "estimate", "spec.toml", "--out", "results.json", "--products-out", "rows.csv", "--quiet")
	mustRun(t, bin, dir, 0, "check", "spec.toml", "--instruments-out", "z.csv", "--quiet")
	mustRun(t, bin, dir, 0, "elasticities", "results.json", "--out", "all.csv")
	mustRun(t, bin, dir, 0, "elasticities", "results.json", "--market", "7", "--out", "m7.csv")
	for _, f := range []string{"rows.csv", "z.csv", "all.csv"} {
		head := readCSV(t, filepath.Join(dir, f))[0]
		if head[0] != "market" || head[1] != "product" {
			t.Errorf("%s starts with %v, want market, product", f, head[:2])
		}
	}
	rows := readCSV(t, filepath.Join(dir, "rows.csv"))
	if strings.Join(rows[0][:5], ",") != "market,product,firm,share,price" || !strings.Contains(strings.Join(rows[0], ","), "lerner") {
		t.Errorf("products-out columns %v", rows[0])
	}
	all := readCSV(t, filepath.Join(dir, "all.csv"))
	if strings.Join(all[0], ",") != "market,product,to_product,elasticity,diversion" {
		t.Fatalf("elasticities columns %v", all[0])
	}
	if raw := readFile(t, filepath.Join(dir, "all.csv")); strings.Contains(strings.ToLower(raw), "nan") || strings.Contains(raw, ",-1\n") {
		t.Error("the elasticities table holds NaN or a diversion of −1")
	}
	var outside, own int
	for _, r := range all[1:] {
		switch {
		case r[2] == "outside good":
			outside++
			if r[3] != "" || r[4] == "" {
				t.Fatalf("outside-good row %v: want an empty elasticity and a diversion", r)
			}
		case r[1] == r[2]:
			own++
			if r[3] == "" || r[4] != "" {
				t.Fatalf("own row %v: want an elasticity and an empty diversion", r)
			}
		}
	}
	if outside != 500 || own != 500 || len(all) != 1+50*10*11 {
		t.Errorf("%d rows, %d outside-good rows, %d own rows", len(all)-1, outside, own)
	}
	m7 := readCSV(t, filepath.Join(dir, "m7.csv"))
	for _, r := range m7[1:] {
		if r[0] != "7" {
			t.Fatalf("--market 7 --out wrote market %s", r[0])
		}
	}
	if len(m7) != 1+10*11 {
		t.Errorf("--market 7 --out wrote %d rows", len(m7)-1)
	}
	writeFile(t, filepath.Join(dir, "margins.csv"), readFile(t, filepath.Join(dir, "products.csv")))
	out, _ := mustRun(t, bin, dir, 0, "screen", "spec.toml", "--combine", "Harbor Roast,Lumen Beverages", "--diversion", "all.csv")
	if !strings.Contains(out, "Screen of a merger") {
		t.Errorf("screen with the elasticities table as --diversion:\n%s", out)
	}
	// A table for one market lacks the others' ratios: the error names it.
	_, stderr := mustRun(t, bin, dir, 1, "screen", "spec.toml", "--combine", "Harbor Roast,Lumen Beverages", "--diversion", "m7.csv")
	if !strings.Contains(stderr, "m7.csv") || !strings.Contains(stderr, "no ratio") {
		t.Errorf("screen with a one-market diversion table:\n%s", stderr)
	}
}

// TestScreenReadsSpec (tracker #14, point 7): screen takes the spec (its
// columns and products table), names the firms in words, stops at a dozen
// rows, gives UPP its units and documents --efficiency.
func TestScreenReadsSpec(t *testing.T) {
	bin := sharedBinary(t)
	dir := demoCopy(t)
	// Margins: 30% on every product, in a copy of the products table.
	rows := strings.Split(strings.TrimRight(readFile(t, filepath.Join(dir, "products.csv")), "\n"), "\n")
	rows[0] += ",margin"
	for i := 1; i < len(rows); i++ {
		rows[i] += ",0.3"
	}
	writeFile(t, filepath.Join(dir, "products.csv"), strings.Join(rows, "\n")+"\n")
	out, _ := mustRun(t, bin, dir, 0, "screen", "spec.toml", "--combine", "Harbor Roast,Lumen Beverages", "--margin", "margin", "--out", "screen.json")
	if !strings.Contains(out, "Screen of a merger of Harbor Roast + Lumen Beverages") || strings.Contains(out, "[Harbor") {
		t.Errorf("title:\n%s", out)
	}
	if !strings.Contains(out, "(price units)") || !strings.Contains(out, "(% of price)") {
		t.Error("UPP and GUPPI have no units")
	}
	lines := strings.Split(out, "\n")
	if len(lines) > 2*shownRows+30 {
		t.Errorf("screen printed %d lines for 50 markets and 300 products; the terminal should stop at %d rows a table", len(lines), shownRows)
	}
	if !strings.Contains(out, "more products in screen.json") {
		t.Error("screen does not say where the other rows are")
	}
	for _, l := range lines {
		if runeLen(l) > pageWidth {
			t.Errorf("line wider than %d: %q", pageWidth, l)
		}
	}
	help, _ := mustRun(t, bin, dir, 0, "screen", "--help")
	for _, w := range []string{"--efficiency", "UPP = ", "E·c_j", "currency of prices", "SPEC.toml"} {
		if !strings.Contains(help, w) {
			t.Errorf("screen --help lacks %q", w)
		}
	}
}

// TestProductsOutWithoutPriceLevels: the automobile data's price is
// demeaned (testdata/automobiles/README.md), so estimate writes the
// per-row table with the elasticity and margin columns empty and says
// why, rather than failing after the estimate or writing figures that
// mean nothing.
func TestProductsOutWithoutPriceLevels(t *testing.T) {
	bin := sharedBinary(t)
	dir := t.TempDir()
	for _, name := range []string{"spec-logit.toml", "products.csv"} {
		writeFile(t, filepath.Join(dir, name), readFile(t, filepath.Join("..", "..", "testdata", "automobiles", name)))
	}
	_, stderr := mustRun(t, bin, dir, 0, "estimate", "spec-logit.toml", "--out", "results.json", "--products-out", "rows.csv")
	if !strings.Contains(stderr, "rows.csv: own_price_elasticity, markup, cost and lerner left empty") || !strings.Contains(stderr, "is not positive") {
		t.Errorf("no warning about the empty columns:\n%s", stderr)
	}
	rows := readCSV(t, filepath.Join(dir, "rows.csv"))
	head := strings.Join(rows[0], ",")
	if head != "market,product,firm,share,price,delta,xi,own_price_elasticity,markup,cost,lerner" {
		t.Fatalf("columns %s", head)
	}
	for _, r := range rows[1:] {
		if r[6] == "" || r[7] != "" || r[8] != "" || r[10] != "" {
			t.Fatalf("row %v: want xi and empty elasticity and margins", r)
		}
	}
}

// TestScreenPressureWithoutPartner: a party's product in a market where the
// partner sells nothing has a GUPPI of 0; the pressure table is printed
// because margins were given, not because the first product's GUPPI is
// nonzero (before, it vanished when that product came first).
func TestScreenPressureWithoutPartner(t *testing.T) {
	dir := t.TempDir()
	products := filepath.Join(dir, "p.csv")
	writeFile(t, products, "market,product,firm,share,price,m\n1,a,F,0.2,1,0.3\n1,c,H,0.3,2,0.3\n2,a,F,0.25,1,0.3\n2,b,G,0.2,2,0.3\n")
	code, out, errs := runCLI(t, "screen", products, "--combine", "F,G", "--margin", "m")
	if code != 0 {
		t.Fatalf("screen: exit %d: %s", code, errs)
	}
	if !strings.Contains(out, "Upward pricing pressure") || !strings.Contains(out, "0.00%") {
		t.Errorf("no pressure table, or no product without a partner in it:\n%s", out)
	}
	if code, out, _ := runCLI(t, "screen", products, "--combine", "F,G"); code != 0 || strings.Contains(out, "Upward pricing pressure") {
		t.Errorf("screen without margins: exit %d, and a pressure table:\n%s", code, out)
	}
}
