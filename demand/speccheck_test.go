package demand

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

const products = "market,product,firm,share,price,x,z\n1,a,F,0.2,1.5,0.1,0.3\n1,b,G,0.3,2.0,0.7,0.1\n2,a,F,0.25,1.4,0.1,0.2\n2,b,G,0.2,1.9,0.7,0.8\n"

// TestSpecChecks: every value of a spec is checked, used or not, and the
// messages name the real problem.
func TestSpecChecks(t *testing.T) {
	base := "[data]\nproducts = \"p.csv\"\n[demand]\nlinear = [\"1\", \"price\", \"x\"]\n"
	tests := []struct{ name, spec, want string }{
		{"unknown rule, plain logit", base + "[integration]\nrule = \"voodoo\"\n", `rule "voodoo"`},
		{"no draws, plain logit", base + "[integration]\ndraws = -1\n", "draws, nodes and level"},
		{"tastes without agents", base + "random = [\"x\"]\n[agents]\ntastes = { x = \"nu\" }\n", "[data] agents is not"},
		{"tastes of a fixed column", strings.Replace(base, "[demand]", "[demand]\nrandom = [\"x\"]", 1) + "[agents]\ntastes = { price = \"nu\" }\n", `names "price"`},
		{"negative iterations", base + "[estimation]\nmax_iterations = -5\n", "max_iterations"},
		{"generate twice", base + "[instruments]\ngenerate = [\"hausman\", \"hausman\"]\n", "twice"},
		{"a list given as text", strings.Replace(base, `["1", "price", "x"]`, `"price"`, 1), `line 4: "demand.linear" takes a list, not text`},
		{"a truth file", "markets = 3\n[beta]\nprice = -1\n", "truth file"},
		// The TOML decoder drops a value that is not a table where a table
		// is expected; these must not read as "not given".
		{"a table given as a number", strings.Replace(base, "[demand]", "[demand]\ninteractions = 3", 1), `"demand.interactions" takes a table, not a whole number`},
		{"a table given as text", base + "[agents]\ntastes = \"nu\"\n", `"agents.tastes" takes a table, not text`},
		{"an inner table given as a list", base + "random = [\"x\"]\n[estimation]\nstart_cholesky = { x = [1] }\n", `"estimation.start_cholesky.x" takes a table, not a list`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ParseSpec("s.toml", []byte(tc.spec))
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("error %v, want %q", err, tc.want)
			}
		})
	}
	// Tables made implicitly, by dotted keys or by the header of a table
	// inside them, are tables.
	agents := strings.Replace(base, "[data]\n", "[data]\nagents = \"a.csv\"\n", 1)
	for _, spec := range []string{
		agents + "random = [\"x\"]\n[agents]\ntastes.x = \"nu\"\n",
		agents + "random = [\"x\"]\ndemographics = [\"inc\"]\ninteractions.x = [\"inc\"]\n",
		agents + "random = [\"x\"]\n[agents]\ntastes = { x = \"nu\" }\n[estimation.start_cholesky.x]\nx = 1.0\n",
		agents + "random = [\"x\"]\n[agents]\ntastes = { x = \"nu\" }\n[estimation]\nstart_cholesky.x.x = 1.0\n",
	} {
		if _, err := ParseSpec("s.toml", []byte(spec)); err != nil && strings.Contains(err.Error(), "takes a table") {
			t.Errorf("%q: %v", spec, err)
		}
	}
}

// TestLoadMessages: the errors of Load that need the data: a misspelt
// column role, a path relative to the working directory, a column the fixed
// effects absorb.
func TestLoadMessages(t *testing.T) {
	dir := t.TempDir()
	os.WriteFile(filepath.Join(dir, "p.csv"), []byte(products), 0o644)
	os.MkdirAll(filepath.Join(dir, "specs"), 0o755)
	wd, _ := os.Getwd()
	defer os.Chdir(wd)
	os.Chdir(dir)
	tests := []struct{ name, file, spec, want string }{
		{"misspelt price", "s.toml", "[data]\nproducts = \"p.csv\"\n[columns]\nprice = \"unitprice\"\n[demand]\nlinear = [\"1\", \"unitprice\"]\n",
			`column "unitprice": no such column (columns are: market, product, firm, share, price, x, z); it is [columns] price in s.toml`},
		{"misspelt interaction column", "s.toml", "[data]\nproducts = \"p.csv\"\nagents = \"a.csv\"\n[demand]\nlinear = [\"1\", \"price\"]\ndemographics = [\"inc\"]\n[demand.interactions]\nprize = [\"inc\"]\n",
			`column "prize": no such column (columns are: market, product, firm, share, price, x, z); [demand] interactions names it in s.toml`},
		{"misspelt instrument", "s.toml", "[data]\nproducts = \"p.csv\"\n[demand]\nlinear = [\"1\", \"price\"]\n[instruments]\nexcluded = [\"zz\"]\n",
			`column "zz": no such column (columns are: market, product, firm, share, price, x, z); [instruments] excluded names it in s.toml`},
		{"price not linear", "s.toml", "[data]\nproducts = \"p.csv\"\n[demand]\nlinear = [\"1\", \"x\"]\n", `[demand] linear must include the price column "price"`},
		{"relative to the working directory", "specs/s.toml", "[data]\nproducts = \"p.csv\"\n[demand]\nlinear = [\"1\", \"price\"]\n", `write products = "../p.csv"`},
		{"absorbed column", "s.toml", "[data]\nproducts = \"p.csv\"\n[demand]\nlinear = [\"price\", \"x\"]\nabsorb = [\"product\"]\n[instruments]\nexcluded = [\"z\"]\n",
			`[demand] linear column "x" is collinear with the fixed effects of [demand] absorb = ["product"]`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			os.WriteFile(tc.file, []byte(tc.spec), 0o644)
			spec, err := ReadSpec(tc.file)
			if err == nil {
				_, err = Load(spec)
			}
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("error %v, want %q", err, tc.want)
			}
		})
	}
	var se *SpecError
	_, err := ParseSpec("t.toml", []byte("markets = 3\n[beta]\nprice = -1\n"))
	if !errors.As(err, &se) {
		t.Errorf("a truth file as spec: %T", err)
	}
}

// TestTasteNotes: two random coefficients drawn from one taste column, and
// a demographic no interaction uses, are noted; a spec without either has
// no such note.
func TestTasteNotes(t *testing.T) {
	const head = "[data]\nproducts = \"p.csv\"\nagents = \"a.csv\"\n[demand]\nlinear = [\"1\", \"price\", \"x\"]\nrandom = [\"price\", \"x\"]\n"
	for _, tc := range []struct {
		spec string
		want []string
	}{
		{head + "demographics = [\"inc\", \"age\"]\ninteractions = { price = [\"inc\"] }\n[agents]\ntastes = { price = \"nu\", x = \"nu\" }\n",
			[]string{`[agents] tastes: the random coefficients of price, x all take the draws of "nu", so they are perfectly correlated`,
				`[demand] demographics: "age" enters no interaction, so it has no effect`}},
		{head + "demographics = [\"inc\"]\ninteractions = { x = [\"inc\"] }\n[agents]\ntastes = { price = \"nu_p\", x = \"nu_x\" }\n", nil},
	} {
		spec, err := ParseSpec("s.toml", []byte(tc.spec))
		if err != nil {
			t.Fatal(err)
		}
		if got := spec.tasteNotes(); strings.Join(got, "|") != strings.Join(tc.want, "|") {
			t.Errorf("notes %q, want %q", got, tc.want)
		}
	}
}
