package main

import (
	"encoding/json"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
)

// measureScript, added to a copy of a report, writes what the browser laid
// out into a <pre id="measure">: the page's widths, every figure's width
// (its width attribute in pt and as drawn, in CSS px), the right edge of the
// widest element, and the number of table rows.
const measureScript = `<script>
window.addEventListener('load', () => {
  const d = document.documentElement;
  const r = {scrollWidth: d.scrollWidth, clientWidth: d.clientWidth, rows: document.querySelectorAll('tr').length, figures: [], right: 0};
  document.querySelectorAll('svg, img').forEach(e => {
    const m = /^([0-9.]+)pt$/.exec(e.getAttribute('width') || '');
    r.figures.push({pt: m ? +m[1] : -1, px: e.getBoundingClientRect().width});
  });
  document.querySelectorAll('body *').forEach(e => { r.right = Math.max(r.right, e.getBoundingClientRect().right); });
  const pre = document.createElement('pre');
  pre.id = 'measure';
  pre.textContent = JSON.stringify(r);
  document.body.appendChild(pre);
});
</script>`

type layout struct {
	ScrollWidth, ClientWidth, Rows int
	Right                          float64
	Figures                        []struct{ Pt, Px float64 }
}

var measured = regexp.MustCompile(`<pre id="measure">(.*?)</pre>`)

// TestReportScalesInBrowser (tracker #14, point 5): the report of 400
// markets, laid out by headless Chromium, is no wider than the window, no
// figure is wider than 1,000 pt, and the whole report has at most 80 table
// rows; above a dozen markets it shows distributions and the top markets.
func TestReportScalesInBrowser(t *testing.T) {
	browser := findChromium(t)
	bin := sharedBinary(t)
	sim := filepath.Join(synthLogit(t, bin, 400, true), "sim")
	writeFile(t, filepath.Join(sim, "owners.csv"), "product,firm_after\nP03,Bruma Foods\nP07,Bruma Foods\n")
	mustRun(t, bin, sim, 0, "merger", "results.json", "--ownership", "owners.csv", "--out", "m.json", "--quiet")
	mustRun(t, bin, sim, 0, "report", "results.json", "--merger", "m.json", "--out", "r.html")
	page := readFile(t, filepath.Join(sim, "r.html"))
	for _, want := range []string{"across 400 markets", "Concentration in 400 markets", `id="distribution-table"`, `id="price-table"`, "The 10 markets with the largest"} {
		if !strings.Contains(page, want) {
			t.Errorf("the report of 400 markets lacks %q", want)
		}
	}
	if strings.Contains(page, "Concentration by market") {
		t.Error("the report of 400 markets draws one bar per market")
	}
	probe := filepath.Join(sim, "probe.html")
	writeFile(t, probe, strings.Replace(page, "</body>", measureScript+"</body>", 1))
	for _, width := range []int{1280, 1024} {
		dom := string(runChromium(t, browser, t.TempDir(), "file://"+probe, "--dump-dom", "--virtual-time-budget=10000", "--window-size="+strconv.Itoa(width)+",900"))
		m := measured.FindStringSubmatch(dom)
		if m == nil {
			t.Fatalf("no measure in the rendered DOM at %d px", width)
		}
		var l layout
		if err := json.Unmarshal([]byte(m[1]), &l); err != nil {
			t.Fatal(err)
		}
		t.Logf("at %d px: %+v", width, l)
		if l.ScrollWidth > l.ClientWidth || l.Right > float64(l.ClientWidth)+0.5 {
			t.Errorf("at %d px: page %d px wide in a window of %d (widest element ends at %.0f)", width, l.ScrollWidth, l.ClientWidth, l.Right)
		}
		if l.Rows > 80 {
			t.Errorf("%d table rows, want at most 80", l.Rows)
		}
		if len(l.Figures) < 5 {
			t.Errorf("%d figures", len(l.Figures))
		}
		for i, f := range l.Figures {
			if f.Pt > 1000 || f.Pt < 0 || f.Px > 1000*4.0/3 {
				t.Errorf("figure %d: %v pt, drawn %.0f px wide", i, f.Pt, f.Px)
			}
		}
	}
}
