package merger

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"rcdemand/data"
)

// fourFirms is two markets of four firms' products, worked by hand below.
func fourFirms(t *testing.T) *data.Products {
	t.Helper()
	tab, err := data.ParseCSV("p.csv", []byte("market,product,firm,share,price\n"+
		"1,a1,A,0.2,1\n1,b1,\"B, Inc.\",0.1,1\n1,c1,C,0.1,1\n1,b2,\"B, Inc.\",0.1,1\n"+
		"2,a1,A,0.1,1\n2,b1,\"B, Inc.\",0.2,1\n2,d1,D,0.1,1\n"))
	if err != nil {
		t.Fatal(err)
	}
	p, err := data.NewProducts(tab, data.Columns{Market: "market", Product: "product", Firm: "firm", Share: "share", Price: "price"}, nil)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

func ownershipFile(t *testing.T, content string) *Ownership {
	t.Helper()
	path := filepath.Join(t.TempDir(), "own.csv")
	os.WriteFile(path, []byte(content), 0o644)
	o, err := ReadOwnership(path)
	if err != nil {
		t.Fatal(err)
	}
	return o
}

// TestResolveOwners: owners after a scenario, the parties and the parties'
// products, worked by hand.
func TestResolveOwners(t *testing.T) {
	p := fourFirms(t)
	tests := []struct {
		name    string
		sc      Scenario
		post    string // owner after, per row
		parties string
		merging string // per row
	}{
		{"combine", Scenario{Combine: []string{"A", "C"}}, "A B, Inc. A B, Inc. A B, Inc. D", "A", "1010100"},
		{"comma in a name", Scenario{Ownership: ownershipFile(t, "product,firm_after\nb1,A\n b2 , A \n")}, "A A C A A A D", "A", "1101110"},
		{"one market", Scenario{Ownership: ownershipFile(t, "market,product,firm_after\n2,b1,D\n")}, "A B, Inc. C B, Inc. A D D", "D", "0000011"},
		{"merger and divestiture", Scenario{Combine: []string{"A", "B, Inc."}, Ownership: ownershipFile(t, "product,firm_after\nb2,C\n")}, "A A C C A A D", "A C", "1111110"},
		{"a new owner", Scenario{Ownership: ownershipFile(t, "product,firm_after\nc1,E\n")}, "A B, Inc. E B, Inc. A B, Inc. D", "E", "0010000"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			o, err := resolveOwners(p, tc.sc)
			if err != nil {
				t.Fatal(err)
			}
			var post []string
			merging := ""
			for n := range o.post {
				post = append(post, o.names[o.post[n]])
				merging += map[bool]string{true: "1", false: "0"}[o.merging[n]]
			}
			if got := strings.Join(post, " "); got != tc.post {
				t.Errorf("owners after %q, want %q", got, tc.post)
			}
			if got := strings.Join(o.parties, " "); got != tc.parties || merging != tc.merging {
				t.Errorf("parties %q merging %s, want %q %s", got, merging, tc.parties, tc.merging)
			}
		})
	}
}

// TestOwnershipErrors: each mistake names the file, the data row and the
// column.
func TestOwnershipErrors(t *testing.T) {
	p := fourFirms(t)
	tests := []struct{ name, file, want string }{
		{"unknown product", "product,firm_after\nb1,A\nz9,A\n", `own.csv: data row 2 (line 3), column "product": product "z9"`},
		{"unknown market", "market,product,firm_after\n7,b1,A\n", `column "market": market "7"`},
		{"two owners", "product,firm_after\nb1,A\nb1,C\n", `column "firm_after": product "b1" in market "1" is given to "C" here and to "A" in data row 1`},
		{"no change", "product,firm_after\nb1,\"B, Inc.\"\n", "moves no product"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := resolveOwners(p, Scenario{Ownership: ownershipFile(t, tc.file)})
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("error %v, want %q", err, tc.want)
			}
		})
	}
}

// TestWelfareSummary: per-consumer changes are averaged, money is summed.
func TestWelfareSummary(t *testing.T) {
	r := &Result{Markets: []MarketRow{{CSChange: -0.1, PSChange: 0.05}, {CSChange: -0.3, PSChange: 0.01}}}
	w := welfare(r.Markets)
	if w.CSChangePerConsumerMean != -0.2 || w.CSChangeMoneyTotal != nil {
		t.Fatalf("without sizes: %+v", w)
	}
	setMoney(r, []float64{1000, 200})
	w = welfare(r.Markets)
	if *w.CSChangeMoneyTotal != -100-60 || *w.PSChangeMoneyTotal != 50+2 || *w.Consumers != 1200 {
		t.Fatalf("with sizes: cs %v ps %v consumers %v", *w.CSChangeMoneyTotal, *w.PSChangeMoneyTotal, *w.Consumers)
	}
}

// TestCombineSameFirmTwice: naming a firm twice in --combine is an error
// that says so; it used to end in a nil-pointer crash.
func TestCombineSameFirmTwice(t *testing.T) {
	p := fourFirms(t)
	firm := p.Firm[0]
	_, err := resolveOwners(p, Scenario{Combine: []string{firm, firm}})
	if err == nil || !strings.Contains(err.Error(), "twice") {
		t.Fatalf("error %v", err)
	}
}

// TestCombineFirmWithComma: --combine splits at commas, so "Harbor Roast,
// Inc." arrives as "Harbor Roast" and " Inc."; the error says why and
// points to an ownership file, which takes any name.
func TestCombineFirmWithComma(t *testing.T) {
	tab, err := data.ParseCSV("p.csv", []byte("market,product,firm,share,price\n"+
		"1,a,\"Harbor Roast, Inc.\",0.2,1\n1,b,Lumen,0.3,2\n"))
	if err != nil {
		t.Fatal(err)
	}
	p, err := data.NewProducts(tab, data.Columns{Market: "market", Product: "product", Firm: "firm", Share: "share", Price: "price"}, nil)
	if err != nil {
		t.Fatal(err)
	}
	_, err = resolveOwners(p, Scenario{Combine: []string{"Harbor Roast", "Inc.", "Lumen"}})
	if err == nil || !strings.Contains(err.Error(), `such as "Harbor Roast, Inc.", is named in an --ownership file instead`) {
		t.Fatalf("error %v", err)
	}
	if _, err = resolveOwners(p, Scenario{Combine: []string{"Harbor", "Lumen"}}); err == nil || !strings.Contains(err.Error(), "--ownership") {
		t.Fatalf("error %v", err)
	}
}
