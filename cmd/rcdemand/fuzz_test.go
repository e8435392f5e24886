package main

import (
	"os"
	"path/filepath"
	"testing"

	"rcdemand/data"
	"rcdemand/demand"
)

// The fuzz targets check that no input makes the readers panic; their seed
// corpora are the project's own test files.

func FuzzCSV(f *testing.F) {
	for _, p := range []string{"../../testdata/synthetic-small/products.csv", "demodata/products.csv"} {
		if raw, err := os.ReadFile(p); err == nil {
			f.Add(raw[:min(len(raw), 2000)])
		}
	}
	f.Add([]byte("market,product,firm,share,price\n1,a,F,0.2,1\n"))
	f.Add([]byte("\xef\xbb\xbfa;b\n1;2\n"))
	f.Fuzz(func(t *testing.T, raw []byte) {
		tab, err := data.ParseCSV("fuzz.csv", raw)
		if err != nil {
			return
		}
		data.NewProducts(tab, data.Columns{Market: "market", Product: "product", Firm: "firm", Share: "share", Price: "price"}, nil)
	})
}

func FuzzSpec(f *testing.F) {
	for _, p := range []string{"../../testdata/synthetic-small/spec.toml", "demodata/spec.toml"} {
		if raw, err := os.ReadFile(p); err == nil {
			f.Add(raw)
		}
	}
	f.Add([]byte("[data]\nproducts = \"p.csv\"\n[demand]\nlinear = [\"1\"]\n"))
	f.Add([]byte("[data]\nproducts = \"p.csv\"\n[demand]\nlinear = [\"1\", \"price\"]\nrandom = [\"price\", \"x\"]\nnests = \"g\"\nnesting = \"by-nest\"\n" +
		"price_distribution = \"lognormal\"\nrandom_covariance = \"full\"\n[estimation]\nstart_rho = { a = 0.3 }\nstart_cholesky = { x = { price = 0.1 } }\nstart_price_location = 0.5\n"))
	f.Fuzz(func(t *testing.T, raw []byte) {
		demand.ParseSpec(filepath.Join(t.TempDir(), "fuzz.toml"), raw)
	})
}

func FuzzResults(f *testing.F) {
	f.Add([]byte(`{"schema": "rcdemand.results.v1", "spec_file": "s.toml", "beta": [{"name": "price", "value": -1, "se": 0.1}], "covariance": {"names": ["price"], "values": [[0.01]]}}`))
	f.Add([]byte(`{"schema": "rcdemand.results.v1", "spec_file": "s.toml", "beta": [{"name": "1", "value": 1, "se": 0.1}, {"name": "price", "value": 0.5, "se": 0.1, "nonlinear": true}], "rho": [{"name": "all", "value": 0.5, "se": null}], "cholesky": [{"row": "x", "column": "x", "value": 1, "se": 0.2}], "covariance": {"names": [], "values": []}}`))
	f.Add([]byte(`{"schema": "other"}`))
	f.Add([]byte(`[1, 2`))
	f.Fuzz(func(t *testing.T, raw []byte) {
		demand.ParseResults("fuzz.json", raw)
	})
}
