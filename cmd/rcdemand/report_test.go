package main

import (
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"
)

const hostile = "<script>alert(1)</script>"

// reportFixture writes the demo data with one firm renamed to a script tag,
// estimates it, simulates a merger with that firm (with parameter draws) and
// writes the report; it returns the report's path.
func reportFixture(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	for _, name := range []string{"spec.toml", "products.csv", "agents.csv"} {
		raw, err := demoFiles.ReadFile("demodata/" + name)
		if err != nil {
			t.Fatal(err)
		}
		raw = bytes.ReplaceAll(raw, []byte("Northfield Drinks"), []byte(hostile))
		os.WriteFile(filepath.Join(dir, name), raw, 0o644)
	}
	res := filepath.Join(dir, "results.json")
	steps := [][]string{
		{"estimate", filepath.Join(dir, "spec.toml"), "--out", res, "--quiet"},
		{"merger", res, "--combine", "Harbor Roast," + hostile, "--draws", "100", "--quiet", "--out", filepath.Join(dir, "merger.json")},
		{"report", res, "--merger", filepath.Join(dir, "merger.json"), "--out", filepath.Join(dir, "report.html")},
	}
	for _, args := range steps {
		if code, _, errs := runCLI(t, args...); code != 0 {
			t.Fatalf("%s: exit %d: %s", args[0], code, errs)
		}
	}
	return filepath.Join(dir, "report.html")
}

// TestReportContent checks the report's parts and that user strings are
// escaped: the report carries no script of any kind.
func TestReportContent(t *testing.T) {
	raw, err := os.ReadFile(reportFixture(t))
	if err != nil {
		t.Fatal(err)
	}
	html := string(raw)
	for _, want := range []string{`id="estimates-table"`, `id="hhi-table"`, `id="caution"`, "qualified counsel", "Price elasticities", "Hansen J", "&lt;script&gt;alert(1)&lt;/script&gt;"} {
		if !strings.Contains(html, want) {
			t.Errorf("report lacks %q", want)
		}
	}
	// The first-stage verdict says its strength, then why.
	if !regexp.MustCompile(`robust F [0-9.]+\. (strong|weak): F = `).MatchString(html) {
		t.Error("the first-stage line does not say strong or weak before its reason")
	}
	if n := strings.Count(html, "<svg"); n < 4 {
		t.Errorf("%d figures, want 4", n)
	}
	// The caution once, in a box titled once; margins and Lerner indices.
	if n := strings.Count(html, "qualified counsel"); n != 1 {
		t.Errorf("the caution appears %d times", n)
	}
	if strings.Contains(html, "Caution. Caution") || strings.Contains(html, "Caution: Caution") {
		t.Error("the caution box repeats its title")
	}
	// The heat map's numbers are readable and it has a colour scale.
	heat := figureWith(t, html, "Price elasticities")
	for _, m := range regexp.MustCompile(`font-size:([0-9.]+)px`).FindAllStringSubmatch(heat, -1) {
		if size, _ := strconv.ParseFloat(m[1], 64); size < 9 {
			t.Errorf("heat-map text of %v pt", size)
		}
	}
	if !strings.Contains(heat, ">elasticity<") {
		t.Error("the heat map has no colour scale")
	}
	for _, want := range []string{`id="margins-table"`, `id="firm-margins-table"`, "Lerner index", "marginal cost"} {
		if !strings.Contains(html, want) {
			t.Errorf("report lacks %q", want)
		}
	}
	if strings.Contains(strings.ToLower(html), "<script") {
		t.Error("the report contains a script element")
	}
	for _, fetch := range []string{"http://", "https://", "src=\"//"} {
		if strings.Contains(strings.ReplaceAll(html, "http://www.w3.org/", ""), fetch) {
			t.Errorf("the report refers to %q: it must not fetch anything", fetch)
		}
	}
}

// TestReportInBrowser renders the report in headless Chromium (installed by
// .ci/run) to a PNG and a DOM dump. It is skipped where Chromium is absent,
// except under CI, where that is a failure.
func TestReportInBrowser(t *testing.T) {
	browser := findChromium(t)
	report := reportFixture(t)
	dir := t.TempDir()
	run := func(extra ...string) []byte { return runChromium(t, browser, dir, "file://"+report, extra...) }
	png := filepath.Join(dir, "report.png")
	run("--screenshot="+png, "--window-size=1280,4000")
	if st, err := os.Stat(png); err != nil || st.Size() < 10000 {
		t.Fatalf("screenshot: %v", err)
	}
	dom := string(run("--dump-dom"))
	for _, want := range []string{`id="estimates-table"`, `id="caution"`, "qualified counsel", "&lt;script&gt;alert(1)&lt;/script&gt;"} {
		if !strings.Contains(dom, want) {
			t.Errorf("rendered DOM lacks %q", want)
		}
	}
	if n := strings.Count(dom, "<svg"); n < 2 {
		t.Errorf("rendered DOM has %d figures", n)
	}
	if strings.Contains(dom, "<script") {
		t.Error("a script element reached the rendered DOM")
	}
}

// findChromium returns the headless browser, or skips the test (a failure
// under CI, whose script installs it).
func findChromium(t *testing.T) string {
	t.Helper()
	browser, err := exec.LookPath("chromium")
	if err != nil {
		if os.Getenv("CI") != "" {
			t.Fatal("chromium is not installed; .ci/run installs it")
		}
		t.Skip("chromium not installed")
	}
	return browser
}

// runChromium runs headless Chromium on url with a profile in dir and
// returns its stdout.
func runChromium(t *testing.T, browser, dir, url string, extra ...string) []byte {
	t.Helper()
	flags := []string{"--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
		"--disable-component-update", "--disable-sync", "--user-data-dir=" + filepath.Join(dir, "profile")}
	cmd := exec.Command(browser, append(append(flags, extra...), url)...)
	var out bytes.Buffer
	cmd.Stdout = &out
	done := make(chan error, 1)
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	go func() { done <- cmd.Wait() }()
	select {
	case err := <-done:
		if err != nil {
			t.Fatalf("chromium %v: %v", extra, err)
		}
	case <-time.After(90 * time.Second):
		cmd.Process.Kill()
		t.Fatal("chromium did not finish in 90 s")
	}
	return out.Bytes()
}

// TestReportWithStudy: report --study adds the trust study's table,
// verdicts and the figure of standardised estimates; a shard is refused.
func TestReportWithStudy(t *testing.T) {
	dir := t.TempDir()
	raw, err := os.ReadFile("../../testdata/synthetic-small/products.csv")
	if err != nil {
		t.Fatal(err)
	}
	os.WriteFile(filepath.Join(dir, "products.csv"), raw, 0o644)
	os.WriteFile(filepath.Join(dir, "spec.toml"), []byte("[data]\nproducts = \"products.csv\"\n[demand]\nlinear = [\"1\", \"price\", \"x1\", \"x2\"]\n[instruments]\nexcluded = [\"z_cost\", \"z_rival_x1\", \"z_rival_x2\"]\n"), 0o644)
	res, st, html := filepath.Join(dir, "results.json"), filepath.Join(dir, "study.json"), filepath.Join(dir, "report.html")
	for _, args := range [][]string{
		{"estimate", filepath.Join(dir, "spec.toml"), "--out", res, "--quiet"},
		{"study", res, "--replications", "12", "--out", st, "--quiet"},
		{"report", res, "--study", st, "--out", html},
	} {
		if code, _, errs := runCLI(t, args...); code != 0 {
			t.Fatalf("%s: exit %d: %s", args[0], code, errs)
		}
	}
	page, _ := os.ReadFile(html)
	for _, want := range []string{`id="study"`, `id="study-table"`, "Standardised estimates against the normal approximation", "coverage of 95% intervals", "standard normal"} {
		if !strings.Contains(string(page), want) {
			t.Errorf("report lacks %q", want)
		}
	}
	shard := filepath.Join(dir, "shard.json")
	if code, _, errs := runCLI(t, "study", res, "--replications", "4", "--shard", "0/2", "--out", shard, "--quiet"); code != 0 {
		t.Fatalf("study shard: exit %d: %s", code, errs)
	}
	if code, _, errs := runCLI(t, "report", res, "--study", shard, "--out", html); code != 1 || !strings.Contains(errs, "gather the shards first") {
		t.Errorf("report of a shard: exit %d, stderr %q", code, errs)
	}
}
