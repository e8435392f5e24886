package demand

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"rcdemand/contraction"
)

// writeBenchData writes a products and an agents table of T markets × J
// products × I normal draws with random coefficients on the constant, price
// and x1 (σ = 1, 0.3, 1), shares computed from the model, fixed seed, and
// returns the spec path.
func writeBenchData(tb testing.TB, T, J, I int) string {
	tb.Helper()
	dir := tb.TempDir()
	rng := rand.New(rand.NewPCG(42, 42))
	theta := []float64{1, 0.3, 1}
	var pb, ab bytes.Buffer
	pb.WriteString("market,product,firm,share,price,x1,x2,z1,z2,z3,z4\n")
	ab.WriteString("market,weight,nu0,nu1,nu2\n")
	for t := 0; t < T; t++ {
		x2 := make([]float64, J*3)
		delta := make([]float64, J)
		rows := make([][]float64, J)
		for j := 0; j < J; j++ {
			x1, xx := rng.Float64()*2-1, rng.Float64()*2-1
			z := []float64{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}
			xi := 0.3 * rng.NormFloat64()
			price := 2 + 0.4*z[0] + 0.2*z[1] + 0.2*x1 + 0.5*xi + 0.1*rng.NormFloat64()
			delta[j] = -1.7 - 1.0*price + 1.0*x1 + 0.5*xx + xi
			x2[j*3], x2[j*3+1], x2[j*3+2] = 1, price, x1
			rows[j] = []float64{price, x1, xx, z[0], z[1], z[2], z[3]}
		}
		// One market's share model: σ_k on column k with taste draws ν_k.
		p := &contraction.Problem{K2: 3, X2: x2, LogShare: make([]float64, J), PriceCol: -1,
			Products: []contraction.Span{{Start: 0, End: J}}, Agents: []contraction.Span{{Start: 0, End: I}},
			Weight: make([]float64, I), Vars: [][]float64{make([]float64, I), make([]float64, I), make([]float64, I)}}
		for k := range p.Vars {
			p.Params = append(p.Params, contraction.Param{Col: k, Var: k})
		}
		for i := 0; i < I; i++ {
			p.Weight[i] = 1 / float64(I)
			nu := []float64{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}
			fmt.Fprintf(&ab, "%d,%v,%v,%v,%v\n", t, p.Weight[i], nu[0], nu[1], nu[2])
			for k := range nu {
				p.Vars[k][i] = nu[k]
			}
		}
		w := p.NewWorker()
		w.Set(0, theta)
		s := make([]float64, J)
		w.Shares(delta, s)
		for j := 0; j < J; j++ {
			r := rows[j]
			fmt.Fprintf(&pb, "%d,%d,%d,%v,%v,%v,%v,%v,%v,%v,%v\n", t, j, j%5, s[j], r[0], r[1], r[2], r[3], r[4], r[5], r[6])
		}
	}
	os.WriteFile(filepath.Join(dir, "products.csv"), pb.Bytes(), 0o644)
	os.WriteFile(filepath.Join(dir, "agents.csv"), ab.Bytes(), 0o644)
	spec := `[data]
products = "products.csv"
agents = "agents.csv"
[demand]
linear = ["1", "price", "x1", "x2"]
random = ["1", "price", "x1"]
[instruments]
excluded = ["z1", "z2", "z3", "z4"]
generate = ["rival-sums"]
[agents]
tastes = { "1" = "nu0", price = "nu1", x1 = "nu2" }
`
	path := filepath.Join(dir, "spec.toml")
	os.WriteFile(path, []byte(spec), 0o644)
	return path
}

// BenchmarkObjective is one evaluation of the GMM objective and its analytic
// gradient (inversion of every market, Jacobians, concentrated β) on 500
// markets × 20 products × 500 draws with 3 random coefficients. Each
// evaluation starts the inversion from the logit inversion.
func BenchmarkObjective(b *testing.B) {
	spec, err := ReadSpec(writeBenchData(b, 500, 20, 500))
	if err != nil {
		b.Fatal(err)
	}
	m, err := Load(spec)
	if err != nil {
		b.Fatal(err)
	}
	iv, err := NewIV(m.X1, m.Z, m.X1Names, m.ZNames)
	if err != nil {
		b.Fatal(err)
	}
	W, _ := iv.InitialWeight()
	iv.SetWeight(W)
	o, err := newObjective(m, iv, SettingsOf(spec), Monitor{}, nil)
	if err != nil {
		b.Fatal(err)
	}
	x := []float64{1, 0.3, 1}
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		o.solver.Reset()
		o.last = nil // a fresh evaluation every time
		if pt := o.at(x, true); !pt.ok() {
			b.Fatal("inversion failed")
		}
	}
	b.ReportMetric(float64(b.Elapsed().Milliseconds())/float64(b.N), "ms/evaluation")
}
