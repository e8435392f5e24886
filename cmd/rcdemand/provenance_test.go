package main

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
)

// scaleColumn multiplies one numeric column of a CSV file by f.
func scaleColumn(t *testing.T, path, column string, f float64) {
	t.Helper()
	lines := strings.Split(strings.TrimRight(readFile(t, path), "\n"), "\n")
	head := strings.Split(lines[0], ",")
	k := -1
	for i, h := range head {
		if h == column {
			k = i
		}
	}
	if k < 0 {
		t.Fatalf("%s has no column %q", path, column)
	}
	for i := 1; i < len(lines); i++ {
		cells := strings.Split(lines[i], ",")
		v, err := strconv.ParseFloat(cells[k], 64)
		if err != nil {
			t.Fatal(err)
		}
		cells[k] = strconv.FormatFloat(v*f, 'g', -1, 64)
		lines[i] = strings.Join(cells, ",")
	}
	writeFile(t, path, strings.Join(lines, "\n")+"\n")
}

var partiesChange = regexp.MustCompile(`parties ([+-][0-9.]+)%`)

// TestChangedDataRefused (tracker #14, point 1): the results file records
// its inputs' SHA-256 (paths relative to it); after the products' prices
// are scaled by 1.3, merger, elasticities and report refuse with exit 1
// naming the file, and --allow-changed-data proceeds with one warning.
func TestChangedDataRefused(t *testing.T) {
	bin := sharedBinary(t)
	dir := demoCopy(t)
	mustRun(t, bin, dir, 0, "estimate", "spec.toml", "--out", "out/results.json", "--quiet")
	var res struct {
		Inputs []struct{ Role, Path, SHA256 string } `json:"inputs"`
	}
	if err := json.Unmarshal([]byte(readFile(t, filepath.Join(dir, "out/results.json"))), &res); err != nil {
		t.Fatal(err)
	}
	roles := map[string]string{}
	for _, in := range res.Inputs {
		sum := sha256.Sum256([]byte(readFile(t, filepath.Join(dir, "out", in.Path))))
		if hex.EncodeToString(sum[:]) != in.SHA256 {
			t.Errorf("%s: recorded sha256 %s does not match the file", in.Path, in.SHA256)
		}
		roles[in.Role] = in.Path
	}
	if roles["spec"] != "../spec.toml" || roles["products"] != "../products.csv" || roles["agents"] != "../agents.csv" {
		t.Fatalf("inputs %+v: want spec, products and agents relative to the results file", res.Inputs)
	}
	// The folder moves as a whole: the relative paths still find the inputs.
	moved := filepath.Join(t.TempDir(), "moved")
	if err := os.Rename(dir, moved); err != nil {
		t.Fatal(err)
	}
	dir = moved
	merger := []string{"merger", "out/results.json", "--combine", "Harbor Roast,Lumen Beverages", "--out", "out/m.json"}
	before, _ := mustRun(t, bin, dir, 0, append(merger, "--quiet")...)
	scaleColumn(t, filepath.Join(dir, "products.csv"), "price", 1.3)
	for _, args := range [][]string{merger, {"elasticities", "out/results.json"}, {"report", "out/results.json", "--out", "out/r.html"}} {
		_, errs := mustRun(t, bin, dir, 1, args...)
		if !strings.Contains(errs, "products.csv") || !strings.Contains(errs, "changed since estimation") || !strings.Contains(errs, "--allow-changed-data") {
			t.Errorf("%s: stderr %q should name products.csv and --allow-changed-data", args[0], errs)
		}
		if strings.Count(strings.TrimRight(errs, "\n"), "\n") != 0 {
			t.Errorf("%s: more than one line on stderr: %q", args[0], errs)
		}
	}
	after, errs := mustRun(t, bin, dir, 0, append(merger, "--allow-changed-data")...)
	if strings.Count(errs, "warning:") != 1 || !strings.Contains(errs, "products.csv") {
		t.Errorf("--allow-changed-data: want one warning naming products.csv, got %q", errs)
	}
	b, a := partiesChange.FindStringSubmatch(before), partiesChange.FindStringSubmatch(after)
	if b == nil || a == nil || b[1] == a[1] {
		t.Errorf("price rise before %v, after the change %v: the changed data should change the simulation", b, a)
	}
	// Results written before inputs were recorded: proceed with a note.
	raw := readFile(t, filepath.Join(dir, "out/results.json"))
	old := regexp.MustCompile(`(?s)"inputs": \[.*?\],\n`).ReplaceAllString(raw, "")
	writeFile(t, filepath.Join(dir, "out/old.json"), old)
	_, errs = mustRun(t, bin, dir, 0, "elasticities", "out/old.json")
	if !strings.Contains(errs, "note:") || !strings.Contains(errs, "fingerprints") {
		t.Errorf("old results: want a note that changes cannot be detected, got %q", errs)
	}
}

// TestMergerInputsChanged: report checks the merger file's own inputs. An
// ownership table changed since the merger was simulated is refused in
// those words (not "since estimation") and, with --allow-changed-data,
// named in a warning; a product of the merger file missing from the data
// now is an error naming it (before, its owners overwrote the first
// product's).
func TestMergerInputsChanged(t *testing.T) {
	bin := sharedBinary(t)
	sim := filepath.Join(synthLogit(t, bin, 6, false), "sim")
	writeFile(t, filepath.Join(sim, "owners.csv"), "product,firm_after\nP03,Bruma Foods\n")
	mustRun(t, bin, sim, 0, "merger", "results.json", "--ownership", "owners.csv", "--out", "m.json", "--quiet")
	report := []string{"report", "results.json", "--merger", "m.json", "--out", "r.html"}
	mustRun(t, bin, sim, 0, report...)
	writeFile(t, filepath.Join(sim, "owners.csv"), "product,firm_after\nP03,Dunmore\n")
	_, errs := mustRun(t, bin, sim, 1, report...)
	if !strings.Contains(errs, "owners.csv: changed since the merger was simulated") || strings.Contains(errs, "since estimation") ||
		!strings.Contains(errs, "--allow-changed-data") {
		t.Errorf("changed ownership table: stderr %q", errs)
	}
	_, errs = mustRun(t, bin, sim, 0, append(report, "--allow-changed-data")...)
	if strings.Count(errs, "warning:") != 1 || !strings.Contains(errs, "owners.csv: changed since the merger was simulated") {
		t.Errorf("--allow-changed-data: want one warning naming owners.csv, got %q", errs)
	}
	products := readFile(t, filepath.Join(sim, "products.csv"))
	if !strings.Contains(products, ",P01,") {
		t.Fatalf("products.csv has no product P01:\n%s", products[:min(len(products), 500)])
	}
	writeFile(t, filepath.Join(sim, "products.csv"), strings.ReplaceAll(products, ",P01,", ",Q01,"))
	_, errs = mustRun(t, bin, sim, 1, append(report, "--allow-changed-data")...)
	if !strings.Contains(errs, `"P01"`) || !strings.Contains(errs, "products.csv") || !strings.Contains(errs, "run the merger again") {
		t.Errorf("a merger product missing from the data: stderr %q", errs)
	}
}
