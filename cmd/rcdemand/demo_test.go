package main

import (
	"encoding/csv"
	"encoding/json"
	"math"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat"
)

// TestDemoIdentified (tracker #14, point 11): the invented cities have
// their own income distributions, so Π on price × income is identified:
// the demo converges from its start, every start of a multi-start search
// reaches the same minimum, and the estimate of Π is near its truth, 0.3
// (examples/coldbrew/truth.toml), with a tight interval.
func TestDemoIdentified(t *testing.T) {
	bin := sharedBinary(t)
	dir := t.TempDir()
	out, _ := mustRun(t, bin, dir, 0, "demo", "--out", "d", "--quiet")
	for _, w := range []string{"in total", "consumers", "HHI after (pre-merger shares)"} {
		if !strings.Contains(out, w) {
			t.Errorf("the demo's merger lacks %q", w)
		}
	}
	// City means of income differ by far more than sampling noise (150
	// agents of sd 0.7 each: noise sd 0.06).
	rows, err := csv.NewReader(strings.NewReader(readFile(t, filepath.Join(dir, "d", "agents.csv")))).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	sum, n := map[string]float64{}, map[string]float64{}
	for _, r := range rows[1:] {
		v, _ := strconv.ParseFloat(r[4], 64)
		sum[r[0]] += v
		n[r[0]]++
	}
	var means []float64
	for c := range sum {
		means = append(means, sum[c]/n[c])
	}
	if sd := stat.StdDev(means, nil); sd < 5*0.7/math.Sqrt(150) {
		t.Errorf("city mean incomes vary with sd %.3f: no more than sampling noise", sd)
	}
	mustRun(t, bin, filepath.Join(dir, "d"), 0, "estimate", "spec.toml", "--starts", "6", "--out", "multi.json", "--quiet")
	var res struct {
		Pi          []struct{ Value, SE float64 }
		Convergence struct{ Converged bool }
		MultiStart  struct {
			Starts int  `json:"starts"`
			Agree  bool `json:"agree"`
			Minima []struct {
				Starts []int `json:"starts"`
			} `json:"minima"`
		} `json:"multi_start"`
	}
	if err := json.Unmarshal([]byte(readFile(t, filepath.Join(dir, "d", "multi.json"))), &res); err != nil {
		t.Fatal(err)
	}
	ms := res.MultiStart
	if !res.Convergence.Converged || !ms.Agree || len(ms.Minima) != 1 || len(ms.Minima[0].Starts) != ms.Starts {
		t.Errorf("converged %v; %d starts found %d minima (agree %v)", res.Convergence.Converged, ms.Starts, len(ms.Minima), ms.Agree)
	}
	if pi := res.Pi[0]; math.Abs(pi.Value-0.3) > 2*pi.SE || pi.SE > 0.1 {
		t.Errorf("Π = %.3f (se %.3f), truth 0.3", pi.Value, pi.SE)
	}
}
