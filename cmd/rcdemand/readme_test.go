package main

import (
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"rcdemand/demand"
	"rcdemand/merger"
	"rcdemand/merger/synth"
)

// TestReadmeDocuments (tracker #14, point 12): the README documents what
// was discoverable only by error, its spec and truth-file examples are read
// by rcdemand as they stand, and it carries the caution of every output.
func TestReadmeDocuments(t *testing.T) {
	raw, err := os.ReadFile("../../README.md")
	if err != nil {
		t.Fatal(err)
	}
	readme := string(raw)
	for _, want := range []string{
		"`optimal`", "[agents]", "market = \"city\"", "taste draw", "every random", "--into", "--ownership",
		"downloads the Go modules", "a few minutes", "market_size", "demographic_market_sd", "[market_size]",
		"relative to the spec file's folder", "Exit status", "2 a usage error", "3 results written", "4 an",
		"--allow-changed-data", "to_product", "data row N (line M)", "matched exactly",
	} {
		if !strings.Contains(readme, want) {
			t.Errorf("README does not document %q", want)
		}
	}
	flat := strings.Join(strings.Fields(readme), " ")
	if !strings.Contains(flat, merger.Caution) {
		t.Error("README does not carry merger.Caution word for word")
	}
	var spec, truthFile string
	for _, b := range regexp.MustCompile("(?s)```toml\n(.*?)```").FindAllStringSubmatch(readme, -1) {
		switch {
		case strings.HasPrefix(b[1], "[data]"):
			spec = b[1]
		case strings.HasPrefix(b[1], "markets ="):
			truthFile = b[1]
		}
	}
	if spec == "" || truthFile == "" {
		t.Fatal("the README lacks the example spec or truth file")
	}
	dir := t.TempDir()
	if _, err := demand.ParseSpec(filepath.Join(dir, "spec.toml"), []byte(spec)); err != nil {
		t.Errorf("the README's spec: %v", err)
	}
	truth := filepath.Join(dir, "truth.toml")
	writeFile(t, truth, truthFile)
	if _, err := synth.ReadTruth(truth); err != nil {
		t.Errorf("the README's truth file: %v", err)
	}
}
