package main

import (
	"bytes"
	"fmt"
	"html/template"
	"image/color"
	"math"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/palette/moreland"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// The report's figures are gonum/plot plots rendered to SVG and inlined.
// gonum/plot's SVG backend escapes every text it writes, so user strings
// (product and firm names) are safe inside the figures.

var (
	inkColor    = color.RGBA{0x26, 0x32, 0x38, 0xff}
	tealColor   = color.RGBA{0x1b, 0x7f, 0x79, 0xff}
	amberColor  = color.RGBA{0xd9, 0x8e, 0x04, 0xff}
	slateColor  = color.RGBA{0x8d, 0x99, 0xae, 0xff}
	signalColor = color.RGBA{0xb8, 0x3b, 0x5e, 0xff}
)

func svgOf(p *plot.Plot, w, h vg.Length) (template.HTML, error) {
	wt, err := p.WriterTo(w, h, "svg")
	if err != nil {
		return "", err
	}
	var buf bytes.Buffer
	if _, err := wt.WriteTo(&buf); err != nil {
		return "", err
	}
	// Drop the XML prolog so the SVG can sit inside HTML.
	out := buf.Bytes()
	if i := bytes.Index(out, []byte("<svg")); i > 0 {
		out = out[i:]
	}
	return template.HTML(out), nil // #nosec: produced by gonum/plot, which escapes its text
}

// headroom extends the y axis to include 0 and leaves a share frac of the
// height free above the data for the legend.
func headroom(p *plot.Plot, frac float64) {
	p.Y.Min = math.Min(p.Y.Min, 0)
	p.Y.Max += frac * (p.Y.Max - p.Y.Min)
}

func stylePlot(p *plot.Plot, title, xlab, ylab string) {
	p.Title.Text = title
	p.X.Label.Text = xlab
	p.Y.Label.Text = ylab
	p.Title.TextStyle.Color = inkColor
	p.BackgroundColor = color.White
}

type matrixGrid struct {
	m *mat.Dense
}

func (g matrixGrid) Dims() (c, r int)   { r, c = g.m.Dims(); return c, r }
func (g matrixGrid) Z(c, r int) float64 { n, _ := g.m.Dims(); return g.m.At(n-1-r, c) }
func (g matrixGrid) X(c int) float64    { return float64(c) }
func (g matrixGrid) Y(r int) float64    { return float64(r) }

// elasticityHeatMap draws the J×J elasticity matrix, rows j (the product
// whose share responds) top to bottom, columns l (the price that moves).
func elasticityHeatMap(E *mat.Dense, names []string, market string) (template.HTML, error) {
	J, _ := E.Dims()
	p := plot.New()
	stylePlot(p, "Price elasticities, market "+market, "price of", "share of")
	lim := 0.0
	for j := 0; j < J; j++ {
		for l := 0; l < J; l++ {
			lim = math.Max(lim, math.Abs(E.At(j, l)))
		}
	}
	pal := moreland.SmoothBlueRed()
	pal.SetMin(-lim)
	pal.SetMax(lim)
	hm := plotter.NewHeatMap(matrixGrid{E}, pal.Palette(64))
	hm.Min, hm.Max = -lim, lim
	p.Add(hm)
	var labels plotter.XYLabels
	for j := 0; j < J; j++ {
		for l := 0; l < J; l++ {
			labels.XYs = append(labels.XYs, plotter.XY{X: float64(l), Y: float64(J - 1 - j)})
			labels.Labels = append(labels.Labels, fmt.Sprintf("%.2f", E.At(j, l)))
		}
	}
	lp, err := plotter.NewLabels(labels)
	if err != nil {
		return "", err
	}
	for i := range lp.TextStyle {
		lp.TextStyle[i].Font.Size = vg.Points(7)
		lp.TextStyle[i].XAlign = -0.5
		lp.TextStyle[i].YAlign = -0.5
	}
	p.Add(lp)
	rev := make([]string, J)
	for j := range names {
		rev[J-1-j] = names[j]
	}
	p.NominalX(names...)
	p.NominalY(rev...)
	p.X.Tick.Label.Rotation = math.Pi / 4
	p.X.Tick.Label.XAlign = -1
	size := vg.Length(40*J) + 3*vg.Inch
	return svgOf(p, size+vg.Inch, size)
}

// diversionBars draws, for each merging product, its diversion to the merger
// partner's products, to rivals and to the outside good.
func diversionBars(names []string, partner, rivals, outside []float64, market string) (template.HTML, error) {
	p := plot.New()
	stylePlot(p, "Where the merging parties' lost sales go, market "+market, "", "diversion ratio")
	w := vg.Points(12)
	for k, s := range []struct {
		v   []float64
		lab string
		c   color.Color
	}{{partner, "to the merger partner", signalColor}, {rivals, "to rivals", slateColor}, {outside, "to the outside good", amberColor}} {
		bc, err := plotter.NewBarChart(plotter.Values(s.v), w)
		if err != nil {
			return "", err
		}
		bc.Color = s.c
		bc.LineStyle.Width = 0
		bc.Offset = vg.Length(k-1) * w
		p.Add(bc)
		p.Legend.Add(s.lab, bc)
	}
	p.Legend.Top = true
	headroom(p, 0.3)
	p.NominalX(names...)
	p.X.Tick.Label.Rotation = math.Pi / 6
	p.X.Tick.Label.XAlign = -1
	return svgOf(p, vg.Length(60*len(names))+4*vg.Inch, 4*vg.Inch)
}

// priceChanges draws the predicted price change of each product of a market,
// with 95% intervals from parameter draws when there are any.
func priceChanges(names []string, change, lo, hi []float64, merging []bool, market string) (template.HTML, error) {
	p := plot.New()
	title := "Predicted price changes, market " + market
	if lo != nil {
		title += " (95% intervals from parameter draws)"
	}
	stylePlot(p, title, "", "price change, %")
	xys := make(plotter.XYs, len(change))
	for i := range change {
		xys[i] = plotter.XY{X: float64(i), Y: change[i]}
	}
	if lo != nil {
		errs := make(plotter.YErrors, len(change))
		for i := range change {
			errs[i].Low, errs[i].High = change[i]-lo[i], hi[i]-change[i]
		}
		eb, err := plotter.NewYErrorBars(struct {
			plotter.XYer
			plotter.YErrorer
		}{xys, errs})
		if err != nil {
			return "", err
		}
		eb.LineStyle.Color = inkColor
		p.Add(eb)
	}
	for _, group := range []bool{true, false} {
		var pts plotter.XYs
		for i := range change {
			if merging[i] == group {
				pts = append(pts, xys[i])
			}
		}
		if len(pts) == 0 {
			continue
		}
		sc, err := plotter.NewScatter(pts)
		if err != nil {
			return "", err
		}
		sc.GlyphStyle.Radius = vg.Points(4)
		sc.GlyphStyle.Shape = draw.CircleGlyph{}
		sc.GlyphStyle.Color = slateColor
		lab := "rivals"
		if group {
			sc.GlyphStyle.Color = signalColor
			lab = "merging parties"
		}
		p.Add(sc)
		p.Legend.Add(lab, sc)
	}
	p.Legend.Top = true
	p.Legend.Left = true
	p.Add(plotter.NewGrid())
	headroom(p, 0.25)
	p.NominalX(names...)
	p.X.Tick.Label.Rotation = math.Pi / 6
	p.X.Tick.Label.XAlign = -1
	return svgOf(p, vg.Length(36*len(names))+3*vg.Inch, 4*vg.Inch)
}

// hhiBars draws HHI before and after by market with the 1,800 line of the
// 2023 US Merger Guidelines.
func hhiBars(markets []string, pre, post []float64) (template.HTML, error) {
	p := plot.New()
	stylePlot(p, "Concentration before and after (HHI on inside shares)", "market", "HHI")
	w := vg.Points(5)
	if len(markets) < 20 {
		w = vg.Points(10)
	}
	for k, s := range []struct {
		v   []float64
		lab string
		c   color.Color
	}{{pre, "before", tealColor}, {post, "after", signalColor}} {
		bc, err := plotter.NewBarChart(plotter.Values(s.v), w)
		if err != nil {
			return "", err
		}
		bc.Color = s.c
		bc.LineStyle.Width = 0
		bc.Offset = vg.Length(2*k-1) * w / 2
		p.Add(bc)
		p.Legend.Add(s.lab, bc)
	}
	line := plotter.NewFunction(func(float64) float64 { return 1800 })
	line.Color = inkColor
	line.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
	p.Add(line)
	p.Legend.Add("HHI 1,800", line)
	p.Legend.Top = true
	p.Legend.Left = true
	headroom(p, 0.3)
	labels := make([]string, len(markets))
	for i, m := range markets {
		if len(markets) <= 25 || i%5 == 0 {
			labels[i] = m
		}
	}
	p.NominalX(labels...)
	return svgOf(p, vg.Length(2.2*float64(w)*float64(len(markets)))+3*vg.Inch, 4*vg.Inch)
}
