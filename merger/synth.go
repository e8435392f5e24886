package merger

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"sort"

	"github.com/BurntSushi/toml"

	"rcdemand/data"
	"rcdemand/demand"
)

// Truth is the data-generating process of Synthesize, read from a TOML file.
type Truth struct {
	Markets  int    `toml:"markets"`
	Products int    `toml:"products"` // per market
	Firms    int    `toml:"firms"`    // product j belongs to firm j mod firms
	Agents   int    `toml:"agents"`   // per market, equal weights
	Seed     uint64 `toml:"seed"`

	FirmNames    []string `toml:"firm_names"`
	ProductNames []string `toml:"product_names"`

	Beta  map[string]float64            `toml:"beta"`
	Sigma map[string]float64            `toml:"sigma"`
	Pi    map[string]map[string]float64 `toml:"pi"`

	Characteristics map[string][2]float64 `toml:"characteristics"` // column → [mean, sd] of a normal
	Demographics    map[string][2]float64 `toml:"demographics"`

	Cost struct {
		Constant        float64            `toml:"constant"`
		Shifters        map[string]float64 `toml:"shifters"`        // standard normal shifters and their coefficients
		Characteristics map[string]float64 `toml:"characteristics"` // coefficients on characteristics
	} `toml:"cost"`
	Shocks struct {
		XiSD        float64 `toml:"xi_sd"`
		OmegaSD     float64 `toml:"omega_sd"`
		Correlation float64 `toml:"correlation"`
	} `toml:"shocks"`
}

// ReadTruth parses a truth file, rejecting unknown keys.
func ReadTruth(path string) (*Truth, error) {
	raw, err := os.ReadFile(path)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return nil, fmt.Errorf("%s: file does not exist", path)
		}
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	var t Truth
	md, err := toml.Decode(string(raw), &t)
	if err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	if und := md.Undecoded(); len(und) > 0 {
		return nil, fmt.Errorf("%s: unknown key %q", path, und[0].String())
	}
	if t.Markets < 1 || t.Products < 1 || t.Firms < 1 || t.Agents < 1 {
		return nil, fmt.Errorf("%s: markets, products, firms and agents must be positive", path)
	}
	return &t, nil
}

// Synthetic is a generated data set.
type Synthetic struct {
	Products *data.Frame
	Agents   *data.Frame
	Truth    *data.Frame // per row: xi, omega, mc, markup, delta
	MaxFOC   float64
	MaxIter  int
}

// Synthesize draws characteristics, cost shifters, demand and cost shocks and
// agents, and solves each market for Bertrand–Nash prices under the true
// model of spec and truth. Column names follow the spec. Closing stop (which
// may be nil) ends the work early with ErrStopped.
func Synthesize(spec *demand.Spec, tr *Truth, seed uint64, stop <-chan struct{}) (*Synthetic, error) {
	d := spec.Demand
	price := spec.Columns.Price
	rng := rand.New(rand.NewPCG(seed, 0x5717))
	J, T, I := tr.Products, tr.Markets, tr.Agents
	// Columns to draw: every characteristic of X1 or X2 but the constant and price.
	var chars []string
	for _, c := range append(append([]string(nil), d.Linear...), d.Random...) {
		if c != "1" && c != price && !containsStr(chars, c) {
			chars = append(chars, c)
		}
	}
	for _, c := range chars {
		if _, ok := tr.Characteristics[c]; !ok {
			return nil, fmt.Errorf("truth: [characteristics] has no distribution for %q", c)
		}
	}
	for _, c := range d.Linear {
		if _, ok := tr.Beta[c]; !ok {
			return nil, fmt.Errorf("truth: [beta] has no value for linear column %q", c)
		}
	}
	for _, c := range d.Random {
		if _, ok := tr.Sigma[c]; !ok {
			return nil, fmt.Errorf("truth: [sigma] has no value for random column %q", c)
		}
	}
	for _, dm := range d.Demographics {
		if _, ok := tr.Demographics[dm]; !ok {
			return nil, fmt.Errorf("truth: [demographics] has no distribution for %q", dm)
		}
	}
	shifters := sortedKeys(tr.Cost.Shifters)
	for _, z := range spec.Instruments.Excluded {
		if !containsStr(shifters, z) {
			return nil, fmt.Errorf("spec: excluded instrument %q is not a cost shifter of the truth file (synth writes %v; use [instruments] generate for built instruments)", z, shifters)
		}
	}
	firmName := func(f int) string {
		if f < len(tr.FirmNames) {
			return tr.FirmNames[f]
		}
		return fmt.Sprintf("F%d", f+1)
	}
	prodName := func(j int) string {
		if j < len(tr.ProductNames) {
			return tr.ProductNames[j]
		}
		return fmt.Sprintf("P%02d", j+1)
	}
	// X2 layout as the estimator builds it: random columns, then interaction-only columns.
	x2Names := append([]string(nil), d.Random...)
	for c := range tr.Pi {
		if !containsStr(x2Names, c) {
			x2Names = append(x2Names, c)
		}
	}
	sort.Strings(x2Names[len(d.Random):])
	K2 := len(x2Names)
	priceX2 := -1
	for k, c := range x2Names {
		if c == price {
			priceX2 = k
		}
	}
	N := T * J
	out := &Synthetic{}
	mkt, prod, firm := make([]string, N), make([]string, N), make([]string, N)
	share, prices := make([]float64, N), make([]float64, N)
	charVals := map[string][]float64{}
	for _, c := range chars {
		charVals[c] = make([]float64, N)
	}
	shiftVals := map[string][]float64{}
	for _, z := range shifters {
		shiftVals[z] = make([]float64, N)
	}
	xi, omega, mc, markup, deltaOut := make([]float64, N), make([]float64, N), make([]float64, N), make([]float64, N), make([]float64, N)
	tasteCols := map[string]string{}
	for _, c := range d.Random {
		name := spec.Agents.Tastes[c]
		if name == "" {
			name = "nu_" + safeName(c)
		}
		tasteCols[c] = name
	}
	agMkt := make([]string, T*I)
	agW := make([]float64, T*I)
	agNu := map[string][]float64{}
	for _, c := range d.Random {
		agNu[c] = make([]float64, T*I)
	}
	agDem := map[string][]float64{}
	for _, dm := range d.Demographics {
		agDem[dm] = make([]float64, T*I)
	}
	rho := tr.Shocks.Correlation
	for t := 0; t < T; t++ {
		select {
		case <-stop:
			return nil, ErrStopped
		default:
		}
		id := fmt.Sprint(t + 1)
		owner := make([]int, J)
		for j := 0; j < J; j++ {
			n := t*J + j
			mkt[n], prod[n] = id, prodName(j)
			owner[j] = j % tr.Firms
			firm[n] = firmName(owner[j])
			for _, c := range chars {
				md := tr.Characteristics[c]
				charVals[c][n] = md[0] + md[1]*rng.NormFloat64()
			}
			for _, z := range shifters {
				shiftVals[z][n] = rng.NormFloat64()
			}
			e1, e2 := rng.NormFloat64(), rng.NormFloat64()
			xi[n] = tr.Shocks.XiSD * e1
			omega[n] = tr.Shocks.OmegaSD * (rho*e1 + math.Sqrt(1-rho*rho)*e2)
			lc := tr.Cost.Constant + omega[n]
			for _, z := range shifters {
				lc += tr.Cost.Shifters[z] * shiftVals[z][n]
			}
			for _, c := range sortedKeys(tr.Cost.Characteristics) {
				g := tr.Cost.Characteristics[c]
				v, ok := charVals[c]
				if !ok {
					return nil, fmt.Errorf("truth: [cost] characteristics names %q, which is not a drawn characteristic", c)
				}
				lc += g * v[n]
			}
			mc[n] = math.Exp(lc)
		}
		// Agents.
		tastes := make([]float64, I*K2)
		alpha := make([]float64, I)
		weight := make([]float64, I)
		for i := 0; i < I; i++ {
			a := t*I + i
			agMkt[a], agW[a] = id, 1/float64(I)
			weight[i] = agW[a]
			for _, c := range d.Random {
				agNu[c][a] = rng.NormFloat64()
			}
			for _, dm := range d.Demographics {
				md := tr.Demographics[dm]
				agDem[dm][a] = md[0] + md[1]*rng.NormFloat64()
			}
			for k, c := range x2Names {
				v := 0.0
				if s, ok := tr.Sigma[c]; ok && containsStr(d.Random, c) {
					v += s * agNu[c][a]
				}
				for _, dm := range sortedKeys(tr.Pi[c]) {
					p := tr.Pi[c][dm]
					dv, ok := agDem[dm]
					if !ok {
						return nil, fmt.Errorf("truth: [pi] %s × %s: %q is not in [demand] demographics", c, dm, dm)
					}
					v += p * dv[a]
				}
				tastes[i*K2+k] = v
			}
			alpha[i] = tr.Beta[price]
			if priceX2 >= 0 {
				alpha[i] += tastes[i*K2+priceX2]
			}
		}
		// Mean utilities and characteristics at starting prices p0 = 1.5·mc.
		p0 := make([]float64, J)
		delta0 := make([]float64, J)
		x2 := make([]float64, J*K2)
		value := func(c string, n, j int) float64 {
			switch c {
			case "1":
				return 1
			case price:
				return p0[j]
			}
			return charVals[c][n]
		}
		for j := 0; j < J; j++ {
			n := t*J + j
			p0[j] = 1.5 * mc[n]
		}
		for j := 0; j < J; j++ {
			n := t*J + j
			delta0[j] = xi[n]
			for _, c := range d.Linear {
				delta0[j] += tr.Beta[c] * value(c, n, j)
			}
			for k, c := range x2Names {
				x2[j*K2+k] = value(c, n, j)
			}
		}
		mk := NewMarketFrom(MarketInput{Price0: p0, Delta0: delta0, BetaP: tr.Beta[price], X2: x2, K2: K2,
			PriceX2: priceX2, Tastes: tastes, Weight: weight, Alpha: alpha})
		sol := mk.Solve(mc[t*J:(t+1)*J], owner, p0, 1e-13)
		if !sol.Converged {
			return nil, fmt.Errorf("market %s: the Bertrand–Nash prices did not converge (FOC residual %.3g); try a larger price coefficient or smaller costs", id, sol.Residual)
		}
		out.MaxFOC = math.Max(out.MaxFOC, sol.Residual)
		out.MaxIter = max(out.MaxIter, sol.Iterations)
		for j := 0; j < J; j++ {
			n := t*J + j
			prices[n] = sol.Price[j]
			share[n] = sol.Shares[j]
			markup[n] = sol.Price[j] - mc[n]
			deltaOut[n] = delta0[j] + tr.Beta[price]*(sol.Price[j]-p0[j])
		}
	}
	pf := &data.Frame{}
	pf.Add(spec.Columns.Market, mkt)
	pf.Add(spec.Columns.Product, prod)
	pf.Add(spec.Columns.Firm, firm)
	pf.Add(spec.Columns.Share, share)
	pf.Add(price, prices)
	for _, c := range chars {
		pf.Add(c, charVals[c])
	}
	for _, z := range shifters {
		pf.Add(z, shiftVals[z])
	}
	out.Products = pf
	af := &data.Frame{}
	af.Add(spec.Agents.Market, agMkt)
	af.Add(spec.Agents.Weight, agW)
	for _, c := range d.Random {
		af.Add(tasteCols[c], agNu[c])
	}
	for _, dm := range d.Demographics {
		af.Add(dm, agDem[dm])
	}
	out.Agents = af
	tf := &data.Frame{}
	tf.Add("market", mkt)
	tf.Add("product", prod)
	tf.Add("xi", xi)
	tf.Add("omega", omega)
	tf.Add("mc", mc)
	tf.Add("markup", markup)
	tf.Add("delta", deltaOut)
	out.Truth = tf
	// Record the taste columns in the spec so it can be written beside the data.
	spec.Agents.Tastes = tasteCols
	return out, nil
}

func containsStr(xs []string, x string) bool {
	for _, y := range xs {
		if y == x {
			return true
		}
	}
	return false
}

func sortedKeys(m map[string]float64) []string {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	return keys
}

func safeName(c string) string {
	if c == "1" {
		return "const"
	}
	return c
}

// Write writes the synthetic tables (products, agents, truth_products, in
// format "csv" or "parquet"), a copy of spec pointing at them, and truth.json
// to dir. inputs are refused as output paths.
func (syn *Synthetic) Write(dir, format string, spec *demand.Spec, tr *Truth, seed uint64, inputs []string) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	ext := "." + format
	for name, f := range map[string]*data.Frame{"products": syn.Products, "agents": syn.Agents, "truth_products": syn.Truth} {
		if err := data.WriteFrame(filepath.Join(dir, name+ext), inputs, f); err != nil {
			return err
		}
	}
	out := *spec
	out.Data.Products = "products" + ext
	out.Data.Agents = "agents" + ext
	var buf bytes.Buffer
	buf.WriteString("# written by rcdemand synth: the spec of the model that generated products" + ext + "\n")
	if err := toml.NewEncoder(&buf).Encode(out); err != nil {
		return err
	}
	if err := data.WriteAtomic(filepath.Join(dir, "spec.toml"), inputs, func(w io.Writer) error { _, err := w.Write(buf.Bytes()); return err }); err != nil {
		return err
	}
	record := map[string]any{"schema": "rcdemand.truth.v1", "seed": seed, "truth": tr,
		"equilibrium": map[string]any{"max_foc_residual": syn.MaxFOC, "max_iterations": syn.MaxIter}}
	return data.WriteJSON(filepath.Join(dir, "truth.json"), inputs, record)
}
