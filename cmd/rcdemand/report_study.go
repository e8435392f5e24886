package main

import (
	"fmt"
	"html/template"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"

	"rcdemand/merger/study"
)

// studyView is the report's section on a trust study.
type studyView struct {
	Replications, Failures int
	JRejection             string
	Rows                   []studyRow
	Verdicts               []string
	Figure                 *figureView
	Caution                string
}

type studyRow struct {
	Name, Truth, Bias, RMSE, SD, SE, Coverage string
	Warn                                      bool
}

// studyRowOf is the table row of a parameter of a study, for the report
// and the terminal: "—" where there is no figure; Warn when the intervals
// cover less than 90% of the time.
func studyRowOf(p study.ParameterStats) studyRow {
	num := func(x *float64) string {
		if x == nil {
			return "—"
		}
		return fmt.Sprintf("%.4f", *x)
	}
	name := p.Kind + " " + p.Name
	if p.Demographic != "" {
		name += " × " + p.Demographic
	}
	row := studyRow{Name: name, Truth: fmt.Sprintf("%.4f", p.Truth), Bias: num(p.Bias), RMSE: num(p.RMSE), SD: num(p.SD), SE: num(p.MedianSE), Coverage: "—"}
	if p.Coverage95 != nil {
		row.Coverage = fmt.Sprintf("%.0f%%", 100**p.Coverage95)
		row.Warn = *p.Coverage95 < 0.9
	}
	return row
}

// studyReport lays out a study: its per-parameter table, verdicts and a
// figure of the standardised estimates against the normal approximation.
func studyReport(st *study.Study) (*studyView, error) {
	sv := &studyView{Replications: st.Replications, Failures: st.Failures, Verdicts: st.Verdicts, Caution: st.Caution}
	if j := st.JRejection5; j != nil {
		sv.JRejection = fmt.Sprintf("%.0f%%", 100**j)
	}
	for _, p := range st.Parameters {
		sv.Rows = append(sv.Rows, studyRowOf(p))
	}
	svg, err := standardisedFigure(st)
	if err != nil {
		return nil, err
	}
	if svg != "" {
		sv.Figure = &figureView{SVG: svg, Caption: "Each replication's estimate minus the truth, divided by its reported standard error, pooled over the parameters (replications of the design's own size). " +
			"If the normal approximation with the sandwich standard errors holds, the histogram follows the curve: the standard normal density. " +
			"A wider histogram means the standard errors understate the uncertainty; a shifted one, bias."}
	}
	return sv, nil
}

// standardisedFigure draws the histogram of (estimate − truth)/SE over the
// replications and parameters of the first scale, clipped to [−6, 6], with
// the standard normal density.
func standardisedFigure(st *study.Study) (template.HTML, error) {
	var z plotter.Values
	scale := 0
	if len(st.Scales) > 0 {
		scale = st.Scales[0].Scale
	}
	for _, r := range st.Runs {
		if r.Scale != scale || r.Failure != "" || len(r.Estimates) != len(st.Parameters) {
			continue
		}
		for k, p := range st.Parameters {
			if se := r.SE[k]; se != nil && *se > 0 {
				z = append(z, math.Max(-6, math.Min(6, (r.Estimates[k]-p.Truth) / *se)))
			}
		}
	}
	if len(z) < 10 {
		return "", nil
	}
	p := plot.New()
	stylePlot(p, "Standardised estimates against the normal approximation", "(estimate − truth) / standard error", "density")
	h, err := plotter.NewHist(z, 24)
	if err != nil {
		return "", err
	}
	h.Normalize(1)
	h.FillColor = slateColor
	h.LineStyle.Color = inkColor
	p.Add(h)
	normal := plotter.NewFunction(distuv.UnitNormal.Prob)
	normal.Color = signalColor
	normal.Width = vg.Points(2)
	p.Add(normal)
	p.Legend.Add("replications", h)
	p.Legend.Add("standard normal", normal)
	p.X.Min, p.X.Max = -6, 6
	return plotSVG(p, 640, 300)
}
