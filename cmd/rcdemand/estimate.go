package main

import (
	"errors"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"strings"

	"github.com/spf13/cobra"

	"rcdemand/data"
	"rcdemand/demand"
	"rcdemand/instruments"
)

type estimateFlags struct {
	out, productsOut, latex string
	starts                  int
	seed                    uint64
}

func newEstimate() *cobra.Command {
	var f estimateFlags
	cmd := &cobra.Command{
		Use:   "estimate SPEC.toml",
		Short: "Estimate the demand model of a spec file by two-step GMM",
		Long: `estimate reads a spec and its data, estimates the model by GMM and writes
the results file (JSON), which records the SHA-256 fingerprints of the spec,
products and agents files so that later commands can tell when the data
changed. It exits 3 when the results were written but the optimiser did not
converge or there are no standard errors.`,
		Example: `  rcdemand estimate model.toml --out results.json
  rcdemand estimate model.toml --out results.json --products-out rows.parquet --starts 5`,
		Args: exactArgs("SPEC.toml"),
		RunE: func(cmd *cobra.Command, args []string) error {
			_, _, err := runEstimate(args[0], f, cmd.OutOrStdout(), newMessages(cmd))
			return err
		},
	}
	cmd.Flags().StringVar(&f.out, "out", "", "results JSON to write (default: results.json beside the spec)")
	cmd.Flags().StringVar(&f.productsOut, "products-out", "", "per-row table to write (.csv or .parquet): market, product, firm, share, price, delta, xi, own_price_elasticity, and markup, cost, lerner under the firm column's ownership")
	cmd.Flags().StringVar(&f.latex, "latex", "", "write a LaTeX (booktabs) table of the estimates to this file")
	cmd.Flags().IntVar(&f.starts, "starts", 1, "number of starting points for the first GMM step (the spec's start plus random ones)")
	cmd.Flags().Uint64Var(&f.seed, "seed", 1, "seed of the random starting points")
	return cmd
}

// runEstimate is the whole estimate command; demo reuses it. After writing
// the outputs it returns a partialResult when the optimiser did not
// converge or a standard error is missing.
func runEstimate(specPath string, f estimateFlags, stdout io.Writer, msg *messages) (*demand.Results, *demand.Model, error) {
	if f.starts < 1 {
		return nil, nil, usagef("--starts %d: need at least 1", f.starts)
	}
	if err := tableFlag("--products-out", f.productsOut); err != nil {
		return nil, nil, err
	}
	spec, err := demand.ReadSpec(specPath)
	if err != nil {
		return nil, nil, err
	}
	m, err := demand.Load(spec)
	if err != nil {
		return nil, nil, err
	}
	if f.out == "" {
		f.out = filepath.Join(filepath.Dir(specPath), "results.json")
	}
	if err := checkOutputs(m.Inputs(), f.out, f.productsOut, f.latex); err != nil {
		return nil, nil, err
	}
	set := demand.SettingsOf(spec)
	set.Starts, set.Seed = f.starts, f.seed
	mon := demand.Monitor{Stop: interrupt}
	bar := msg.progressBar("estimating")
	if bar != nil {
		mon.Progress = func(step, it int, q float64) {
			bar.Describe(fmt.Sprintf("GMM step %d · iteration %d · objective %.6g", step, it, q))
			bar.Add(1)
		}
	}
	res, err := demand.Estimate(m, set, mon)
	if bar != nil {
		bar.Finish()
		bar.Clear()
		fmt.Fprintln(msg.w)
	}
	if err != nil {
		return nil, nil, err
	}
	if interrupted() {
		return nil, nil, errInterrupted
	}
	res.Run.Version = version
	res.RelativeSpec(specPath, f.out)
	if err := res.RecordInputs(m, f.out); err != nil {
		return nil, nil, err
	}
	if err := data.WriteJSON(f.out, m.Inputs(), res); err != nil {
		return nil, nil, err
	}
	if f.productsOut != "" {
		if err := writeProducts(f.productsOut, m, res, msg); err != nil {
			return nil, nil, err
		}
	}
	if f.latex != "" {
		if err := data.WriteAtomic(f.latex, m.Inputs(), func(w io.Writer) error { return writeLatex(w, res) }); err != nil {
			return nil, nil, err
		}
	}
	printEstimates(stdout, m, res)
	estimateMessages(msg, res)
	fmt.Fprintf(stdout, "\nwrote %s", f.out)
	if f.productsOut != "" {
		fmt.Fprintf(stdout, ", %s", f.productsOut)
	}
	if f.latex != "" {
		fmt.Fprintf(stdout, ", %s", f.latex)
	}
	fmt.Fprintln(stdout)
	return res, m, partialResult(res)
}

// partialError reports results that were written but did not converge or
// have no covariance: exit status 3.
type partialError struct{ msg string }

func (e *partialError) Error() string { return e.msg }

// ExitCode is the exit status of a run that ends with this error.
func (e *partialError) ExitCode() int { return exitPartial }

// partialResult returns a *partialError when res did not converge or lacks
// standard errors, else nil.
func partialResult(res *demand.Results) error {
	var parts []string
	if !res.Convergence.Converged {
		parts = append(parts, "the estimate did not converge: "+res.Convergence.Message)
	}
	if d := res.Diagnostics; d != nil && d.Unidentified != nil {
		parts = append(parts, "there are no standard errors: "+d.Unidentified.Describe())
	} else if missing := missingSE(res); len(missing) > 0 {
		parts = append(parts, "there is no standard error for "+strings.Join(missing, ", "))
	}
	if len(parts) == 0 {
		return nil
	}
	return &partialError{"the results were written, but " + strings.Join(parts, "; and ")}
}

// missingSE names the parameters without a standard error.
func missingSE(res *demand.Results) []string {
	var missing []string
	for _, g := range coefGroups(res) {
		for _, c := range g.cs {
			if c.SE == nil {
				missing = append(missing, coefLabel(c))
			}
		}
	}
	return missing
}

// isPartial reports whether err is a *partialError: results written but
// short.
func isPartial(err error) bool {
	var pe *partialError
	return errors.As(err, &pe)
}

// writeProducts writes the per-row table of an estimate. Without price
// levels (a price ≤ 0: demeaned or logged) the elasticity, markup, cost
// and Lerner columns are left empty, with a warning that says why.
func writeProducts(path string, m *demand.Model, res *demand.Results, msg *messages) error {
	theta, err := m.ThetaOf(res)
	if err != nil {
		return internalError{err}
	}
	fit, err := demand.NewFitted(m, res.BetaValues(), theta)
	if err != nil {
		return err
	}
	p := m.Products
	var elasticity, markup, cost, lerner []float64
	if levels := m.PriceLevels(); levels != nil {
		msg.warn("%s: own_price_elasticity, markup, cost and lerner left empty: %v", path, levels)
		empty := make([]float64, p.Len())
		for i := range empty {
			empty[i] = math.NaN()
		}
		elasticity, markup, cost, lerner = empty, empty, empty, empty
	} else {
		elasticity = fit.OwnElasticities()
		if p.Firm != nil {
			mg, err := fit.Margins()
			if err != nil {
				return err
			}
			markup, cost, lerner = mg.Markup, mg.Cost, mg.Lerner
		}
	}
	var fr data.Frame
	fr.Add("market", p.Market)
	fr.Add("product", p.Product)
	if p.Firm != nil {
		fr.Add("firm", p.Firm)
	}
	fr.Add("share", p.Share)
	fr.Add("price", p.Price)
	fr.Add("delta", fit.Delta)
	fr.Add("xi", fit.Xi)
	fr.Add("own_price_elasticity", elasticity)
	if p.Firm != nil {
		fr.Add("markup", markup)
		fr.Add("cost", cost)
		fr.Add("lerner", lerner)
	}
	return data.WriteFrame(path, m.Inputs(), &fr)
}

// coefLabel names a parameter for the terminal and the report.
func coefLabel(c demand.Coef) string {
	if c.Demographic != "" {
		return c.Name + " × " + c.Demographic
	}
	return c.Name
}

// estimatesTable lays out the estimates: each parameter with its standard
// error and 95% interval, grouped by kind, four decimals throughout.
func estimatesTable(res *demand.Results) *textTable {
	t := newTable("  ", col{head: "parameter", left: true, max: 34}, col{head: "estimate"}, col{head: "std. error"}, col{head: "95% interval"})
	groups := coefGroups(res)
	wlo, whi := 0, 0
	for _, g := range groups {
		for _, c := range g.cs {
			if lo, hi, ok := c.Interval(); ok {
				wlo, whi = max(wlo, len(fixed(lo, 4))), max(whi, len(fixed(hi, 4)))
			}
		}
	}
	for _, g := range groups {
		for i, c := range g.cs {
			if i == 0 {
				t.title(g.title)
			}
			lo, hi, ok := c.Interval()
			if !ok {
				t.add("  "+coefLabel(c), fixed(c.Value, 4), "—", "(no standard error)")
				continue
			}
			t.add("  "+coefLabel(c), fixed(c.Value, 4), fixed(*c.SE, 4), fmt.Sprintf("[%*s, %*s]", wlo, fixed(lo, 4), whi, fixed(hi, 4)))
		}
	}
	return t
}

// coefGroup is one kind of parameter with its title on the terminal and
// in the report, and in LaTeX.
type coefGroup struct {
	title, latex string
	cs           []demand.Coef
}

// coefGroups lists the estimates by kind, for the terminal, the report and
// the LaTeX table.
func coefGroups(res *demand.Results) []coefGroup {
	var linear, location []demand.Coef
	for _, c := range res.Beta {
		if c.Nonlinear {
			location = append(location, c)
		} else {
			linear = append(linear, c)
		}
	}
	sigma, sigmaTeX := "taste standard deviations (σ)", `Taste standard deviations ($\sigma$)`
	if len(res.Cholesky) > 0 {
		sigma, sigmaTeX = "taste standard deviations (σ, from L)", `Taste standard deviations ($\sigma$, from $L$)`
	}
	return []coefGroup{
		{"mean utility (β)", `Mean utility ($\beta$)`, linear},
		{"location of ln(−α) (log-normal price sensitivity)", `Location of $\ln(-\alpha_i)$ (log-normal price sensitivity)`, location},
		{sigma, sigmaTeX, res.Sigma},
		{"demographic interactions (Π)", `Demographic interactions ($\Pi$)`, res.Pi},
		{"marginal cost (γ)", `Marginal cost ($\gamma$)`, res.Gamma},
		{"nesting parameters (ρ)", `Nesting parameters ($\rho$)`, res.Rho},
		{"Cholesky factor of the taste covariance (L)", `Cholesky factor of the taste covariance ($L$)`, entryCoefs(res.Cholesky)},
		{"taste correlations", "Implied taste correlations", entryCoefs(res.Correlation)},
	}
}

// printPriceSensitivity describes a log-normal price sensitivity.
func printPriceSensitivity(w io.Writer, res *demand.Results) {
	pa := res.PriceAlpha
	if pa == nil {
		return
	}
	fmt.Fprintf(w, "  price sensitivity: log-normal, α_i = −exp(β + σν_i + ΠD_i) < 0 for every consumer\n")
	fmt.Fprintf(w, "    α at the location −exp(β) %.4f", pa.AtLocation)
	if pa.AtLocationSE != nil {
		fmt.Fprintf(w, " (s.e. %.4f)", *pa.AtLocationSE)
	}
	fmt.Fprintf(w, " · mean α over the sample's agents %.4f", pa.Mean)
	if pa.Median != nil {
		fmt.Fprintf(w, " · median %.4f", *pa.Median)
	}
	fmt.Fprintln(w)
}

// printEstimates prints the estimates table and the fit block to stdout;
// estimateMessages prints the warnings and notes to stderr.
func printEstimates(w io.Writer, m *demand.Model, res *demand.Results) {
	fmt.Fprintf(w, "Demand estimates · %s\n", m.Spec.File)
	fmt.Fprintf(w, "%d observations in %d markets · %d moments · %d-step GMM · %s standard errors\n\n",
		res.GMM.Observations, res.GMM.Markets, res.GMM.Moments, res.GMM.Steps, res.GMM.Covariance)
	estimatesTable(res).write(w)
	printPriceSensitivity(w, res)
	fmt.Fprintln(w)
	g := res.GMM
	switch {
	case g.J != nil && g.JDF == 0:
		fmt.Fprintf(w, "  exactly identified (as many moments as parameters): no Hansen J\n")
	case g.J != nil:
		fmt.Fprintf(w, "  Hansen J %.3f · df %d · %s\n", *g.J, g.JDF, pValue(*g.JPValue))
	default:
		fmt.Fprintf(w, "  objective %.6g (one-step GMM: no Hansen J)\n", g.Objective)
	}
	c := res.Convergence
	switch {
	case c.Status == demand.ClosedForm:
		fmt.Fprintf(w, "  closed form: no nonlinear parameters · objective computed %d times\n", c.ObjectiveCalls)
	case c.Converged:
		fmt.Fprintf(w, "  optimiser: converged · projected gradient %.2g · %d iterations · objective computed %d times · %d inner failures\n",
			c.GradientNorm, c.Iterations, c.ObjectiveCalls, c.InnerFailures)
	default:
		fmt.Fprintf(w, "  optimiser: NOT CONVERGED (%s) · %s · objective computed %d times\n", c.Status, c.Message, c.ObjectiveCalls)
	}
	if len(c.OnBound) > 0 {
		fmt.Fprintf(w, "  on a bound: %s\n", strings.Join(c.OnBound, ", "))
	}
	if c.InnerFailures > 0 {
		var ids []string
		for _, mi := range c.Markets {
			if mi.Failures > 0 {
				ids = append(ids, fmt.Sprintf("%s (%d)", mi.Market, mi.Failures))
			}
		}
		fmt.Fprintf(w, "  warning: the share inversion failed at some trial parameters in markets %s\n", strings.Join(ids[:min(len(ids), 10)], ", "))
	}
	if len(c.Curvature) > 0 {
		fmt.Fprintf(w, "  curvature at the minimum: %s\n", formatFloats(c.Curvature))
	}
	if ms := res.MultiStart; ms != nil {
		fmt.Fprintf(w, "  %d starts: %s\n", ms.Starts, ms.Note)
	}
	if d := res.Diagnostics; d != nil && d.Unidentified != nil {
		u := d.Unidentified
		fmt.Fprintf(w, "  no standard errors: %s\n", u.Describe())
	}
	if d := res.Diagnostics; d != nil {
		printDiagnostics(w, d, res)
	}
}

// printDiagnostics prints the identification and specification checks,
// each with its figures and verdict; the verdicts that are warnings go to
// stderr (estimateMessages), so they are named here only.
func printDiagnostics(w io.Writer, d *demand.Diagnostics, res *demand.Results) {
	fmt.Fprintf(w, "\nIdentification and specification\n")
	fmt.Fprintf(w, "  rank of Z %d, rank of Z'X1 %d (both full: a deficient rank stops the estimation)\n", d.RankZ, d.RankZX1)
	for _, fs := range []*instruments.FirstStage{d.FirstStage, d.FirstStageNest} {
		if fs == nil {
			continue
		}
		fmt.Fprintf(w, "  first stage for %s: F(%d, %d) = %.2f · partial R² %.4f · robust F %.2f · %s\n", fs.Endogenous, fs.DF1, fs.DF2, fs.F, fs.PartialR2, fs.RobustF, fs.Strength)
		if fs.Strength != instruments.Weak {
			fmt.Fprintln(w, wrap(fs.Verdict, "    "))
		}
	}
	pd := "positive definite"
	if !d.Weighting.PositiveDefinite {
		pd = "NOT positive definite"
	}
	fmt.Fprintf(w, "  weighting matrix: %s · condition number %.3g\n", pd, d.Weighting.Condition)
	if v := d.Jacobian.Verdict; v != "" && !d.Jacobian.NearFlat {
		fmt.Fprintf(w, "  moment Jacobian G: %s\n", v)
	}
	switch g := res.GMM; {
	case g.J != nil && g.JDF > 0 && d.OveridRejects:
		fmt.Fprintf(w, "  over-identification: Hansen J %.3f, %d df, %s: rejected at 5%% (see the warning)\n", *g.J, g.JDF, pValue(*g.JPValue))
	default:
		fmt.Fprintln(w, wrap("over-identification: "+d.Overid, "  "))
	}
}

// estimateMessages prints an estimate's warnings and notes to stderr.
func estimateMessages(msg *messages, res *demand.Results) {
	if d := res.Diagnostics; d != nil {
		msg.warnings(d.Warnings)
	}
	msg.notes(res.Notes) // non-convergence: runEstimate's partialResult says it
}

func formatFloats(xs []float64) string {
	parts := make([]string, len(xs))
	for i, x := range xs {
		parts[i] = fmt.Sprintf("%.4g", x)
	}
	return strings.Join(parts, ", ")
}

// latexEscape escapes the characters LaTeX treats specially.
var latexEscape = strings.NewReplacer(`\`, `\textbackslash{}`, "_", `\_`, "&", `\&`, "%", `\%`, "$", `\$`, "#", `\#`, "{", `\{`, "}", `\}`,
	"~", `\textasciitilde{}`, "^", `\textasciicircum{}`)

// writeLatex writes a booktabs table of the estimates, grouped as on the
// terminal (coefGroups); the constant is named "constant".
func writeLatex(w io.Writer, res *demand.Results) error {
	fmt.Fprintln(w, `% rcdemand `+version+`: demand estimates (requires \usepackage{booktabs})`)
	fmt.Fprintln(w, `\begin{tabular}{lr}`)
	fmt.Fprintln(w, `\toprule`)
	fmt.Fprintln(w, ` & Estimate \\`)
	fmt.Fprintln(w, `\midrule`)
	for _, g := range coefGroups(res) {
		if len(g.cs) == 0 {
			continue
		}
		fmt.Fprintf(w, `\multicolumn{2}{l}{\emph{%s}} \\`+"\n", g.latex)
		for _, c := range g.cs {
			label := coefLabel(c)
			if c.Name == "1" {
				label = "constant" + strings.TrimPrefix(label, "1")
			}
			se := "—"
			if c.SE != nil {
				se = fmt.Sprintf("(%.4f)", *c.SE)
			}
			fmt.Fprintf(w, "%s & %.4f \\\\\n & %s \\\\\n", latexEscape.Replace(label), c.Value, se)
		}
	}
	fmt.Fprintln(w, `\midrule`)
	fmt.Fprintf(w, "Observations & %d \\\\\nMarkets & %d \\\\\n", res.GMM.Observations, res.GMM.Markets)
	if res.GMM.J != nil {
		fmt.Fprintf(w, "Hansen $J$ (df %d) & %.3f \\\\\n$p$-value & %.3f \\\\\n", res.GMM.JDF, *res.GMM.J, *res.GMM.JPValue)
	}
	fmt.Fprintln(w, `\bottomrule`)
	fmt.Fprintln(w, `\end{tabular}`)
	return nil
}

// entryCoef shows a matrix entry of the estimates as a coefficient named
// "row, column".
func entryCoef(e demand.Entry) demand.Coef {
	return demand.Coef{Name: e.Row + ", " + e.Column, Value: e.Value, SE: e.SE}
}

func entryCoefs(es []demand.Entry) []demand.Coef {
	var out []demand.Coef
	for _, e := range es {
		out = append(out, entryCoef(e))
	}
	return out
}
