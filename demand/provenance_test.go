package demand

import (
	"os"
	"path/filepath"
	"testing"

	"rcdemand/data"
)

// TestRecordInputsFromLoadedBytes: the fingerprints recorded are those of
// the bytes the model was loaded from, even when a file changes on disk
// before the results are written.
func TestRecordInputsFromLoadedBytes(t *testing.T) {
	dir := t.TempDir()
	for _, name := range []string{"spec.toml", "products.csv", "agents.csv"} {
		raw, err := os.ReadFile(filepath.Join("../testdata/synthetic-small", name))
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, name), raw, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	var want []data.Input
	for _, f := range [][2]string{{"spec", "spec.toml"}, {"products", "products.csv"}, {"agents", "agents.csv"}} {
		in, err := data.Fingerprint(f[0], filepath.Join(dir, f[1]))
		if err != nil {
			t.Fatal(err)
		}
		in.Path = f[1]
		want = append(want, in)
	}
	spec, err := ReadSpec(filepath.Join(dir, "spec.toml"))
	if err != nil {
		t.Fatal(err)
	}
	m, err := Load(spec)
	if err != nil {
		t.Fatal(err)
	}
	for _, name := range []string{"spec.toml", "products.csv", "agents.csv"} {
		if err := os.WriteFile(filepath.Join(dir, name), []byte("changed\n"), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	var r Results
	if err := r.RecordInputs(m, filepath.Join(dir, "results.json")); err != nil {
		t.Fatal(err)
	}
	if len(r.Inputs) != len(want) {
		t.Fatalf("inputs %+v, want %+v", r.Inputs, want)
	}
	for i := range want {
		if r.Inputs[i] != want[i] {
			t.Errorf("input %d: %+v, want %+v", i, r.Inputs[i], want[i])
		}
	}
}

// TestRecordInputsInMemory: a spec parsed from memory has no file, and is
// left out of the inputs rather than failing as a missing file.
func TestRecordInputsInMemory(t *testing.T) {
	raw, err := os.ReadFile("../testdata/synthetic-small/spec.toml")
	if err != nil {
		t.Fatal(err)
	}
	spec, err := ParseSpec("", raw)
	if err != nil {
		t.Fatal(err)
	}
	prod, err := data.ReadTable("../testdata/synthetic-small/products.csv")
	if err != nil {
		t.Fatal(err)
	}
	ag, err := data.ReadTable("../testdata/synthetic-small/agents.csv")
	if err != nil {
		t.Fatal(err)
	}
	m, err := LoadTables(spec, prod, ag)
	if err != nil {
		t.Fatal(err)
	}
	var r Results
	if err := r.RecordInputs(m, "results.json"); err != nil {
		t.Fatal(err)
	}
	if len(r.Inputs) != 2 || r.Inputs[0].Role != "products" || r.Inputs[1].Role != "agents" {
		t.Fatalf("inputs %+v, want products and agents only", r.Inputs)
	}
}
