package main

import (
	"html"
	"math"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// TestOneHHIPerLabel (tracker #14, point 3): each HHI label means one
// figure, and the JSON, the terminal, the report's table and its chart
// agree market by market (six markets: one bar per market).
func TestOneHHIPerLabel(t *testing.T) {
	bin := sharedBinary(t)
	sim := filepath.Join(synthLogit(t, bin, 6, false), "sim")
	term, _ := mustRun(t, bin, sim, 0, "merger", "results.json", "--combine", "Alder & Sons,Bruma Foods", "--out", "m.json")
	mustRun(t, bin, sim, 0, "report", "results.json", "--merger", "m.json", "--out", "r.html")
	m := readMergerFile(t, filepath.Join(sim, "m.json"))
	page := readFile(t, filepath.Join(sim, "r.html"))
	chart := figureWith(t, page, "Concentration by market")
	tableRows := tableCells(t, page, "hhi-table")
	for _, label := range []string{labelHHIPre, labelHHIAfter, labelDeltaHHI, labelHHIEq} {
		if !strings.Contains(html.UnescapeString(page), label) {
			t.Errorf("the report does not use the label %q", label)
		}
	}
	for _, label := range []string{labelHHIPre, labelHHIAfter, labelHHIEq} {
		if !strings.Contains(chart, label) {
			t.Errorf("the chart's legend lacks %q", label)
		}
	}
	for _, label := range []string{labelHHIAfter, labelDeltaHHI, labelHHIEq, labelDeltaHHIEq} {
		if !strings.Contains(term, label) {
			t.Errorf("the terminal lacks %q", label)
		}
	}
	if len(m.Markets) != 6 || len(tableRows) != 6 {
		t.Fatalf("%d markets in the JSON, %d rows in the report's table", len(m.Markets), len(tableRows))
	}
	for k, mk := range m.Markets {
		id := mk["market"].(string)
		pre, after, delta := mk["hhi_pre"].(float64), mk["hhi_post_at_pre_shares"].(float64), mk["delta_hhi_at_pre_shares"].(float64)
		eq, deltaEq := mk["hhi_post"].(float64), mk["delta_hhi"].(float64)
		if math.Abs(after-pre-delta) > 1e-9 || math.Abs(eq-pre-deltaEq) > 1e-9 {
			t.Errorf("market %s: ΔHHI does not match its HHI after", id)
		}
		want := []string{id, thousands(pre), thousands(after), thousands(delta), thousands(eq)}
		if got := tableRows[k][:5]; strings.Join(got, "|") != strings.Join(want, "|") {
			t.Errorf("market %s: report table %v, JSON %v", id, got, want)
		}
		line := regexp.MustCompile(`(?m)^  ` + regexp.QuoteMeta(id) + ` +(\S+) +(\S+) +(\S+) `).FindStringSubmatch(term)
		if line == nil || line[1] != want[1] || line[2] != want[2] || line[3] != want[3] {
			t.Errorf("market %s: terminal %v, JSON %v", id, line, want[1:4])
		}
		for _, v := range want[1:3] {
			if !strings.Contains(chart, ">"+v+"<") {
				t.Errorf("market %s: the chart has no bar labelled %s", id, v)
			}
		}
	}
	s := m.Summary
	for _, c := range []struct{ label, key string }{{labelHHIAfter, "mean_hhi_post_at_pre_shares"}, {labelDeltaHHI, "mean_delta_hhi_at_pre_shares"},
		{labelHHIEq, "mean_hhi_post"}, {labelDeltaHHIEq, "mean_delta_hhi"}} {
		if !regexp.MustCompile(`(?m)^  ` + regexp.QuoteMeta(c.label) + ` +` + regexp.QuoteMeta(thousands(s[c.key].(float64))) + `$`).MatchString(term) {
			t.Errorf("the terminal's %q is not the JSON's %s %v", c.label, c.key, s[c.key])
		}
	}
}

// figureWith returns the <svg> of the report whose text contains title.
func figureWith(t *testing.T, page, title string) string {
	t.Helper()
	for _, svg := range strings.Split(page, "<svg")[1:] {
		svg = svg[:strings.Index(svg, "</svg>")]
		if strings.Contains(svg, title) {
			return html.UnescapeString(svg)
		}
	}
	t.Fatalf("no figure titled %q", title)
	return ""
}

var (
	rowRE  = regexp.MustCompile(`(?s)<tr>(.*?)</tr>`)
	cellRE = regexp.MustCompile(`(?s)<td[^>]*>(.*?)</td>`)
	tagRE  = regexp.MustCompile(`<[^>]+>`)
)

// tableCells returns the text of the body cells of the table with the id.
func tableCells(t *testing.T, page, id string) [][]string {
	t.Helper()
	i := strings.Index(page, `id="`+id+`"`)
	if i < 0 {
		t.Fatalf("no table %q", id)
	}
	body := page[i:]
	body = body[strings.Index(body, "<tbody>"):strings.Index(body, "</tbody>")]
	var rows [][]string
	for _, r := range rowRE.FindAllStringSubmatch(body, -1) {
		var cells []string
		for _, c := range cellRE.FindAllStringSubmatch(r[1], -1) {
			cells = append(cells, html.UnescapeString(tagRE.ReplaceAllString(c[1], "")))
		}
		rows = append(rows, cells)
	}
	return rows
}
