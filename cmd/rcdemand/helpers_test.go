package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
)

// The binary is built once per test run for the tests of the outputs issue
// (tracker #14), which run it as a user would.
var (
	binOnce sync.Once
	binPath string
	binErr  error
	binDir  string
)

func TestMain(m *testing.M) {
	code := m.Run()
	if binDir != "" {
		os.RemoveAll(binDir)
	}
	os.Exit(code)
}

// sharedBinary returns the path of the rcdemand binary built for this run.
func sharedBinary(t *testing.T) string {
	t.Helper()
	if testing.Short() {
		t.Skip("builds the binary")
	}
	binOnce.Do(func() {
		if binDir, binErr = os.MkdirTemp("", "rcdemand-bin-"); binErr != nil {
			return
		}
		binPath = filepath.Join(binDir, "rcdemand")
		out, err := exec.Command("go", "build", "-o", binPath, ".").CombinedOutput()
		if err != nil {
			binErr = &buildError{err, string(out)}
		}
	})
	if binErr != nil {
		t.Fatal(binErr)
	}
	return binPath
}

type buildError struct {
	err error
	out string
}

func (e *buildError) Error() string { return "go build: " + e.err.Error() + "\n" + e.out }

// demoCopy writes the demo's spec and data to a new folder and returns it.
func demoCopy(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	for _, name := range []string{"spec.toml", "products.csv", "agents.csv"} {
		raw, err := demoFiles.ReadFile("demodata/" + name)
		if err != nil {
			t.Fatal(err)
		}
		writeFile(t, filepath.Join(dir, name), string(raw))
	}
	return dir
}

func writeFile(t *testing.T, path, content string) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, []byte(content), 0o644); err != nil {
		t.Fatal(err)
	}
}

func readFile(t *testing.T, path string) string {
	t.Helper()
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return string(raw)
}

// mustRun runs the binary in dir and fails the test unless it exits with
// want; it returns stdout and stderr.
func mustRun(t *testing.T, bin, dir string, want int, args ...string) (string, string) {
	t.Helper()
	code, out, errs := runBinary(t, bin, dir, args...)
	if code != want {
		t.Fatalf("rcdemand %s: exit %d, want %d\nstdout:\n%s\nstderr:\n%s", strings.Join(args, " "), code, want, out, errs)
	}
	return out, errs
}

// logitSpec is a plain logit spec of a synthetic design (synthTruth), with
// market sizes when sized.
func logitSpec(sized bool) string {
	s := "[data]\nproducts = \"products.csv\"\n"
	if sized {
		s += "[columns]\nmarket_size = \"population\"\n"
	}
	return s + "[demand]\nlinear = [\"1\", \"price\", \"x\"]\n[instruments]\nexcluded = [\"z\"]\n"
}

// synthTruth is a truth file of markets × 8 products of four firms, the
// third of which has a comma in its name.
func synthTruth(markets int, sized bool) string {
	s := "markets = " + strconv.Itoa(markets) + "\nproducts = 8\nfirms = 4\nagents = 1\nseed = 7\n" +
		"firm_names = [\"Alder & Sons\", \"Bruma Foods\", \"Cremo Group, Inc.\", \"Dunmore\"]\n" +
		"[beta]\n\"1\" = -1.0\nprice = -1.5\nx = 1.0\n[characteristics]\nx = [0.0, 1.0]\n" +
		"[cost]\nconstant = 0.0\nshifters = { z = 0.5 }\n[shocks]\nxi_sd = 0.3\nomega_sd = 0.1\ncorrelation = 0.3\n"
	if sized {
		s += "[market_size]\nmedian = 120000\nlog_sd = 0.5\n"
	}
	return s
}

// synthLogit draws a plain-logit data set of the given size with synth and
// estimates it; it returns the folder (sim/ holds spec, data, results.json).
func synthLogit(t *testing.T, bin string, markets int, sized bool) string {
	t.Helper()
	dir := t.TempDir()
	writeFile(t, filepath.Join(dir, "spec.toml"), logitSpec(sized))
	writeFile(t, filepath.Join(dir, "truth.toml"), synthTruth(markets, sized))
	mustRun(t, bin, dir, 0, "synth", "--spec", "spec.toml", "--truth", "truth.toml", "--out", "sim")
	mustRun(t, bin, dir, 0, "estimate", "sim/spec.toml", "--out", "sim/results.json", "--quiet")
	return dir
}

// fragileTruth is the cold-brew truth file as it was before the demo was
// made identified (#14): one income distribution for every city and a
// price coefficient −2, under which some consumers' price coefficients
// approach zero, so draws and markets fail. Tests of those failures use it.
func fragileTruth(t *testing.T) string {
	t.Helper()
	truth := readFile(t, "../../examples/coldbrew/truth.toml")
	for _, r := range [][2]string{{`"1" = 2.5`, `"1" = 1.0`}, {"price = -3.0", "price = -2.0"}, {"\nprice = 0.5\n", "\nprice = 0.3\n"},
		{"income = [0.0, 0.7]", "income = [0.0, 1.0]"}, {"demographic_market_sd = { income = 0.6 }", ""}} {
		if !strings.Contains(truth, r[0]) {
			t.Fatalf("examples/coldbrew/truth.toml has no %q", r[0])
		}
		truth = strings.Replace(truth, r[0], r[1], 1)
	}
	return truth
}

// fragileDemo writes the demo's spec and data drawn from fragileTruth to
// dir (the demo's data before #14, with a market-size column).
func fragileDemo(t *testing.T, dir string) {
	t.Helper()
	writeFile(t, filepath.Join(dir, "truth.toml"), fragileTruth(t))
	writeFile(t, filepath.Join(dir, "model.toml"), readFile(t, "../../examples/coldbrew/spec.toml"))
	if code, _, errs := runCLI(t, "synth", "--spec", filepath.Join(dir, "model.toml"), "--truth", filepath.Join(dir, "truth.toml"), "--out", dir); code != 0 {
		t.Fatalf("synth: exit %d: %s", code, errs)
	}
	demoSpec, _ := demoFiles.ReadFile("demodata/spec.toml")
	writeFile(t, filepath.Join(dir, "spec.toml"), string(demoSpec))
}
