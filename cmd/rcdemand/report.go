package main

import (
	"embed"
	"errors"
	"fmt"
	"html/template"
	"io"
	"path/filepath"
	"slices"
	"strings"
	"sync"

	"github.com/spf13/cobra"

	"rcdemand/data"
	"rcdemand/demand"
	"rcdemand/instruments"
	"rcdemand/merger"
	"rcdemand/merger/study"
)

//go:embed templates/report.html
var reportFS embed.FS

// reportLabels are the labels the report's template shares with the
// terminal (one label per figure everywhere).
var reportLabels = map[string]string{
	"hhiPre": labelHHIPre, "hhiAfter": labelHHIAfter, "deltaHHI": labelDeltaHHI,
	"hhiEq": labelHHIEq, "deltaHHIEq": labelDeltaHHIEq, "rule": presumptionRule,
}

// reportTemplate is parsed when a report is written, not when the program
// starts: every other command would pay for it.
var reportTemplate = sync.OnceValue(func() *template.Template {
	return template.Must(template.New("report.html").Funcs(template.FuncMap{
		"join":  func(xs []string) string { return strings.Join(xs, ", ") },
		"label": func(k string) string { return reportLabels[k] },
	}).ParseFS(reportFS, "templates/report.html"))
})

func init() { extraCommands = append(extraCommands, newReport) }

type reportFlags struct {
	merger, market, out, study string
	allowChanged               bool
}

func newReport() *cobra.Command {
	var f reportFlags
	cmd := &cobra.Command{
		Use:   "report RESULTS.json --out report.html",
		Short: "Write a self-contained HTML report of the estimates (and of a merger)",
		Long: `report writes one HTML file with inline styles and figures (SVG) and no
network fetches: the model and data, the estimates with intervals, the
diagnostics in words, an elasticity heat map and diversion ratios for one
market, pre-merger margins and Lerner indices, and, with --merger, price
changes (with intervals when the merger was run with --draws), welfare and
concentration. Up to 12 markets are shown one by one; above, distributions
across markets and the markets with the largest effects, so the report reads
the same at 50 or 5,000 markets. With --study, a trust study of the
estimates (rcdemand study): its table, verdicts and the spread of the
estimates against the normal approximation.`,
		Example: `  rcdemand report results.json --out report.html
  rcdemand report results.json --merger merger.json --market 7 --out report.html
  rcdemand report results.json --study study.json --out report.html`,
		Args: exactArgs("RESULTS.json"),
		RunE: func(cmd *cobra.Command, args []string) error {
			if f.out == "" {
				return usagef("--out is required, e.g. --out report.html")
			}
			if err := writeReport(args[0], f, newMessages(cmd)); err != nil {
				return err
			}
			fmt.Fprintf(cmd.OutOrStdout(), "wrote %s\n", f.out)
			return nil
		},
	}
	cmd.Flags().StringVar(&f.merger, "merger", "", "merger JSON written by rcdemand merger")
	cmd.Flags().StringVar(&f.study, "study", "", "study JSON written by rcdemand study (or gather)")
	cmd.Flags().StringVar(&f.market, "market", "", "market to show (default: the one with the most products)")
	cmd.Flags().StringVar(&f.out, "out", "", "HTML file to write (required)")
	cmd.Flags().BoolVar(&f.allowChanged, "allow-changed-data", false, "proceed, with a warning, when the data changed since estimation")
	return cmd
}

// writeReport renders the report of a results file (and a merger file) to out.
func writeReport(resultsPath string, f reportFlags, msg *messages) error {
	before := len(msg.warned)
	res, fit, err := loadFitted(resultsPath, f.allowChanged, msg)
	if err != nil {
		return err
	}
	var mr *merger.Result
	inputs := append(fit.Model.Inputs(), resultsPath)
	if err := checkOutputs(append([]string{f.merger, f.study}, inputs...), f.out); err != nil {
		return err
	}
	if f.merger != "" {
		if mr, err = readMerger(f.merger, resultsPath, f.allowChanged, msg); err != nil {
			return err
		}
		if d := mr.Draws; d != nil && d.Shard != nil {
			return fmt.Errorf("%s: shard %d of %d of merger draws: gather the shards first (rcdemand gather)", f.merger, d.Shard.Index, d.Shard.Count)
		}
		inputs = append(inputs, f.merger)
	}
	view, err := buildReport(res, fit, mr, f.market)
	if err != nil {
		return err
	}
	if f.study != "" {
		var st study.Study
		if err := data.ReadJSON(f.study, study.Schema, "study", &st); err != nil {
			return err
		}
		if st.Shard != nil {
			return fmt.Errorf("%s: shard %d of %d of a study: gather the shards first (rcdemand gather)", f.study, st.Shard.Index, st.Shard.Count)
		}
		if !data.SamePath(data.Resolve(f.study, st.ResultsFile), resultsPath) {
			return fmt.Errorf("%s: a study of %s, not of %s", f.study, data.Resolve(f.study, st.ResultsFile), resultsPath)
		}
		if view.Study, err = studyReport(&st); err != nil {
			return err
		}
		inputs = append(inputs, f.study)
	}
	view.Warnings = msg.warned[before:]
	return data.WriteAtomic(f.out, inputs, func(w io.Writer) error { return reportTemplate().Execute(w, view) })
}

// readMerger reads a merger file and checks it against the files now on
// disk: it must have been simulated from the results file at resultsPath,
// and its other inputs (an ownership table) must be unchanged. A mismatch
// is an error, or a warning with allowChanged.
func readMerger(path, resultsPath string, allowChanged bool, msg *messages) (*merger.Result, error) {
	var r merger.Result
	if err := data.ReadJSON(path, merger.Schema, "merger", &r); err != nil {
		return nil, err
	}
	var problems []string
	var others []data.Input
	for _, in := range r.Inputs {
		if in.Role != "results" {
			others = append(others, in)
			continue
		}
		now, err := data.Fingerprint("results", resultsPath)
		if err != nil {
			return nil, err
		}
		if !strings.EqualFold(now.SHA256, in.SHA256) {
			problems = append(problems, fmt.Sprintf("simulated from other results than %s (%s when it was written)", resultsPath, in.Path))
		}
	}
	var changed *data.ChangedError
	if err := data.Changed(filepath.Dir(path), others); errors.As(err, &changed) {
		problems = append(problems, changed.Line("the merger was simulated"))
	} else if err != nil {
		return nil, err
	}
	if len(problems) == 0 {
		return &r, nil
	}
	text := path + ": " + strings.Join(problems, "; ")
	if !allowChanged {
		return nil, fmt.Errorf("%s; run the merger again, or pass --allow-changed-data to use it anyway", text)
	}
	msg.warn("%s; proceeding as asked", text)
	return &r, nil
}

type coefRow struct{ Group, Name, Est, SE, Lo, Hi string }

type figureView struct {
	SVG     template.HTML
	Caption string
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
	Margins                                  *marginsView
	Merger                                   *mergerView
	Study                                    *studyView
	Notes, Warnings                          []string
	Caution                                  string
}

func buildReport(res *demand.Results, fit *demand.Fitted, mr *merger.Result, marketID string) (*reportView, error) {
	m := fit.Model
	p := m.Products
	v := &reportView{Version: version, Spec: res.SpecFile, Obs: p.Len(), Markets: len(p.Markets), MinJ: 1 << 30,
		Linear: m.X1Names, Random: m.Spec.Demand.Random, Instruments: m.ZNames, Steps: res.GMM.Steps,
		CovarianceKind: res.GMM.Covariance, Diagnostics: res.Diagnostics, Converged: res.Convergence.Converged,
		Notes: res.Notes, Caution: merger.Caution}
	describeModel(v, res, m)
	t, err := shownMarket(p, marketID)
	if err != nil {
		return nil, err
	}
	mk := p.Markets[t]
	v.Market = mk.ID
	if v.Figures, err = substitutionFigures(fit, t, mr); err != nil {
		return nil, err
	}
	if p.Firm != nil {
		if v.Margins, err = marginsOf(fit, t); err != nil {
			return nil, err
		}
	}
	if mr != nil {
		if v.Merger, err = mergerReport(mr, mk.ID); err != nil {
			return nil, err
		}
	}
	return v, nil
}

// describeModel fills the model, estimates and fit parts of the view.
func describeModel(v *reportView, res *demand.Results, m *demand.Model) {
	for _, q := range m.Params {
		if q.Kind == demand.Pi {
			v.Interactions = append(v.Interactions, q.Column+" × "+q.Demographic)
		}
	}
	for _, mk := range m.Products.Markets {
		v.MinJ, v.MaxJ = min(v.MinJ, mk.Len()), max(v.MaxJ, mk.Len())
	}
	v.Family = familyLine(m)
	switch {
	case len(m.Params) == 0:
		v.Consumers = "a representative logit consumer"
	case m.Agents != nil:
		v.Consumers = fmt.Sprintf("%d agents per market from %s", m.Problem.Agents[0].End-m.Problem.Agents[0].Start, m.Agents.File)
	default:
		v.Consumers = fmt.Sprintf("integration rule %s", m.Spec.Integration.Rule)
	}
	v.Coefs = coefRows(res)
	switch {
	case res.GMM.J != nil && res.GMM.JDF == 0:
		v.FitLine = fmt.Sprintf("Exactly identified: %d moments for as many parameters, so there is no Hansen J.", res.GMM.Moments)
	case res.GMM.J != nil:
		v.FitLine = fmt.Sprintf("Hansen J = %.3f with %d degrees of freedom (%s); %d moments.", *res.GMM.J, res.GMM.JDF, pValue(*res.GMM.JPValue), res.GMM.Moments)
	default:
		v.FitLine = fmt.Sprintf("One-step GMM objective %.4g; %d moments.", res.GMM.Objective, res.GMM.Moments)
	}
	c := res.Convergence
	switch {
	case c.Converged && len(m.Params) == 0:
		v.ConvergenceLine = "A plain logit: the estimates are linear GMM in closed form, with no numerical optimisation."
	case c.Converged:
		v.ConvergenceLine = fmt.Sprintf("The optimiser converged: gradient norm %.2g after %d iterations; %d inner failures.", c.GradientNorm, c.Iterations, c.InnerFailures)
	default:
		v.ConvergenceLine = "The optimiser did not converge: " + c.Message + ". The estimates are the last point reached."
	}
	if d := res.Diagnostics; d != nil && d.FirstStage != nil {
		v.WeakIV = d.FirstStage.Strength == instruments.Weak
	}
}

// substitutionFigures draws market t's elasticity heat map and where the
// (parties') lost sales go.
func substitutionFigures(fit *demand.Fitted, t int, mr *merger.Result) ([]figureView, error) {
	p := fit.Model.Products
	mk := p.Markets[t]
	names := p.Product[mk.Start:mk.End]
	hm, numbers, err := elasticityHeatMap(fit.Elasticities(t), names, mk.ID)
	if err != nil {
		return nil, err
	}
	caption := "Row j, column l: the percentage change in the share of j when the price of l rises by 1%. Own-price elasticities are on the diagonal."
	if !numbers {
		caption += fmt.Sprintf(" With %d products the cells are too small for numbers; rcdemand elasticities --market %s prints them.", len(names), mk.ID)
	}
	figs := []figureView{{hm, caption}}
	J := mk.Len()
	firmPre, firmPost, merging := make([]string, J), make([]string, J), make([]bool, J)
	for j := 0; j < J; j++ {
		merging[j] = true
		if p.Firm != nil {
			firmPre[j], firmPost[j] = p.Firm[mk.Start+j], p.Firm[mk.Start+j]
		}
	}
	if mr != nil {
		for _, r := range mr.Products {
			if r.Market != mk.ID {
				continue
			}
			j := slices.Index(names, r.Product)
			if j < 0 {
				return nil, fmt.Errorf("the merger's product %q of market %s is not in %s: the data changed since the merger was simulated; run the merger again", r.Product, mk.ID, p.File)
			}
			firmPre[j], firmPost[j], merging[j] = r.FirmPre, r.FirmPost, r.Merging
		}
	}
	dn, partner, rivals, outside := merger.DiversionToPartners(fit, t, firmPre, firmPost, merging)
	if len(dn) > 0 {
		db, err := diversionBars(dn, partner, rivals, outside, mk.ID, mr != nil)
		if err != nil {
			return nil, err
		}
		caption := "Diversion ratios: the share of each product's lost sales, when its price rises, that goes to each destination."
		if mr == nil {
			caption += " Without a merger file every product is shown."
		}
		figs = append(figs, figureView{db, caption})
	}
	return figs, nil
}

// coefRows lays out the estimates table: each parameter with its standard
// error and 95% interval, grouped by kind.
func coefRows(res *demand.Results) []coefRow {
	var rows []coefRow
	row := func(group, name string, c demand.Coef) coefRow {
		r := coefRow{Group: group, Name: name, Est: fixed(c.Value, 4), SE: "—", Lo: "—", Hi: "—"}
		if lo, hi, ok := c.Interval(); ok {
			r.SE, r.Lo, r.Hi = fixed(*c.SE, 4), fixed(lo, 4), fixed(hi, 4)
		}
		return r
	}
	for _, g := range coefGroups(res) {
		for i, c := range g.cs {
			title := ""
			if i == 0 {
				title = g.title
			}
			rows = append(rows, row(title, coefLabel(c), c))
		}
	}
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
