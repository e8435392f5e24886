package main

import (
	"bytes"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"rcdemand/data"
)

func runBinary(t *testing.T, bin, dir string, args ...string) (int, string, string) {
	t.Helper()
	cmd := exec.Command(bin, args...)
	cmd.Dir = dir
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	err := cmd.Run()
	code := 0
	var ee *exec.ExitError
	if errors.As(err, &ee) {
		code = ee.ExitCode()
	} else if err != nil {
		t.Fatal(err)
	}
	return code, out.String(), errb.String()
}

const goodProducts = "market,product,firm,share,price,x,z\n" +
	"1,a,F,0.20,1.5,0.1,0.3\n1,b,G,0.30,2.0,0.7,0.1\n1,c,H,0.10,1.1,0.2,0.9\n" +
	"2,a,F,0.25,1.4,0.3,0.2\n2,b,G,0.20,1.9,0.5,0.8\n2,c,H,0.15,1.0,0.4,0.4\n" +
	"3,a,F,0.22,1.6,0.2,0.5\n3,b,G,0.28,2.2,0.6,0.6\n3,c,H,0.12,1.2,0.9,0.1\n"

const goodAgents = "market,weight,nu\n1,0.5,-1\n1,0.5,1\n2,0.5,-1\n2,0.5,1\n3,0.5,-1\n3,0.5,1\n"

func specText(products, extra string) string {
	return "[data]\nproducts = \"" + products + "\"\n[demand]\nlinear = [\"1\", \"price\", \"x\"]\n[instruments]\nexcluded = [\"z\"]\n" + extra
}

// agentSpecText is a spec with a random price coefficient whose taste draws
// are column taste of the agents table.
func agentSpecText(products, agents, taste string) string {
	return "[data]\nproducts = \"" + products + "\"\nagents = \"" + agents + "\"\n[demand]\nlinear = [\"1\", \"price\", \"x\"]\nrandom = [\"price\"]\n" +
		"[instruments]\nexcluded = [\"z\"]\n[agents]\ntastes = { price = \"" + taste + "\" }\n"
}

// TestMalformedInputsThroughBinary feeds the built binary one malformed input
// at a time. Each must exit 1 with one line on stderr that names the file
// (and the row and column where there is one), and never a panic.
func TestMalformedInputsThroughBinary(t *testing.T) {
	bin := sharedBinary(t)
	dir := t.TempDir()
	write := func(name, content string) {
		if err := os.WriteFile(filepath.Join(dir, name), []byte(content), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	write("good.csv", goodProducts)
	write("agents.csv", goodAgents)
	write("good.toml", specText("good.csv", ""))
	if code, _, errs := runBinary(t, bin, dir, "estimate", "good.toml", "--out", "results.json", "--quiet"); code != 0 {
		t.Fatalf("the good spec: exit %d: %s", code, errs)
	}
	// A Parquet file whose share column holds words, not numbers.
	tab, _ := data.ParseCSV("good.csv", []byte(goodProducts))
	var f data.Frame
	for _, c := range tab.Names {
		v, _ := tab.Strings(c)
		if c == "share" {
			for i := range v {
				v[i] = "high"
			}
		}
		f.Add(c, v)
	}
	if err := data.WriteFrame(filepath.Join(dir, "text.parquet"), nil, &f); err != nil {
		t.Fatal(err)
	}
	swap := func(old, new string) string { return strings.Replace(goodProducts, old, new, 1) }
	tests := []struct {
		name  string
		files map[string]string
		args  []string
		want  []string
	}{
		{"truncated line", map[string]string{"p.csv": goodProducts + "4,a,F\n", "s.toml": specText("p.csv", "")}, []string{"check", "s.toml"}, []string{"p.csv", "row 10", "wrong number of fields"}},
		{"semicolon delimiter", map[string]string{"p.csv": strings.ReplaceAll(goodProducts, ",", ";"), "s.toml": specText("p.csv", "")}, []string{"check", "s.toml"}, []string{"p.csv", "comma separated"}},
		{"BOM and a missing column", map[string]string{"p.csv": "\xef\xbb\xbf" + strings.Replace(goodProducts, "price", "cost", 1), "s.toml": specText("p.csv", "")}, []string{"check", "s.toml"}, []string{"p.csv", `column "price"`, "market, product"}},
		{"duplicate header", map[string]string{"p.csv": strings.Replace(goodProducts, ",z\n", ",x\n", 1), "s.toml": specText("p.csv", "")}, []string{"check", "s.toml"}, []string{"p.csv", `column "x"`, "twice"}},
		{"missing column", map[string]string{"s.toml": strings.Replace(specText("good.csv", ""), `"z"`, `"w"`, 1)}, []string{"check", "s.toml"}, []string{"good.csv", `column "w"`}},
		{"text in a number", map[string]string{"p.csv": swap("1.5", "cheap"), "s.toml": specText("p.csv", "")}, []string{"check", "s.toml"}, []string{"p.csv", "row 1", `column "price"`, "not a number"}},
		{"NaN", map[string]string{"p.csv": swap("0.7", "NaN"), "s.toml": specText("p.csv", "")}, []string{"check", "s.toml"}, []string{"p.csv", "row 2", `column "x"`, "finite"}},
		{"Inf", map[string]string{"p.csv": swap("2.0", "+Inf"), "s.toml": specText("p.csv", "")}, []string{"check", "s.toml"}, []string{"p.csv", "row 2", `column "price"`, "finite"}},
		{"zero share", map[string]string{"p.csv": swap("0.30", "0"), "s.toml": specText("p.csv", "")}, []string{"check", "s.toml"}, []string{"p.csv", "row 2", `column "share"`}},
		{"negative share", map[string]string{"p.csv": swap("0.30", "-0.3"), "s.toml": specText("p.csv", "")}, []string{"check", "s.toml"}, []string{"p.csv", "row 2", `column "share"`}},
		{"share of one", map[string]string{"p.csv": swap("0.30", "1"), "s.toml": specText("p.csv", "")}, []string{"check", "s.toml"}, []string{"p.csv", "row 2", `column "share"`}},
		{"inside shares sum to 1", map[string]string{"p.csv": swap("0.30", "0.75"), "s.toml": specText("p.csv", "")}, []string{"check", "s.toml"}, []string{"p.csv", "row 3", `column "share"`, "sum to"}},
		{"duplicate product", map[string]string{"p.csv": swap("1,c,", "1,a,"), "s.toml": specText("p.csv", "")}, []string{"check", "s.toml"}, []string{"p.csv", "row 3", `column "product"`, "twice"}},
		{"no variation", map[string]string{"p.csv": "market,product,firm,share,price,x,z\n1,a,F,0.2,1.5,1,0.3\n", "s.toml": specText("p.csv", "")}, []string{"check", "s.toml"}, []string{"s.toml", "rank deficient", `"x"`}},
		{"empty file", map[string]string{"p.csv": "", "s.toml": specText("p.csv", "")}, []string{"check", "s.toml"}, []string{"p.csv", "empty"}},
		{"Parquet text share", map[string]string{"s.toml": specText("text.parquet", "")}, []string{"check", "s.toml"}, []string{"text.parquet", "row 1", `column "share"`, "not a number"}},
		{"agent weights", map[string]string{"a.csv": strings.Replace(goodAgents, "1,0.5,1", "1,0.4,1", 1), "s.toml": agentSpecText("good.csv", "a.csv", "nu")}, []string{"check", "s.toml"}, []string{"a.csv", `column "weight"`, "sum to"}},
		{"missing taste column", map[string]string{"s.toml": agentSpecText("good.csv", "agents.csv", "eta")}, []string{"check", "s.toml"}, []string{"agents.csv", `column "eta"`}},
		{"unknown key", map[string]string{"s.toml": strings.Replace(specText("good.csv", ""), "linear", "lineer", 1)}, []string{"check", "s.toml"}, []string{"s.toml", `"demand.lineer"`, `"demand.linear"`}},
		{"wrong type", map[string]string{"s.toml": strings.Replace(specText("good.csv", ""), `["1", "price", "x"]`, `"price"`, 1)}, []string{"check", "s.toml"}, []string{"s.toml", "line"}},
		{"unknown rule", map[string]string{"s.toml": strings.Replace(specText("good.csv", "[integration]\nrule = \"magic\"\n"), "[demand]\n", "[demand]\nrandom = [\"price\"]\n", 1)}, []string{"check", "s.toml"}, []string{"s.toml", `"magic"`}},
		{"absent products file", map[string]string{"s.toml": specText("nowhere.csv", "")}, []string{"check", "s.toml"}, []string{"nowhere.csv", "does not exist"}},
		{"absent spec", nil, []string{"estimate", "missing.toml"}, []string{"missing.toml", "does not exist"}},
		{"unknown instrument set", map[string]string{"s.toml": strings.Replace(specText("good.csv", ""), "excluded", "generate = [\"magic\"]\nexcluded", 1)}, []string{"check", "s.toml"}, []string{"s.toml", `"magic"`}},
		{"results of another schema", map[string]string{"r.json": `{"schema": "someone.else.v2"}`}, []string{"merger", "r.json", "--combine", "F,G"}, []string{"r.json", "schema"}},
		{"results not JSON", map[string]string{"r.json": `{"schema": `}, []string{"report", "r.json", "--out", "x.html"}, []string{"r.json", "JSON"}},
		{"unknown firm", nil, []string{"merger", "results.json", "--combine", "F,Nobody"}, []string{"good.csv", `column "firm"`, `"Nobody"`}},
		{"output over an input", nil, []string{"estimate", "good.toml", "--out", "good.csv", "--quiet"}, []string{"good.csv", "input"}},
		{"merger file of another schema", map[string]string{"m.json": `{"schema": "rcdemand.results.v1"}`}, []string{"report", "results.json", "--merger", "m.json", "--out", "x.html"}, []string{"m.json", "schema"}},
		{"screen margin out of range", map[string]string{"sm.csv": "market,product,firm,share,price,m\n1,a,F,0.2,1,0.3\n1,b,G,0.3,2,1.4\n"}, []string{"screen", "sm.csv", "--combine", "F,G", "--margin", "m"}, []string{"sm.csv", "row 2", `column "m"`}},
	}
	if len(tests) < 25 {
		t.Fatalf("only %d cases", len(tests))
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			for name, content := range tc.files {
				write(name, content)
			}
			code, _, errs := runBinary(t, bin, dir, tc.args...)
			if code != 1 {
				t.Fatalf("exit %d, want 1; stderr %q", code, errs)
			}
			if strings.Count(strings.TrimRight(errs, "\n"), "\n") != 0 {
				t.Errorf("more than one line on stderr: %q", errs)
			}
			if strings.Contains(errs, "panic") || strings.Contains(errs, "goroutine") {
				t.Errorf("stack trace on stderr: %q", errs)
			}
			for _, w := range tc.want {
				if !strings.Contains(errs, w) {
					t.Errorf("stderr %q lacks %q", errs, w)
				}
			}
		})
	}
}

// TestInterruptLeavesOutputsAlone sends SIGINT to a long merger run and a
// long estimation: the binary exits 130, an existing output file is left as
// it was, and no temporary file remains.
func TestInterruptLeavesOutputsAlone(t *testing.T) {
	bin := sharedBinary(t)
	dir := t.TempDir()
	for _, name := range []string{"spec.toml", "products.csv", "agents.csv"} {
		raw, _ := demoFiles.ReadFile("demodata/" + name)
		os.WriteFile(filepath.Join(dir, name), raw, 0o644)
	}
	if code, _, errs := runBinary(t, bin, dir, "estimate", "spec.toml", "--out", "results.json", "--quiet"); code != 0 {
		t.Fatalf("estimate: %d %s", code, errs)
	}
	truth, _ := os.ReadFile("../../examples/coldbrew/truth.toml")
	big := strings.Replace(strings.Replace(string(truth), "markets = 50", "markets = 20000", 1), "agents = 150", "agents = 400", 1)
	os.WriteFile(filepath.Join(dir, "big.toml"), []byte(big), 0o644)
	os.MkdirAll(filepath.Join(dir, "sim"), 0o755)
	for _, tc := range []struct {
		name string
		out  string
		args []string
	}{
		{"merger draws", "merger.json", []string{"merger", "results.json", "--combine", "Harbor Roast,Lumen Beverages", "--draws", "100000", "--out", "merger.json", "--quiet"}},
		{"estimate", "again.json", []string{"estimate", "spec.toml", "--starts", "1000", "--out", "again.json", "--quiet"}},
		{"synth", "sim/products.csv", []string{"synth", "--spec", "spec.toml", "--truth", "big.toml", "--out", "sim"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			out := filepath.Join(dir, tc.out)
			os.WriteFile(out, []byte("old"), 0o644)
			cmd := exec.Command(bin, tc.args...)
			cmd.Dir = dir
			var errb bytes.Buffer
			cmd.Stderr = &errb
			if err := cmd.Start(); err != nil {
				t.Fatal(err)
			}
			time.Sleep(700 * time.Millisecond)
			cmd.Process.Signal(os.Interrupt)
			done := make(chan error, 1)
			go func() { done <- cmd.Wait() }()
			var err error
			select {
			case err = <-done:
			case <-time.After(20 * time.Second):
				cmd.Process.Kill()
				t.Fatal("did not stop within 20 s of SIGINT")
			}
			var ee *exec.ExitError
			if !errors.As(err, &ee) || ee.ExitCode() != 130 {
				t.Fatalf("exit %v, want 130; stderr %q", err, errb.String())
			}
			if b, _ := os.ReadFile(out); string(b) != "old" {
				t.Errorf("the existing %s changed", tc.out)
			}
			entries, _ := os.ReadDir(filepath.Dir(out))
			for _, e := range entries {
				if strings.Contains(e.Name(), ".tmp-") {
					t.Errorf("temporary %s left behind", e.Name())
				}
			}
		})
	}
}

// TestSameResultsWhateverTheCores runs the binary's estimate with GOMAXPROCS
// 1 and 2: the results files agree byte for byte apart from the timing field.
func TestSameResultsWhateverTheCores(t *testing.T) {
	bin := sharedBinary(t)
	dir := t.TempDir()
	for _, name := range []string{"spec.toml", "products.csv", "agents.csv"} {
		raw, _ := demoFiles.ReadFile("demodata/" + name)
		os.WriteFile(filepath.Join(dir, name), raw, 0o644)
	}
	var outs []string
	for _, procs := range []string{"1", "2"} {
		cmd := exec.Command(bin, "estimate", "spec.toml", "--out", "r"+procs+".json", "--starts", "3", "--quiet")
		cmd.Dir = dir
		cmd.Env = append(os.Environ(), "GOMAXPROCS="+procs)
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("GOMAXPROCS=%s: %v %s", procs, err, out)
		}
		raw, _ := os.ReadFile(filepath.Join(dir, "r"+procs+".json"))
		outs = append(outs, timing.ReplaceAllString(string(raw), `"seconds": 0`))
	}
	if outs[0] != outs[1] {
		t.Fatal("results differ between GOMAXPROCS=1 and GOMAXPROCS=2")
	}
}

var timing = regexp.MustCompile(`"seconds": [0-9.e+-]+`)
