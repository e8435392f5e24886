package main

import (
	"fmt"
	"io"
	"path/filepath"
	"strings"
	"testing"

	"github.com/spf13/pflag"
)

// Messages, help and README that say what the tool does.

// TestEstimationLimitNamed: a limit of [estimation] out of range is named
// with its value, not listed among every limit.
func TestEstimationLimitNamed(t *testing.T) {
	bin := sharedBinary(t)
	dir := demoCopy(t)
	spec := readFile(t, filepath.Join(dir, "spec.toml"))
	for key, value := range map[string]string{"time_limit": "-1", "max_iterations": "-5", "gradient_tolerance": "-1e-06"} {
		if !strings.Contains(spec, "[estimation]\n") {
			t.Fatal("the demo spec has no [estimation]")
		}
		writeFile(t, filepath.Join(dir, "bad.toml"), strings.Replace(spec, "[estimation]\n", "[estimation]\n"+key+" = "+value+"\n", 1))
		_, errs := mustRun(t, bin, dir, 1, "check", "bad.toml")
		if !strings.Contains(errs, "bad.toml") || !strings.Contains(errs, "[estimation] "+key+" = "+value) {
			t.Errorf("%s = %s: stderr %q does not name the key with its value", key, value, errs)
		}
		for _, other := range []string{"time_limit", "max_iterations", "max_objective_calls", "inner_max_iterations", "gradient_tolerance"} {
			if other != key && strings.Contains(errs, other) {
				t.Errorf("%s = %s: stderr %q also names %s", key, value, errs, other)
			}
		}
	}
}

// TestGatherHelpNamesBothKinds: gather merges a study's shards or a
// merger's draws, and its --out says so.
func TestGatherHelpNamesBothKinds(t *testing.T) {
	_, help, _ := runCLI(t, "gather", "--help")
	found := false
	for _, line := range strings.Split(help, "\n") {
		if strings.Contains(line, "--out string") {
			found = true
			if !strings.Contains(line, "study") || !strings.Contains(line, "merger") {
				t.Errorf("gather --help: %q", line)
			}
		}
	}
	if !found {
		t.Errorf("gather --help lists no --out:\n%s", help)
	}
}

// TestReadmeCommandTable: each command's row of the README's command table
// shows every flag the command takes (--help and the global --quiet
// aside), and the README says what merged_share_pct holds and how many
// markets the terminal and the report list.
func TestReadmeCommandTable(t *testing.T) {
	readme := readFile(t, "../../README.md")
	rows := map[string]string{}
	for _, line := range strings.Split(readme, "\n") {
		if rest, ok := strings.CutPrefix(line, "| `rcdemand "); ok {
			rows[strings.Fields(rest)[0]] = line
		}
	}
	root := newRoot(io.Discard, io.Discard)
	for _, c := range root.Commands() {
		if c.Name() == "version" || c.Name() == "help" || c.Name() == "completion" {
			continue
		}
		row, ok := rows[c.Name()]
		if !ok {
			t.Errorf("the README's command table has no row for %s", c.Name())
			continue
		}
		c.LocalFlags().VisitAll(func(f *pflag.Flag) {
			if f.Name != "help" && !strings.Contains(row, "--"+f.Name) {
				t.Errorf("the README's row for %s lacks --%s", c.Name(), f.Name)
			}
		})
	}
	flat := strings.Join(strings.Fields(readme), " ")
	if strings.Contains(flat, "the largest pre-merger share of a party") || !strings.Contains(flat, "merged firm's combined pre-merger share") {
		t.Error("the README does not say that merged_share_pct is the merged firm's combined pre-merger share")
	}
	for _, want := range []string{
		fmt.Sprintf("up to %d markets one by one", manyMarkets),
		fmt.Sprintf("the %s markets with the largest effects", map[int]string{10: "ten", 12: "twelve"}[topRows]),
		fmt.Sprintf("`merger` lists every market up to %d and, above that, the %d with the largest ΔHHI", shownRows, shownRows),
	} {
		if !strings.Contains(flat, want) {
			t.Errorf("the README lacks %q", want)
		}
	}
}
