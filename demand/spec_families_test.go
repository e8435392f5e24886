package demand

import (
	"strings"
	"testing"
)

// TestFamilySpecErrors: each misuse of the model-family keys is refused
// with a message that names the key and says what to write instead.
func TestFamilySpecErrors(t *testing.T) {
	base := `[data]
products = "p.csv"
[demand]
linear = ["1", "price", "x1"]
random = ["price", "x1"]
`
	tests := []struct{ name, extra, want string }{
		{"nesting value", `nesting = "each"`, `nesting "each": use "all"`},
		{"nesting without nests", `nesting = "by-nest"`, `needs [demand] nests`},
		{"nests on the share column", `nests = "share"`, `is the market, share or price column`},
		{"price distribution value", `price_distribution = "gamma"`, `price_distribution "gamma": use "normal"`},
		{"covariance value", `random_covariance = "unstructured"`, `random_covariance "unstructured": use "diagonal"`},
		{"start_rho without nests", "[estimation]\nstart_rho = 0.5", `start_rho is for a nested logit`},
		{"start_rho out of range", "nests = \"g\"\n[estimation]\nstart_rho = 1.2", `start_rho = 1.2: a nesting parameter is a number in [0, 1)`},
		{"start_rho table without by-nest", "nests = \"g\"\n[estimation]\nstart_rho = { a = 0.3 }", `not "by-nest": give one number`},
		{"start_rho table entry", "nests = \"g\"\nnesting = \"by-nest\"\n[estimation]\nstart_rho = { a = 0.3, b = \"x\" }", `start_rho for nest "b" = x`},
		{"start_cholesky without full", "[estimation]\nstart_cholesky = { x1 = { price = 0.2 } }", `start_cholesky is for random_covariance = "full"`},
		{"start_cholesky above the diagonal", "random_covariance = \"full\"\n[estimation]\nstart_cholesky = { price = { x1 = 0.2 } }", `price × x1 is above the diagonal`},
		{"start_cholesky unknown row", "random_covariance = \"full\"\n[estimation]\nstart_cholesky = { x2 = { price = 0.2 } }", `row "x2", which is not in [demand] random`},
		{"start_cholesky negative diagonal", "random_covariance = \"full\"\n[estimation]\nstart_cholesky = { x1 = { x1 = -1 } }", `x1 × x1 must be ≥ 0`},
		{"start_price_location without lognormal", "[estimation]\nstart_price_location = 0.5", `start_price_location is for price_distribution = "lognormal"`},
		{"lognormal with optimal instruments", "price_distribution = \"lognormal\"\n[instruments]\ngenerate = [\"optimal\"]", `"optimal" is not available with price_distribution = "lognormal"`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ParseSpec("spec.toml", []byte(base+tc.extra+"\n"))
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %v, want one containing %q", err, tc.want)
			}
		})
	}
	lognormalAlone := "[data]\nproducts = \"p.csv\"\n[demand]\nlinear = [\"price\"]\nprice_distribution = \"lognormal\"\n"
	if _, err := ParseSpec("spec.toml", []byte(lognormalAlone)); err == nil || !strings.Contains(err.Error(), "needs another column") {
		t.Errorf("log-normal price as the only linear column: %v", err)
	}
	full := base + "random_covariance = \"full\"\nnests = \"g\"\nnesting = \"by-nest\"\nprice_distribution = \"lognormal\"\n[estimation]\nstart_rho = { a = 0.3, b = 0 }\nstart_cholesky = { x1 = { price = 0.2, x1 = 1 } }\nstart_price_location = 0.5\n"
	if _, err := ParseSpec("spec.toml", []byte(full)); err != nil {
		t.Errorf("a valid spec of every family: %v", err)
	}
}
