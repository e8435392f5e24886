package main

import (
	"fmt"
	"io"
	"strings"

	"rcdemand/merger"
)

// One label per concentration figure, used by the terminal, the report's
// tables and its charts alike (the JSON names are in merger.MarketRow).
const (
	labelHHIPre     = "HHI before"
	labelHHIAfter   = "HHI after (pre-merger shares)" // hhi_post_at_pre_shares: the Guidelines' figure
	labelDeltaHHI   = "ΔHHI (pre-merger shares)"      // delta_hhi_at_pre_shares
	labelHHIEq      = "HHI at the post-merger equilibrium"
	labelDeltaHHIEq = "ΔHHI at the post-merger equilibrium"
	presumptionRule = "HHI after > 1,800 or a party's share > 30%, with ΔHHI > 100"
)

// shownRows is the most rows of products or markets printed on a terminal;
// the output file has them all.
const shownRows = 12

// ownershipChange describes a change of ownership in words, for the
// merger's title and the screen's: a merger of the firms combined (into the
// merged firm, when named), the changes of an ownership table, and the
// parties when the firms combined do not name them.
func ownershipChange(combine []string, into, ownership string, parties []string) string {
	var parts []string
	if len(combine) > 0 {
		m := "a merger of " + strings.Join(combine, " + ")
		if into != "" {
			m += " (merged firm: " + into + ")"
		}
		parts = append(parts, m)
	}
	if ownership != "" {
		parts = append(parts, "the ownership changes of "+ownership)
	}
	text := strings.Join(parts, " with ")
	if len(parties) > 0 && (ownership != "" || len(parties) > 1) {
		text += "; parties (firms gaining products): " + strings.Join(parties, ", ")
	}
	return text
}

// scenarioTitle is a merger result's ownership change as a title, without
// the leading article: "Merger of A + B (merged firm: A)".
func scenarioTitle(r *merger.Result) string {
	t := ownershipChange(r.Combine, r.Into, r.Ownership, r.Parties)
	t = strings.TrimPrefix(strings.TrimPrefix(t, "a "), "the ")
	if t == "" {
		return t
	}
	return strings.ToUpper(t[:1]) + t[1:]
}

// printMerger prints a merger's effects: headline figures, intervals from
// draws, the parties' products and the markets.
func printMerger(w io.Writer, r *merger.Result, outPath string) {
	s := r.Summary
	title := scenarioTitle(r)
	if r.CostChange != 0 {
		title += fmt.Sprintf("; parties' marginal costs %+.1f%%", 100*r.CostChange)
	}
	fmt.Fprintf(w, "%s\n\n", wrap(title, ""))
	T := len(r.Markets)
	t := newTable("  ", col{head: "", left: true}, col{head: fmt.Sprintf("(%d markets with an equilibrium)", T-s.Unconverged), left: true})
	t.add("price change, share-weighted", fmt.Sprintf("parties %s · other products %s · all %s",
		pct(s.PriceChangePctMerging), pct(s.PriceChangePctRivals), pct(s.PriceChangePctAll)))
	dw := decimals(3, s.CSChangePerConsumerMean, s.PSChangePerConsumerMean)
	t.add("consumer surplus change", signed(s.CSChangePerConsumerMean, dw)+" per consumer (market mean)")
	if s.CSChangeMoneyTotal != nil {
		t.add("", fmt.Sprintf("%s in total (%s consumers)", signedThousands(*s.CSChangeMoneyTotal), thousands(*s.Consumers)))
	}
	t.add("producer surplus change", signed(s.PSChangePerConsumerMean, dw)+" per consumer (market mean)")
	if s.PSChangeMoneyTotal != nil {
		t.add("", signedThousands(*s.PSChangeMoneyTotal)+" in total")
	}
	if s.Consumers == nil {
		t.add("", "(in the currency of prices; [columns] market_size gives money)")
	} else {
		t.add("", "(in the currency of prices)")
	}
	t.rule()
	t.add(labelHHIPre, thousands(s.MeanHHIPre))
	t.add(labelHHIAfter, thousands(s.MeanHHIPostFixed))
	t.add(labelDeltaHHI, thousands(s.MeanDeltaHHIFixed))
	t.add(labelHHIEq, thousands(s.MeanHHIPost))
	t.add(labelDeltaHHIEq, thousands(s.MeanDeltaHHI))
	t.rule()
	t.add("2023 US Merger Guidelines", fmt.Sprintf("presumption met in %d of %d markets", s.MarketsPresumed, T))
	t.add("", "("+presumptionRule+")")
	if n := len(r.FailedMarkets); n > 0 {
		t.rule()
		t.add("markets without an equilibrium", fmt.Sprintf("%d, left out of the means above (see failed_markets)", n))
	}
	t.write(w)
	if d := r.Draws; d != nil {
		printDraws(w, d)
	}
	printPartyProducts(w, r)
	printMarkets(w, r, outPath)
	fmt.Fprintf(w, "\n%s\n", wrap(caution, ""))
}

// pct formats a percentage change with two decimals and a sign.
func pct(x float64) string { return signed(x, 2) + "%" }

// signedThousands formats a money amount: sign and thousands separators.
func signedThousands(x float64) string {
	if x >= 0 {
		return "+" + thousands(x)
	}
	return thousands(x)
}

// printDraws prints the 95% intervals from parameter draws, one table per
// unit so that each column shares its decimals.
func printDraws(w io.Writer, d *merger.Draws) {
	if d.Shard != nil {
		fmt.Fprintf(w, "\n  Parameter uncertainty: shard %d of %d, %d of its %d draws kept (intervals after rcdemand gather)\n", d.Shard.Index, d.Shard.Count, d.Used, len(d.Records))
	} else {
		fmt.Fprintf(w, "\n  Parameter uncertainty: %d of %d draws kept (%.0f%%)\n", d.Used, d.Requested, 100*d.UsedShare)
	}
	if d.Failed > 0 {
		fmt.Fprintln(w, wrap(fmt.Sprintf("Draws set aside: %d with a non-negative price coefficient for some agent, %d failed inversions, %d with a market without an equilibrium.",
			d.FailedAlpha, d.FailedInversion, d.FailedEquilibrium), "  "))
	}
	if !d.Intervals {
		fmt.Fprintln(w, wrap("No intervals: "+d.Note, "  "))
		return
	}
	if d.Failed > 0 {
		fmt.Fprintln(w, wrap("The 95% intervals are conditional on the draws kept, so narrower than the full sampling uncertainty.", "  "))
	} else {
		fmt.Fprintln(w, "  95% intervals:")
	}
	for _, g := range drawGroups {
		var rows []drawRow
		var all []float64
		for _, r := range g.rows {
			if iv, ok := d.Summary[r.key]; ok {
				rows = append(rows, r)
				all = append(all, iv.Lo, iv.Median, iv.Hi)
			}
		}
		if len(rows) == 0 {
			continue
		}
		dec := g.dec(all...)
		f := func(x float64) string { return signed(x, dec) }
		if dec < 0 {
			f = signedThousands
		}
		t := newTable("    ", col{head: g.title, left: true}, col{head: "2.5%"}, col{head: "median"}, col{head: "97.5%"})
		for _, r := range rows {
			iv := d.Summary[r.key]
			t.add(r.label, f(iv.Lo), f(iv.Median), f(iv.Hi))
		}
		fmt.Fprintln(w)
		t.write(w)
	}
}

// drawRow is one interval of the draws' summary: its key in Draws.Summary
// (and the JSON) and its label on the terminal.
type drawRow struct{ key, label string }

// drawGroups are the tables of the draws' summary printed, in order, each
// with its title, its decimals (negative: whole numbers with thousands
// separators) and its rows; a row whose key the summary lacks (the money
// totals without market sizes) is left out.
var drawGroups = []struct {
	title string
	dec   func(...float64) int
	rows  []drawRow
}{
	{"price change (share-weighted), %", func(...float64) int { return 2 }, []drawRow{
		{"price_change_pct_merging", "the parties' products"},
		{"price_change_pct_rivals", "other products"},
		{"price_change_pct_all", "all products"}}},
	{"per consumer, mean over markets", func(x ...float64) int { return decimals(3, x...) }, []drawRow{
		{"cs_change_per_consumer_market_mean", "consumer surplus change"},
		{"ps_change_per_consumer_market_mean", "producer surplus change"}}},
	{"money, total over markets", func(...float64) int { return -1 }, []drawRow{
		{"cs_change_money_total", "consumer surplus change"},
		{"ps_change_money_total", "producer surplus change"}}},
}

// printPartyProducts prints the parties' products, each over its markets.
func printPartyProducts(w io.Writer, r *merger.Result) {
	t := newTable("  ", col{head: "product", left: true, max: 18}, col{head: "owner before", left: true, max: 16}, col{head: "owner after", left: true, max: 16},
		col{head: "markets"}, col{head: "price\nchange"}, col{head: "range over\nmarkets, %", left: true}, col{head: "cost\noffset"})
	n := 0
	for _, e := range merger.ProductEffects(r) {
		if !e.Merging {
			continue
		}
		if n++; n > shownRows {
			continue
		}
		t.add(e.Product, e.FirmPre, e.FirmPost, fmt.Sprint(e.Markets), pct(e.PriceChangePct),
			signed(e.MinChangePct, 2)+" to "+signed(e.MaxChangePct, 2), pct(e.CompensatingShare))
	}
	fmt.Fprintf(w, "\n  The parties' products: share-weighted means over markets; the cost offset is the\n")
	fmt.Fprintf(w, "  marginal-cost change that would keep prices as they were (compensating cost change)\n")
	t.write(w)
	if n > shownRows {
		fmt.Fprintf(w, "  … %d more products in the output file\n", n-shownRows)
	}
}

// printMarkets prints the markets (the shownRows with the largest ΔHHI on
// pre-merger shares when there are more).
func printMarkets(w io.Writer, r *merger.Result, outPath string) {
	t := newTable("  ", col{head: "market", left: true, max: 12}, col{head: twoLines(labelHHIPre)}, col{head: twoLines(labelHHIAfter)},
		col{head: twoLines(labelDeltaHHI)}, col{head: "party\nshare"}, col{head: "presumed", left: true}, col{head: "CS change\nper consumer"})
	var idx []int
	if len(r.Markets) > shownRows {
		idx = merger.TopIndices(shownRows, len(r.Markets), func(k int) float64 { return r.Markets[k].DeltaHHIFixed })
	} else {
		for k := range r.Markets {
			idx = append(idx, k)
		}
	}
	var cs []float64
	for _, k := range idx {
		if r.Markets[k].Converged {
			cs = append(cs, r.Markets[k].CSChange)
		}
	}
	dc := decimals(3, cs...)
	for _, k := range idx {
		m := r.Markets[k]
		csText := signed(m.CSChange, dc)
		if !m.Converged {
			csText = "no equilibrium"
		}
		t.add(m.Market, thousands(m.HHIPre), thousands(m.HHIPostFixed), thousands(m.DeltaHHIFixed),
			fixed(m.MergedShare, 1)+"%", yesNo(m.Presumption), csText)
	}
	if len(r.Markets) > shownRows {
		fmt.Fprintf(w, "\n%s\n", wrap(fmt.Sprintf("The %d of %d markets with the largest %s; every market is in %s", shownRows, len(r.Markets), labelDeltaHHI, outPath), "  "))
	} else {
		fmt.Fprintf(w, "\n  Markets\n")
	}
	t.write(w)
}

// twoLines breaks a label before its parenthesis, for a column head.
func twoLines(label string) string {
	if i := strings.Index(label, " ("); i > 0 {
		return label[:i] + "\n" + label[i+1:]
	}
	if i := strings.Index(label, " "); i > 0 {
		return label[:i] + "\n" + label[i+1:]
	}
	return label
}

func yesNo(b bool) string {
	if b {
		return "yes"
	}
	return "no"
}
