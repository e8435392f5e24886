package main

import (
	"fmt"
	"html/template"
	"image/color"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// The merger figures. Up to manyMarkets markets a bar per market is shown;
// above, distributions across markets, so the figures keep their size
// whatever the number of markets.

// manyMarkets is the most markets shown one by one in the report.
const manyMarkets = 12

// hhiTicks labels an HHI axis as the tables do: 2,500, not 2500.00.
type hhiTicks struct{}

func (hhiTicks) Ticks(lo, hi float64) []plot.Tick {
	ts := plot.DefaultTicks{}.Ticks(lo, hi)
	for i := range ts {
		if ts[i].Label != "" {
			ts[i].Label = thousands(ts[i].Value)
		}
	}
	return ts
}

// hhiBars draws, for a few markets, HHI before and after on pre-merger
// shares as labelled bars and HHI at the post-merger equilibrium as a dot,
// with the 1,800 line of the 2023 US Merger Guidelines.
func hhiBars(markets []string, pre, after, eq []float64) (template.HTML, error) {
	p := plot.New()
	stylePlot(p, "Concentration by market (HHI on inside shares)", "market", "HHI")
	w := vg.Length(math.Min(26, 260/float64(len(markets))))
	var labels plotter.XYLabels
	for k, s := range []struct {
		v   []float64
		lab string
		c   color.Color
	}{{pre, labelHHIPre, tealColor}, {after, labelHHIAfter, signalColor}} {
		bc, err := plotter.NewBarChart(plotter.Values(s.v), w)
		if err != nil {
			return "", err
		}
		bc.Color = s.c
		bc.LineStyle.Width = 0
		bc.Offset = vg.Length(2*k-1) * w / 2
		p.Add(bc)
		p.Legend.Add(s.lab, bc)
		for i, v := range s.v {
			labels.XYs = append(labels.XYs, plotter.XY{X: float64(i) + float64(2*k-1)*0.18, Y: v})
			labels.Labels = append(labels.Labels, thousands(v))
		}
	}
	lp, err := plotter.NewLabels(labels)
	if err != nil {
		return "", err
	}
	for i := range lp.TextStyle {
		lp.TextStyle[i].Font.Size = 8.5
		lp.TextStyle[i].XAlign = draw.XCenter
		lp.TextStyle[i].YAlign = draw.YBottom
		lp.TextStyle[i].Color = inkColor
	}
	p.Add(lp)
	var pts plotter.XYs
	for i, v := range eq {
		if !math.IsNaN(v) { // a market without a post-merger equilibrium has no dot
			pts = append(pts, plotter.XY{X: float64(i), Y: v})
		}
	}
	if len(pts) > 0 {
		sc, err := dots(pts, 3.5, inkColor)
		if err != nil {
			return "", err
		}
		p.Add(sc)
		p.Legend.Add(labelHHIEq, sc)
	}
	line := plotter.NewFunction(func(float64) float64 { return 1800 })
	line.Color = inkColor
	line.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
	p.Add(line)
	p.Legend.Add("HHI 1,800 (Guidelines)", line)
	p.Y.Min = 0
	p.Y.Max = math.Max(p.Y.Max*1.08, 2000)
	p.Y.Tick.Marker = hhiTicks{}
	names := make([]string, len(markets))
	for i, m := range markets {
		names[i] = cut(m, 14)
	}
	p.NominalX(names...)
	return plotSVG(p, figureWidth, 320)
}

// priceHistogram draws the distribution across markets of the parties'
// share-weighted price change.
func priceHistogram(change []float64) (template.HTML, error) {
	var kept []float64
	for _, v := range change {
		if !math.IsNaN(v) { // markets without a post-merger equilibrium
			kept = append(kept, v)
		}
	}
	change = kept
	p := plot.New()
	stylePlot(p, fmt.Sprintf("Parties' price change across %d markets", len(change)), "share-weighted price change of the parties' products, %", "markets")
	bins := int(math.Min(30, math.Max(8, math.Sqrt(float64(len(change))))))
	h, err := plotter.NewHist(plotter.Values(change), bins)
	if err != nil {
		return "", err
	}
	h.FillColor = signalColor
	h.LineStyle.Color = inkColor
	h.LineStyle.Width = 0.5
	p.Add(h)
	p.Y.Min = 0
	return plotSVG(p, 600, 300)
}

// hhiScatter draws ΔHHI against HHI after the merger (both on pre-merger
// shares) for every market, with the region of the 2023 US Merger
// Guidelines' HHI presumption (HHI > 1,800 and ΔHHI > 100) shaded; markets
// where the presumption is met (by HHI or by share) are marked.
func hhiScatter(after, delta []float64, presumed []bool) (template.HTML, error) {
	p := plot.New()
	stylePlot(p, fmt.Sprintf("Concentration in %d markets (pre-merger shares)", len(after)), labelHHIAfter, labelDeltaHHI)
	ymax := 200.0
	for _, d := range delta {
		ymax = math.Max(ymax, d*1.1)
	}
	region, err := plotter.NewPolygon(plotter.XYs{{X: 1800, Y: 100}, {X: 10000, Y: 100}, {X: 10000, Y: ymax}, {X: 1800, Y: ymax}})
	if err != nil {
		return "", err
	}
	region.Color = regionColor
	region.LineStyle.Width = 0
	p.Add(region)
	p.Legend.Add("presumption region by HHI", region)
	for _, guide := range []plotter.XYs{{{X: 1800, Y: 0}, {X: 1800, Y: ymax}}, {{X: 0, Y: 100}, {X: 10000, Y: 100}}} {
		l, err := plotter.NewLine(guide)
		if err != nil {
			return "", err
		}
		l.Color = inkColor
		l.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
		p.Add(l)
	}
	for _, group := range []bool{false, true} {
		var pts plotter.XYs
		for i := range after {
			if presumed[i] == group {
				pts = append(pts, plotter.XY{X: after[i], Y: delta[i]})
			}
		}
		if len(pts) == 0 {
			continue
		}
		sc, err := dots(pts, 2.5, slateColor)
		if err != nil {
			return "", err
		}
		lab := "presumption not met"
		if group {
			sc.GlyphStyle.Color = signalColor
			lab = "presumption met"
		}
		p.Add(sc)
		p.Legend.Add(lab, sc)
	}
	p.X.Min, p.X.Max = 0, 10000
	p.Y.Min, p.Y.Max = 0, ymax
	p.X.Tick.Marker, p.Y.Tick.Marker = hhiTicks{}, hhiTicks{}
	return plotSVG(p, figureWidth, 360)
}
