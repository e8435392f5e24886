package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// Tests of synth through the built binary: its exit status when markets are
// left out, and the messages about a truth file.

// TestSynthDroppingMarketsExits3: a design under which most markets have
// no equilibrium (the cold-brew truth before the demo was made identified,
// 20 markets, a taste s.d. of 0.8 on price, seed 2: 14 of 20 markets have
// none) writes the other 6 and exits 3, results written but incomplete,
// with stderr naming how many; stderr and truth.json call the list by one
// name, dropped_markets.
func TestSynthDroppingMarketsExits3(t *testing.T) {
	bin := sharedBinary(t)
	dir := t.TempDir()
	truth := fragileTruth(t)
	for _, r := range [][2]string{{"markets = 50", "markets = 20"}, {"\nprice = 0.3\n", "\nprice = 0.8\n"}} {
		truth = strings.Replace(truth, r[0], r[1], 1)
	}
	writeFile(t, filepath.Join(dir, "truth.toml"), truth)
	writeFile(t, filepath.Join(dir, "spec.toml"), readFile(t, "../../examples/coldbrew/spec.toml"))
	out, errs := mustRun(t, bin, dir, 3, "synth", "--spec", "spec.toml", "--truth", "truth.toml", "--out", "sim", "--seed", "2")
	var rec struct {
		Written int               `json:"markets_written"`
		Dropped []json.RawMessage `json:"dropped_markets"`
	}
	if err := json.Unmarshal([]byte(readFile(t, filepath.Join(dir, "sim", "truth.json"))), &rec); err != nil {
		t.Fatal(err)
	}
	if rec.Written != 6 || len(rec.Dropped) != 14 || !strings.Contains(out, "wrote 6 markets") {
		t.Fatalf("truth.json: %d markets written, %d dropped; stdout %q", rec.Written, len(rec.Dropped), out)
	}
	for _, want := range []string{"no Bertrand–Nash equilibrium in 14 of 20 markets", "see dropped_markets in truth.json",
		"rcdemand: warning: the data were written, but 14 of the 20 markets have no Bertrand–Nash equilibrium"} {
		if !strings.Contains(errs, want) {
			t.Errorf("stderr lacks %q:\n%s", want, errs)
		}
	}
	if strings.Contains(errs, "failed_markets") {
		t.Errorf("stderr names failed_markets, a key truth.json does not have:\n%s", errs)
	}
}

// TestTruthMessagesThroughBinary: mistakes in a truth file exit 1 with one
// line that names the truth file; a misspelt column in [beta] is an unknown
// key with the closest column, as a misspelt top-level key is.
func TestTruthMessagesThroughBinary(t *testing.T) {
	bin := sharedBinary(t)
	dir := t.TempDir()
	writeFile(t, filepath.Join(dir, "spec.toml"), readFile(t, "../../examples/coldbrew/spec.toml"))
	truth := readFile(t, "../../examples/coldbrew/truth.toml")
	tests := []struct {
		name, from, to string
		want           []string
	}{
		{"typo in [beta]", "caffeine = 1.0", "cafeine = 1.0", []string{`unknown key "beta.cafeine"`, `did you mean "caffeine"`}},
		{"typo in [shocks]", "omega_sd", "omega_ds", []string{`unknown key "shocks.omega_ds"`, `did you mean "shocks.omega_sd"`}},
		{"negative xi_sd", "xi_sd = 0.3", "xi_sd = -0.3", []string{"[shocks] xi_sd = -0.3", "0 or more"}},
		{"correlation 1.5", "correlation = 0.5", "correlation = 1.5", []string{"[shocks] correlation = 1.5", "[−1, 1]"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if !strings.Contains(truth, tc.from) {
				t.Fatalf("the truth file has no %q", tc.from)
			}
			writeFile(t, filepath.Join(dir, "bad.toml"), strings.Replace(truth, tc.from, tc.to, 1))
			_, errs := mustRun(t, bin, dir, 1, "synth", "--spec", "spec.toml", "--truth", "bad.toml", "--out", "sim")
			if strings.Count(strings.TrimRight(errs, "\n"), "\n") != 0 {
				t.Errorf("more than one line: %q", errs)
			}
			for _, w := range append([]string{"rcdemand: bad.toml: "}, tc.want...) {
				if !strings.Contains(errs, w) {
					t.Errorf("stderr %q lacks %q", errs, w)
				}
			}
			if _, err := os.Stat(filepath.Join(dir, "sim")); err == nil {
				t.Error("synth wrote a folder")
			}
		})
	}
}
