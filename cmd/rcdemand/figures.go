package main

import (
	"bytes"
	"fmt"
	"html/template"
	"image/color"
	"math"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/palette/moreland"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgsvg"
)

// The report's figures are gonum/plot plots rendered to SVG and inlined.
// gonum/plot's SVG backend escapes every text it writes, so user strings
// (product and firm names) are safe inside the figures. Every figure is at
// most figureWidth wide whatever the number of markets or products, and
// legends sit beside the plot, never on the data.

var (
	inkColor    = color.RGBA{0x26, 0x32, 0x38, 0xff}
	tealColor   = color.RGBA{0x1b, 0x7f, 0x79, 0xff}
	amberColor  = color.RGBA{0xd9, 0x8e, 0x04, 0xff}
	slateColor  = color.RGBA{0x8d, 0x99, 0xae, 0xff}
	signalColor = color.RGBA{0xb8, 0x3b, 0x5e, 0xff}
	regionColor = color.NRGBA{0xb8, 0x3b, 0x5e, 0x26}
)

// figureWidth is the widest figure of the report.
const figureWidth = vg.Length(720)

// canvasSVG renders paint on a w×h SVG canvas and returns the <svg> element.
func canvasSVG(w, h vg.Length, paint func(c draw.Canvas)) (template.HTML, error) {
	cv := vgsvg.New(w, h)
	paint(draw.New(cv))
	var buf bytes.Buffer
	if _, err := cv.WriteTo(&buf); err != nil {
		return "", err
	}
	out := buf.Bytes()
	if i := bytes.Index(out, []byte("<svg")); i > 0 {
		out = out[i:] // drop the XML prolog so the SVG can sit inside HTML
	}
	return template.HTML(out), nil // #nosec: produced by gonum/plot, which escapes its text
}

// plotSVG draws p on a w×h canvas with its legend in a column to the right
// of the axes.
func plotSVG(p *plot.Plot, w, h vg.Length) (template.HTML, error) {
	return canvasSVG(w, h, func(c draw.Canvas) {
		leg := p.Legend
		p.Legend = plot.NewLegend()
		lw := leg.Rectangle(c).Size().X
		if lw > 0 {
			lw += 16
		}
		p.Draw(draw.Crop(c, 0, -lw, 0, 0))
		if lw > 0 {
			strip := draw.Crop(c, c.Max.X-c.Min.X-lw+10, 0, 0, -p.Title.TextStyle.Rectangle("M").Size().Y-8)
			leg.Top, leg.Left = true, true
			leg.Draw(strip)
		}
		p.Legend = leg
	})
}

func stylePlot(p *plot.Plot, title, xlab, ylab string) {
	p.Title.Text = title
	p.X.Label.Text = xlab
	p.Y.Label.Text = ylab
	p.Title.TextStyle.Color = inkColor
	p.BackgroundColor = color.White
	p.Legend.TextStyle.Font.Size = vg.Points(10)
	p.Legend.Padding = vg.Points(4)
}

type matrixGrid struct {
	m *mat.Dense
}

func (g matrixGrid) Dims() (c, r int)   { r, c = g.m.Dims(); return c, r }
func (g matrixGrid) Z(c, r int) float64 { n, _ := g.m.Dims(); return g.m.At(n-1-r, c) }
func (g matrixGrid) X(c int) float64    { return float64(c) }
func (g matrixGrid) Y(r int) float64    { return float64(r) }

// heatCell returns the side of a heat-map cell for J products and the font
// size of the numbers in it (0: too small to print numbers).
func heatCell(J int) (cell, fontSize vg.Length) {
	cell = vg.Length(math.Min(52, math.Max(14, 460/float64(J))))
	switch {
	case cell >= 44:
		fontSize = 11
	case cell >= 34:
		fontSize = 9.5
	}
	return cell, fontSize
}

// elasticityHeatMap draws the J×J elasticity matrix, rows j (the product
// whose share responds) top to bottom, columns l (the price that moves),
// with a colour scale; it reports whether the numbers fit in the cells.
func elasticityHeatMap(E *mat.Dense, names []string, market string) (template.HTML, bool, error) {
	J, _ := E.Dims()
	p := plot.New()
	stylePlot(p, "Price elasticities, market "+market, "price of", "share of")
	lim := 0.0
	for j := 0; j < J; j++ {
		for l := 0; l < J; l++ {
			lim = math.Max(lim, math.Abs(E.At(j, l)))
		}
	}
	if lim == 0 {
		lim = 1
	}
	pal := moreland.SmoothBlueRed()
	pal.SetMin(-lim)
	pal.SetMax(lim)
	hm := plotter.NewHeatMap(matrixGrid{E}, pal.Palette(64))
	hm.Min, hm.Max = -lim, lim
	p.Add(hm)
	cell, fs := heatCell(J)
	if fs > 0 {
		var labels plotter.XYLabels
		for j := 0; j < J; j++ {
			for l := 0; l < J; l++ {
				labels.XYs = append(labels.XYs, plotter.XY{X: float64(l), Y: float64(J - 1 - j)})
				labels.Labels = append(labels.Labels, fmt.Sprintf("%.2f", E.At(j, l)))
			}
		}
		lp, err := plotter.NewLabels(labels)
		if err != nil {
			return "", false, err
		}
		for i := range lp.TextStyle {
			lp.TextStyle[i].Font.Size = fs
			lp.TextStyle[i].XAlign = draw.XCenter
			lp.TextStyle[i].YAlign = draw.YCenter
			lp.TextStyle[i].Color = inkColor
			if math.Abs(E.At(i/J, i%J)) > 0.6*lim {
				lp.TextStyle[i].Color = color.White
			}
		}
		p.Add(lp)
	}
	rev := make([]string, J)
	for j := range names {
		rev[J-1-j] = cut(names[j], 22)
	}
	short := make([]string, J)
	for j := range names {
		short[j] = cut(names[j], 22)
	}
	p.NominalX(short...)
	p.NominalY(rev...)
	p.X.Tick.Label.Rotation = math.Pi / 4
	p.X.Tick.Label.XAlign = draw.XRight
	side := cell*vg.Length(J) + 150 // the axes' labels take about 150 pt
	bar := vg.Length(90)
	svg, err := canvasSVG(side+bar, side+40, func(c draw.Canvas) {
		p.Draw(draw.Crop(c, 0, -bar, 0, 0))
		colourScale(draw.Crop(c, side+20, 0, 160, -60), pal, lim)
	})
	return svg, fs > 0, err
}

// colourScale draws a vertical colour bar for values in [−lim, lim] with
// five labelled ticks.
func colourScale(c draw.Canvas, pal interface {
	At(float64) (color.Color, error)
}, lim float64) {
	const steps = 48
	w := vg.Length(14)
	h := c.Max.Y - c.Min.Y
	for i := 0; i < steps; i++ {
		v := -lim + (float64(i)+0.5)*2*lim/steps
		col, err := pal.At(v)
		if err != nil {
			continue
		}
		y0 := c.Min.Y + h*vg.Length(i)/steps
		c.SetColor(col)
		c.Fill(vg.Path{{Type: vg.MoveComp, Pos: vg.Point{X: c.Min.X, Y: y0}}, {Type: vg.LineComp, Pos: vg.Point{X: c.Min.X + w, Y: y0}},
			{Type: vg.LineComp, Pos: vg.Point{X: c.Min.X + w, Y: y0 + h/steps + 0.5}}, {Type: vg.LineComp, Pos: vg.Point{X: c.Min.X, Y: y0 + h/steps + 0.5}}, {Type: vg.CloseComp}})
	}
	sty := text.Style{Color: inkColor, Font: font.From(plot.DefaultFont, 9.5), Handler: plot.DefaultTextHandler, YAlign: draw.YCenter}
	for k := 0; k <= 4; k++ {
		v := -lim + float64(k)*lim/2
		y := c.Min.Y + h*vg.Length(k)/4
		c.FillText(sty, vg.Point{X: c.Min.X + w + 4, Y: y}, fmt.Sprintf("%.2f", v))
	}
	title := sty
	title.YAlign = draw.YBottom
	c.FillText(title, vg.Point{X: c.Min.X, Y: c.Max.Y + 6}, "elasticity")
}

// diversionBars draws, for each of the parties' products, its diversion to
// the partners' products, to rivals and to the outside good.
func diversionBars(names []string, partner, rivals, outside []float64, market string, merger bool) (template.HTML, error) {
	p := plot.New()
	stylePlot(p, "Where lost sales go, market "+market, "", "diversion ratio")
	w := vg.Length(math.Min(12, 160/float64(len(names))))
	series := []struct {
		v   []float64
		lab string
		c   color.Color
	}{{partner, "to the partners' products", signalColor}, {rivals, "to other products", slateColor}, {outside, "to the outside good", amberColor}}
	if !merger {
		series = series[1:]
	}
	for k, s := range series {
		bc, err := plotter.NewBarChart(plotter.Values(s.v), w)
		if err != nil {
			return "", err
		}
		bc.Color = s.c
		bc.LineStyle.Width = 0
		bc.Offset = vg.Length(float64(k)-float64(len(series)-1)/2) * w
		p.Add(bc)
		p.Legend.Add(s.lab, bc)
	}
	p.Y.Min = 0
	labels := make([]string, len(names))
	for i, n := range names {
		labels[i] = cut(n, 20)
	}
	p.NominalX(labels...)
	p.X.Tick.Label.Rotation = math.Pi / 6
	p.X.Tick.Label.XAlign = draw.XRight
	return plotSVG(p, figureWidth, 300)
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
		sc, err := dots(pts, vg.Points(4), slateColor)
		if err != nil {
			return "", err
		}
		lab := "other products"
		if group {
			sc.GlyphStyle.Color = signalColor
			lab = "the parties' products"
		}
		p.Add(sc)
		p.Legend.Add(lab, sc)
	}
	p.Add(plotter.NewGrid())
	p.Y.Min = math.Min(p.Y.Min, 0)
	labels := make([]string, len(names))
	for i, n := range names {
		labels[i] = cut(n, 20)
	}
	p.NominalX(labels...)
	p.X.Tick.Label.Rotation = math.Pi / 6
	p.X.Tick.Label.XAlign = draw.XRight
	return plotSVG(p, figureWidth, 300)
}

// dots returns a scatter of pts drawn as filled circles of the radius and
// colour given.
func dots(pts plotter.XYs, radius vg.Length, c color.Color) (*plotter.Scatter, error) {
	sc, err := plotter.NewScatter(pts)
	if err != nil {
		return nil, err
	}
	sc.GlyphStyle.Shape = draw.CircleGlyph{}
	sc.GlyphStyle.Radius = radius
	sc.GlyphStyle.Color = c
	return sc, nil
}
