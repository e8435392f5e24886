package main

import (
	"embed"
	"fmt"
	"html/template"
	"io"
	"strings"

	"github.com/spf13/cobra"

	"rcdemand/data"
	"rcdemand/demand"
	"rcdemand/instruments"
	"rcdemand/merger"
)

//go:embed templates/report.html
var reportFS embed.FS

var reportTemplate = template.Must(template.New("report.html").Funcs(template.FuncMap{
	"join": func(xs []string) string { return strings.Join(xs, ", ") },
}).ParseFS(reportFS, "templates/report.html"))

func init() { extraCommands = append(extraCommands, newReport) }

func newReport() *cobra.Command {
	var mergerPath, market, out string
	cmd := &cobra.Command{
		Use:   "report RESULTS.json --out report.html",
		Short: "Write a self-contained HTML report of the estimates (and of a merger)",
		Long: `report writes one HTML file with inline styles and figures (SVG) and no
network fetches: the model and data, the estimates with intervals, the
diagnostics in words, an elasticity heat map and diversion ratios for one
market, and, with --merger, price changes (with intervals when the merger was
run with --draws) and concentration before and after.`,
		Example: `  rcdemand report results.json --out report.html
  rcdemand report results.json --merger merger.json --market 7 --out report.html`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if out == "" {
				return fmt.Errorf("--out is required, e.g. --out report.html")
			}
			if err := writeReport(args[0], mergerPath, market, out); err != nil {
				return err
			}
			fmt.Fprintf(cmd.OutOrStdout(), "wrote %s\n", out)
			return nil
		},
	}
	cmd.Flags().StringVar(&mergerPath, "merger", "", "merger JSON written by rcdemand merger")
	cmd.Flags().StringVar(&market, "market", "", "market to show (default: the one with the most products)")
	cmd.Flags().StringVar(&out, "out", "", "HTML file to write (required)")
	return cmd
}

// writeReport renders the report of a results file (and a merger file) to out.
func writeReport(resultsPath, mergerPath, market, out string) error {
	res, fit, err := demand.LoadFitted(resultsPath)
	if err != nil {
		return err
	}
	var mr *merger.Result
	inputs := append(fit.Model.Inputs(), resultsPath)
	if mergerPath != "" {
		if mr, err = readMerger(mergerPath); err != nil {
			return err
		}
		inputs = append(inputs, mergerPath)
	}
	view, err := buildReport(res, fit, mr, market)
	if err != nil {
		return err
	}
	return data.WriteAtomic(out, inputs, func(w io.Writer) error { return reportTemplate.Execute(w, view) })
}

func readMerger(path string) (*merger.Result, error) {
	var r merger.Result
	if err := data.ReadJSON(path, merger.Schema, "merger", &r); err != nil {
		return nil, err
	}
	return &r, nil
}

type coefRow struct{ Group, Name, Est, SE, Lo, Hi string }

type figureView struct {
	SVG     template.HTML
	Caption string
}

type mergerView struct {
	Combine                             []string
	Into, CostChange                    string
	PriceMerging, PriceRivals, PriceAll string
	CS, Draws, Failed                   string
	Presumed, Markets                   int
	Rows                                []merger.MarketRow
	Figures                             []figureView
}

type reportView struct {
	Version, Spec, Consumers, CovarianceKind string
	Obs, Markets, MinJ, MaxJ, Steps          int
	Linear, Random, Interactions             []string
	Family                                   string
	Instruments                              []string
	Coefs                                    []coefRow
	FitLine, ConvergenceLine                 string
	Converged, WeakIV                        bool
	Diagnostics                              *demand.Diagnostics
	Market                                   string
	Figures                                  []figureView
	Merger                                   *mergerView
	Notes                                    []string
	Caution                                  string
}

func buildReport(res *demand.Results, fit *demand.Fitted, mr *merger.Result, marketID string) (*reportView, error) {
	m := fit.Model
	p := m.Products
	spec := m.Spec
	v := &reportView{Version: version, Spec: res.SpecFile, Obs: p.Len(), Markets: len(p.Markets), MinJ: 1 << 30,
		Linear: m.X1Names, Random: spec.Demand.Random, Instruments: m.ZNames, Steps: res.GMM.Steps,
		CovarianceKind: res.GMM.Covariance, Diagnostics: res.Diagnostics, Converged: res.Convergence.Converged,
		Notes: res.Notes, Caution: merger.Caution}
	for _, q := range m.Params {
		if q.Kind == demand.Pi {
			v.Interactions = append(v.Interactions, q.Column+" × "+q.Demographic)
		}
	}
	for _, mk := range p.Markets {
		v.MinJ, v.MaxJ = min(v.MinJ, mk.Len()), max(v.MaxJ, mk.Len())
	}
	v.Family = familyLine(m)
	switch {
	case len(m.Params) == 0:
		v.Consumers = "a representative logit consumer"
	case m.Agents != nil:
		v.Consumers = fmt.Sprintf("%d agents per market from %s", m.Problem.Agents[0].End-m.Problem.Agents[0].Start, m.Agents.File)
	default:
		v.Consumers = fmt.Sprintf("integration rule %s", spec.Integration.Rule)
	}
	v.Coefs = coefRows(res)
	if res.GMM.J != nil {
		v.FitLine = fmt.Sprintf("Hansen J = %.3f with %d degrees of freedom (p = %.3f); %d moments.", *res.GMM.J, res.GMM.JDF, *res.GMM.JPValue, res.GMM.Moments)
	} else {
		v.FitLine = fmt.Sprintf("One-step GMM objective %.4g; %d moments.", res.GMM.Objective, res.GMM.Moments)
	}
	c := res.Convergence
	if c.Converged {
		v.ConvergenceLine = fmt.Sprintf("The optimiser converged: gradient norm %.2g after %d iterations; %d inner failures.", c.GradientNorm, c.Iterations, c.InnerFailures)
	} else {
		v.ConvergenceLine = "The optimiser did not converge: " + c.Message + ". The estimates are the last point reached."
	}
	if d := res.Diagnostics; d != nil && d.FirstStage != nil {
		v.WeakIV = d.FirstStage.Strength == instruments.Weak
	}
	t, err := shownMarket(p, marketID)
	if err != nil {
		return nil, err
	}
	mk := p.Markets[t]
	v.Market = mk.ID
	names := p.Product[mk.Start:mk.End]
	hm, err := elasticityHeatMap(fit.Elasticities(t), names, mk.ID)
	if err != nil {
		return nil, err
	}
	v.Figures = append(v.Figures, figureView{hm, "Row j, column l: the percentage change in the share of j when the price of l rises by 1%. Own-price elasticities are on the diagonal."})
	// Diversion of the merging parties (or of every product without a merger file).
	var combine []string
	if mr != nil {
		combine = mr.Combine
	}
	dn, partner, rivals, outside := merger.PartyDiversion(fit, t, combine)
	if len(dn) > 0 {
		db, err := diversionBars(dn, partner, rivals, outside, mk.ID)
		if err != nil {
			return nil, err
		}
		caption := "Diversion ratios: the share of each product's lost sales, when its price rises, that goes to each destination."
		if mr == nil {
			caption += " Without a merger file every product's diversion to rivals is shown."
		}
		v.Figures = append(v.Figures, figureView{db, caption})
	}
	if mr != nil {
		mv, err := mergerReport(mr, mk.ID)
		if err != nil {
			return nil, err
		}
		v.Merger = mv
	}
	return v, nil
}

func mergerReport(mr *merger.Result, market string) (*mergerView, error) {
	s := mr.Summary
	mv := &mergerView{Combine: mr.Combine, Into: mr.Into, Rows: mr.Markets, Markets: len(mr.Markets), Presumed: s.MarketsPresumed,
		PriceMerging: fmt.Sprintf("%+.2f%%", s.PriceChangePctMerging), PriceRivals: fmt.Sprintf("%+.2f%%", s.PriceChangePctRivals),
		PriceAll: fmt.Sprintf("%+.2f%%", s.PriceChangePctAll), CS: fmt.Sprintf("%.5f", s.CSChangeTotal)}
	if mr.CostChange != 0 {
		mv.CostChange = fmt.Sprintf("%+.1f%%", 100*mr.CostChange)
	}
	if d := mr.Draws; d != nil {
		mv.Draws = fmt.Sprintf("%d of %d draws from the estimated asymptotic distribution kept (%.0f%%, seed %d)", d.Used, d.Requested, 100*d.UsedShare, d.Seed)
		if !d.Intervals {
			mv.Draws += "; " + d.Note
		}
	}
	if n := len(mr.FailedMarkets); n > 0 {
		mv.Failed = merger.FailureWarning(mr.FailedMarkets, len(mr.Markets), "post-merger equilibrium", "left out of the figures above")
	}
	var names []string
	var change, lo, hi []float64
	var merging []bool
	intervals := map[string]merger.Interval{}
	if mr.Draws != nil {
		for _, pd := range mr.Draws.Products {
			if pd.Market == market {
				intervals[pd.Product] = pd.PriceChangePct
			}
		}
	}
	for _, pr := range mr.Products {
		if pr.Market != market {
			continue
		}
		names = append(names, pr.Product)
		change = append(change, pr.PriceChangePct)
		merging = append(merging, pr.Merging)
		if iv, ok := intervals[pr.Product]; ok {
			lo, hi = append(lo, iv.Lo), append(hi, iv.Hi)
		}
	}
	if len(lo) != len(change) {
		lo, hi = nil, nil
	}
	if len(names) > 0 {
		pc, err := priceChanges(names, change, lo, hi, merging, market)
		if err != nil {
			return nil, err
		}
		mv.Figures = append(mv.Figures, figureView{pc, "Post-merger Bertrand–Nash price changes with marginal costs recovered from the pre-merger first-order conditions."})
	}
	var ids []string
	var pre, post []float64
	for _, r := range mr.Markets {
		ids, pre, post = append(ids, r.Market), append(pre, r.HHIPre), append(post, r.HHIPostFixed)
	}
	hb, err := hhiBars(ids, pre, post)
	if err != nil {
		return nil, err
	}
	mv.Figures = append(mv.Figures, figureView{hb, "HHI after combines the parties' pre-merger shares, as the 2023 US Merger Guidelines' structural presumption does; the dashed line marks 1,800."})
	return mv, nil
}

// coefRows lays out the estimates table: each parameter with its standard
// error and 95% interval, grouped by kind.
func coefRows(res *demand.Results) []coefRow {
	var rows []coefRow
	row := func(group, name string, c demand.Coef) coefRow {
		r := coefRow{Group: group, Name: name, Est: fmt.Sprintf("%.4f", c.Value), SE: "—", Lo: "—", Hi: "—"}
		if lo, hi, ok := c.Interval(); ok {
			r.SE, r.Lo, r.Hi = fmt.Sprintf("%.4f", *c.SE), fmt.Sprintf("%.4f", lo), fmt.Sprintf("%.4f", hi)
		}
		return r
	}
	group := func(title string, cs []demand.Coef, name func(demand.Coef) string) {
		for i, c := range cs {
			g := ""
			if i == 0 {
				g = title
			}
			rows = append(rows, row(g, name(c), c))
		}
	}
	plain := func(c demand.Coef) string { return c.Name }
	var linear, location []demand.Coef
	for _, c := range res.Beta {
		if c.Nonlinear {
			location = append(location, c)
		} else {
			linear = append(linear, c)
		}
	}
	sigma := "taste standard deviations (σ)"
	if len(res.Cholesky) > 0 {
		sigma = "taste standard deviations (σ = √diag LLᵀ, implied by L)"
	}
	group("mean utility (β)", linear, plain)
	group("location of ln(−α), log-normal price sensitivity", location, plain)
	group(sigma, res.Sigma, plain)
	group("demographic interactions (Π)", res.Pi, func(c demand.Coef) string { return c.Name + " × " + c.Demographic })
	group("marginal cost (γ)", res.Gamma, plain)
	group("nesting parameters (ρ)", res.Rho, plain)
	group("Cholesky factor of the taste covariance (L)", entryCoefs(res.Cholesky), plain)
	group("implied taste correlations", entryCoefs(res.Correlation), plain)
	return rows
}

// shownMarket returns the market to show: the one named, or the one with
// the most products.
func shownMarket(p *data.Products, id string) (int, error) {
	if id != "" {
		return p.MarketOf(id)
	}
	t := 0
	for k, mk := range p.Markets {
		if mk.Len() > p.Markets[t].Len() {
			t = k
		}
	}
	return t, nil
}

// familyLine describes the model family in words for the report.
func familyLine(m *demand.Model) string {
	spec := m.Spec
	var parts []string
	if spec.Nested() {
		rho := "one nesting parameter ρ for all nests"
		if spec.ByNest() {
			rho = "one nesting parameter ρ per nest"
		}
		parts = append(parts, fmt.Sprintf("nested logit with %d nests from column %q (%s; the outside good alone)", len(m.Nests), spec.Demand.Nests, rho))
	}
	if spec.LogNormalPrice() {
		parts = append(parts, "log-normal price sensitivity α_i = −exp(β + σν_i + ΠD_i)")
	}
	if spec.FullCovariance() {
		parts = append(parts, "correlated tastes (full covariance LLᵀ)")
	}
	return strings.Join(parts, "; ")
}
