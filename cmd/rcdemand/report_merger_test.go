package main

import (
	"fmt"
	"math"
	"testing"

	"rcdemand/merger"
)

// TestMergerReportWithoutEquilibria: with more than manyMarkets markets and
// none with a post-merger equilibrium (the rows of such markets keep the
// solver's closest prices), the report is drawn and the quantiles of the figures that
// need one are "—" (before, the report panicked on an empty list).
func TestMergerReportWithoutEquilibria(t *testing.T) {
	mr := &merger.Result{Combine: []string{"A", "B"}, Into: "A", Parties: []string{"A"}}
	for k := 0; k < manyMarkets+1; k++ {
		id := fmt.Sprint(k + 1)
		mr.Markets = append(mr.Markets, merger.MarketRow{Market: id, HHIPre: 2000 + float64(k), HHIPostFixed: 2500, DeltaHHIFixed: 500 - float64(k),
			HHIPost: math.NaN(), DeltaHHI: math.NaN(), CSChange: math.NaN()})
		mr.Products = append(mr.Products, merger.ProductRow{Market: id, Product: "a", FirmPre: "A", FirmPost: "A", Merging: true, SharePre: 0.2, PriceChangePct: 3},
			merger.ProductRow{Market: id, Product: "b", FirmPre: "B", FirmPost: "A", Merging: true, SharePre: 0.3, PriceChangePct: 3})
		mr.FailedMarkets = append(mr.FailedMarkets, merger.FailedMarket{Market: id})
	}
	mv, err := mergerReport(mr, "1")
	if err != nil {
		t.Fatal(err)
	}
	if len(mv.Dist) != 6 {
		t.Fatalf("%d rows of quantiles, want 6", len(mv.Dist))
	}
	for _, d := range mv.Dist[:3] { // HHI before, after and ΔHHI on pre-merger shares: every market
		if d.Min == "—" || d.Median == "—" || d.Max == "—" {
			t.Errorf("%s: %+v, want figures", d.What, d)
		}
	}
	for _, d := range mv.Dist[3:] {
		if d != (distView{What: d.What, Min: "—", Q1: "—", Median: "—", Q3: "—", Max: "—"}) {
			t.Errorf("%s: %+v, want — throughout", d.What, d)
		}
	}
	if len(mv.Rows) != topRows || mv.Rows[0].Market != "1" || mv.Rows[0].Price != "no equilibrium" {
		t.Errorf("largest ΔHHI first: %+v", mv.Rows)
	}
}
