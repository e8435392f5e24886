package main

import (
	"encoding/json"
	"math"
	"path/filepath"
	"strings"
	"testing"
)

type mergerFile struct {
	Parties  []string `json:"parties"`
	Products []struct {
		Market, Product        string
		FirmPre                string  `json:"firm_pre"`
		FirmPost               string  `json:"firm_post"`
		PriceChangePct         float64 `json:"price_change_pct"`
		Merging                bool    `json:"merging"`
		PricePost, SharePre    float64
		LernerPre, MarginPre   float64
		CompensatingCostChange float64
	} `json:"products"`
	Markets []map[string]any `json:"markets"`
	Summary map[string]any   `json:"summary"`
}

func readMergerFile(t *testing.T, path string) mergerFile {
	t.Helper()
	var m mergerFile
	if err := json.Unmarshal([]byte(readFile(t, path)), &m); err != nil {
		t.Fatal(err)
	}
	return m
}

// TestOwnershipFile (tracker #14, point 2): a firm with a comma in its name
// merges through --ownership (names trimmed, matched exactly); the result
// is the --combine merger of the same firms under a name without a comma;
// a single product can be divested; mistakes name the file, row and column.
func TestOwnershipFile(t *testing.T) {
	bin := sharedBinary(t)
	dir := synthLogit(t, bin, 6, false)
	sim := filepath.Join(dir, "sim")
	// Cremo Group, Inc. sells P03 and P07 (product j belongs to firm j mod 4).
	writeFile(t, filepath.Join(sim, "owners.csv"), "product,firm_after\nP03, Bruma Foods \nP07,Bruma Foods\n")
	mustRun(t, bin, sim, 0, "merger", "results.json", "--ownership", "owners.csv", "--out", "own.json", "--quiet")
	own := readMergerFile(t, filepath.Join(sim, "own.json"))
	if len(own.Parties) != 1 || own.Parties[0] != "Bruma Foods" {
		t.Fatalf("parties %v, want [Bruma Foods]", own.Parties)
	}
	// The same merger with --combine, on a copy whose firm has no comma.
	renamed := filepath.Join(dir, "renamed")
	for _, f := range []string{"products.csv", "agents.csv"} {
		writeFile(t, filepath.Join(renamed, f), strings.ReplaceAll(readFile(t, filepath.Join(sim, f)), `"Cremo Group, Inc."`, "Cremo Group Inc"))
	}
	writeFile(t, filepath.Join(renamed, "spec.toml"), readFile(t, filepath.Join(sim, "spec.toml")))
	mustRun(t, bin, renamed, 0, "estimate", "spec.toml", "--out", "results.json", "--quiet")
	mustRun(t, bin, renamed, 0, "merger", "results.json", "--combine", "Bruma Foods,Cremo Group Inc", "--out", "comb.json", "--quiet")
	comb := readMergerFile(t, filepath.Join(renamed, "comb.json"))
	if len(own.Products) != len(comb.Products) || len(own.Products) == 0 {
		t.Fatalf("%d product rows by --ownership, %d by --combine", len(own.Products), len(comb.Products))
	}
	for i, p := range own.Products {
		q := comb.Products[i]
		if math.Abs(p.PriceChangePct-q.PriceChangePct) > 1e-9 || p.Merging != q.Merging {
			t.Fatalf("%s in market %s: %+v by --ownership, %+v by --combine", p.Product, p.Market, p, q)
		}
	}
	// A merger of Alder & Sons and Bruma Foods that divests P02 (Bruma's) to Dunmore.
	writeFile(t, filepath.Join(sim, "divest.csv"), "market,product,firm_after\n,P02,Dunmore\n")
	mustRun(t, bin, sim, 0, "merger", "results.json", "--combine", "Alder & Sons,Bruma Foods", "--ownership", "divest.csv", "--out", "div.json", "--quiet")
	for _, p := range readMergerFile(t, filepath.Join(sim, "div.json")).Products {
		want := map[string]string{"P01": "Alder & Sons", "P02": "Dunmore", "P05": "Alder & Sons", "P06": "Alder & Sons"}[p.Product]
		if want != "" && p.FirmPost != want {
			t.Errorf("%s in market %s goes to %q, want %q", p.Product, p.Market, p.FirmPost, want)
		}
	}
	// Mistakes name the file, the data row and the column.
	writeFile(t, filepath.Join(sim, "bad.csv"), "product,firm_after\nP03,Bruma Foods\np07,Bruma Foods\n")
	_, errs := mustRun(t, bin, sim, 1, "merger", "results.json", "--ownership", "bad.csv")
	for _, w := range []string{"bad.csv", "data row 2 (line 3)", `column "product"`, `"p07"`} {
		if !strings.Contains(errs, w) {
			t.Errorf("stderr %q lacks %q", errs, w)
		}
	}
	help, _ := mustRun(t, bin, sim, 0, "merger", "--help")
	for _, w := range []string{"--ownership", "firm_after", "matched exactly", "comma"} {
		if !strings.Contains(help, w) {
			t.Errorf("merger --help does not explain %q", w)
		}
	}
}
