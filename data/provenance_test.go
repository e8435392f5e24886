package data

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestFingerprint checks the digest against crypto/sha256 on the same bytes
// and against the published SHA-256 of the empty input (FIPS 180-4 test
// vectors, as listed by NIST).
func TestFingerprint(t *testing.T) {
	dir := t.TempDir()
	body := strings.Repeat("market,product,share\n1,a,0.2\n", 5000) // larger than one io.Copy buffer
	path := filepath.Join(dir, "products.csv")
	os.WriteFile(path, []byte(body), 0o644)
	in, err := Fingerprint("products", path)
	if err != nil {
		t.Fatal(err)
	}
	sum := sha256.Sum256([]byte(body))
	if in.Role != "products" || in.Path != path || in.Bytes != int64(len(body)) || in.SHA256 != hex.EncodeToString(sum[:]) {
		t.Fatalf("fingerprint %+v", in)
	}
	empty := filepath.Join(dir, "empty")
	os.WriteFile(empty, nil, 0o644)
	if in, _ := Fingerprint("x", empty); in.SHA256 != "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855" || in.Bytes != 0 {
		t.Fatalf("empty file: %+v", in)
	}
	if _, err := Fingerprint("agents", filepath.Join(dir, "nope.csv")); err == nil || !strings.Contains(err.Error(), "nope.csv: file does not exist") {
		t.Fatalf("absent file: %v", err)
	}
}

func TestChanged(t *testing.T) {
	dir := t.TempDir()
	write := func(name, body string) {
		if err := os.WriteFile(filepath.Join(dir, name), []byte(body), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	write("spec.toml", "[data]\nproducts = \"products.csv\"\n")
	write("products.csv", "market,product,share\n1,a,0.2\n")
	write("agents.csv", "market,weight\n1,1\n")
	// Record relative paths, as a results file in dir would.
	record := func() []Input {
		var ins []Input
		for _, f := range [][2]string{{"spec", "spec.toml"}, {"products", "products.csv"}, {"agents", "agents.csv"}} {
			in, err := Fingerprint(f[0], filepath.Join(dir, f[1]))
			if err != nil {
				t.Fatal(err)
			}
			in.Path = f[1]
			ins = append(ins, in)
		}
		return ins
	}
	ins := record()

	t.Run("unchanged", func(t *testing.T) {
		if err := Changed(dir, ins); err != nil {
			t.Fatal(err)
		}
		if err := Changed(dir, nil); err != nil {
			t.Fatal(err)
		}
	})
	t.Run("relative paths resolve against dir, not the working folder", func(t *testing.T) {
		other := t.TempDir()
		os.WriteFile(filepath.Join(other, "products.csv"), []byte("something else"), 0o644)
		t.Chdir(other)
		if err := Changed(dir, ins); err != nil {
			t.Fatal(err)
		}
	})
	t.Run("absolute paths are used as recorded", func(t *testing.T) {
		abs := append([]Input(nil), ins...)
		for i := range abs {
			abs[i].Path = filepath.Join(dir, abs[i].Path)
		}
		if err := Changed(t.TempDir(), abs); err != nil {
			t.Fatal(err)
		}
	})
	t.Run("one byte changed, same size", func(t *testing.T) {
		write("products.csv", "market,product,share\n1,a,0.3\n")
		defer write("products.csv", "market,product,share\n1,a,0.2\n")
		err := Changed(dir, ins)
		var ce *ChangedError
		if !errors.As(err, &ce) || len(ce.Inputs) != 1 || ce.Inputs[0].Recorded.Role != "products" || ce.Inputs[0].Missing {
			t.Fatalf("got %v", err)
		}
		msg := err.Error()
		lines := strings.Split(msg, "\n")
		if len(lines) != 2 || lines[0] != "1 input changed since estimation:" ||
			!strings.Contains(lines[1], filepath.Join(dir, "products.csv")+": changed since estimation (sha256 "+ins[1].SHA256[:12]) {
			t.Fatalf("message %q", msg)
		}
	})
	t.Run("size changed and a file missing", func(t *testing.T) {
		write("spec.toml", "[data]\nproducts = \"products.csv\"\nagents = \"agents.csv\"\n")
		os.Remove(filepath.Join(dir, "agents.csv"))
		err := Changed(dir, ins)
		var ce *ChangedError
		if !errors.As(err, &ce) || len(ce.Inputs) != 2 || !ce.Inputs[1].Missing {
			t.Fatalf("got %v", err)
		}
		lines := strings.Split(err.Error(), "\n")
		if len(lines) != 3 || lines[0] != "2 inputs changed since estimation:" ||
			!strings.HasSuffix(lines[1], "spec.toml: changed since estimation (33 bytes, now 55)") ||
			!strings.HasSuffix(lines[2], filepath.Join(dir, "agents.csv")+": missing") {
			t.Fatalf("message %q", err.Error())
		}
	})
}

// TestRelativeToAndResolve: a path recorded relative to one file's folder
// resolves back to the same file from there; absolute and empty paths pass
// through Resolve unchanged.
func TestRelativeToAndResolve(t *testing.T) {
	dir := t.TempDir()
	out := filepath.Join(dir, "out", "results.json")
	in := filepath.Join(dir, "data", "products.csv")
	rel := RelativeTo(in, out)
	if rel != "../data/products.csv" {
		t.Errorf("RelativeTo: %q", rel)
	}
	if got := Resolve(out, rel); !SamePath(got, in) {
		t.Errorf("Resolve(%q): %q, want %q", rel, got, in)
	}
	if got := Resolve(out, in); got != in {
		t.Errorf("Resolve of an absolute path: %q", got)
	}
	if got := Resolve(out, ""); got != "" {
		t.Errorf("Resolve of an empty path: %q", got)
	}
}

// TestTableSource: a CSV table carries the fingerprint of the bytes it was
// parsed from, the same as Fingerprint of the file then, and keeps it when
// the file changes afterwards; tables parsed from memory, or derived with
// other rows or columns, have none.
func TestTableSource(t *testing.T) {
	dir := t.TempDir()
	body := strings.Repeat("m,x\n", 1) + strings.Repeat("1,0.25\n", 20000) // several io.Copy buffers
	path := filepath.Join(dir, "a.csv")
	os.WriteFile(path, []byte(body), 0o644)
	tab, err := ReadTable(path)
	if err != nil {
		t.Fatal(err)
	}
	want, _ := Fingerprint("", path)
	want.Path = ""
	os.WriteFile(path, []byte("m,x\n1,2\n"), 0o644)
	got, ok := tab.Source()
	if !ok || got != want {
		t.Fatalf("source %+v, %v; want %+v", got, ok, want)
	}
	if _, ok := tab.Select([]int{0}).Source(); ok {
		t.Fatal("a selection of rows claims the file's source")
	}
	if _, ok := tab.WithFloats(map[string][]float64{"x": make([]float64, tab.Len())}).Source(); ok {
		t.Fatal("a table with a column replaced claims the file's source")
	}
	if in := FingerprintOf("", "", []byte(body)); in != want {
		t.Fatalf("FingerprintOf %+v, want %+v", in, want)
	}
	mem, _ := ParseCSV("m.csv", []byte(body))
	if _, ok := mem.Source(); ok {
		t.Fatal("a table parsed from memory has a source")
	}
}
