package main

import (
	"math"
	"path/filepath"
	"strings"
	"testing"
)

// TestWelfareInMoney (tracker #14, point 4): with [columns] market_size the
// merger gives consumer-surplus and profit changes in money per market and
// in total; without it, per consumer only, never summed over markets.
func TestWelfareInMoney(t *testing.T) {
	bin := sharedBinary(t)
	sized := filepath.Join(synthLogit(t, bin, 5, true), "sim")
	out, _ := mustRun(t, bin, sized, 0, "merger", "results.json", "--combine", "Alder & Sons,Bruma Foods", "--out", "m.json")
	m := readMergerFile(t, filepath.Join(sized, "m.json"))
	var cs, ps, consumers float64
	for _, mk := range m.Markets {
		size, per, money := mk["market_size"].(float64), mk["cs_change"].(float64), mk["cs_change_money"].(float64)
		if !(size > 0) || math.Abs(money-per*size) > 1e-9*math.Abs(money) {
			t.Errorf("market %v: cs_change_money %v, want cs_change %v × market_size %v", mk["market"], money, per, size)
		}
		cs += money
		ps += mk["ps_change_money"].(float64)
		consumers += size
	}
	s := m.Summary
	if math.Abs(s["cs_change_money_total"].(float64)-cs) > 1e-6*math.Abs(cs) || math.Abs(s["ps_change_money_total"].(float64)-ps) > 1e-6*math.Abs(ps) || s["consumers_total"].(float64) != consumers {
		t.Errorf("summary %v: totals %v, %v over %v consumers", s, cs, ps, consumers)
	}
	if !strings.Contains(out, thousands(cs)+" in total") || !strings.Contains(out, "per consumer") {
		t.Errorf("the terminal does not give the money total %s:\n%s", thousands(cs), out)
	}
	mustRun(t, bin, sized, 0, "report", "results.json", "--merger", "m.json", "--out", "r.html")
	if page := readFile(t, filepath.Join(sized, "r.html")); !strings.Contains(page, thousands(cs)+" in total") {
		t.Errorf("the report does not give the money total %s", thousands(cs))
	}

	plain := filepath.Join(synthLogit(t, bin, 5, false), "sim")
	out, _ = mustRun(t, bin, plain, 0, "merger", "results.json", "--combine", "Alder & Sons,Bruma Foods", "--out", "m.json")
	raw := readFile(t, filepath.Join(plain, "m.json"))
	for _, bad := range []string{"money", "sum_over_markets", "market_size"} {
		if strings.Contains(raw, bad) {
			t.Errorf("without market sizes the merger file has %q", bad)
		}
	}
	if strings.Contains(out, "summed") || !strings.Contains(out, "per consumer") || !strings.Contains(out, "market_size") {
		t.Errorf("without market sizes the terminal must say per consumer, point at market_size and sum nothing:\n%s", out)
	}
}
