package main

import (
	"bytes"
	"context"
	"encoding/json"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"golang.org/x/net/html"

	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render"
	"github.com/regdrift/regdrift/render/figure"
	"github.com/regdrift/regdrift/render/report/reporttest"
)

// The report's tests check it against the other commands' outputs for the
// same job: the headline against its own JSON and against map and yield,
// the map's look-up against sites.csv and yield.csv, the embedded job text
// against the file.

const (
	reportJob     = "../../samples/two-core.toml"
	reportTargets = "../../samples/twocore-targets.csv"
	// reportTrials is the Monte Carlo size of the tests: small, as the
	// numbers are compared with yield's for the same trials and seed.
	reportTrials = "2000"
)

// runReport runs report on job with extra args into a new directory and
// returns the directory, the page and the --json summary.
func runReport(t *testing.T, job string, args ...string) (string, []byte, map[string]any) {
	t.Helper()
	dir := t.TempDir()
	all := append([]string{"report", job, "-o", dir, "--json", "--trials", reportTrials}, args...)
	code, stdout, stderr := run(t, all...)
	if code != 0 {
		t.Fatalf("report: exit %d: %s", code, stderr)
	}
	var sum map[string]any
	if err := json.Unmarshal([]byte(stdout), &sum); err != nil {
		t.Fatalf("--json: %v\n%s", err, stdout)
	}
	page, err := os.ReadFile(filepath.Join(dir, "report.html"))
	if err != nil {
		t.Fatal(err)
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 1 {
		t.Errorf("report wrote %d files, want report.html alone", len(ents))
	}
	return dir, page, sum
}

func attrOf(n *html.Node, key string) string {
	for _, a := range n.Attr {
		if a.Key == key {
			return a.Val
		}
	}
	return ""
}

func textOf(n *html.Node) string {
	var b strings.Builder
	for c := range n.Descendants() {
		if c.Type == html.TextNode {
			b.WriteString(c.Data)
		}
	}
	return b.String()
}

// headlineItem is one key figure of the page: its value and note.
type headlineItem struct{ value, unit, note string }

func headlineOf(doc *html.Node) map[string]headlineItem {
	out := map[string]headlineItem{}
	for n := range doc.Descendants() {
		key := attrOf(n, "data-key")
		if n.Type != html.ElementNode || key == "" {
			continue
		}
		var it headlineItem
		for c := range n.Descendants() {
			if c.Type == html.ElementNode && c.Data == "span" {
				switch attrOf(c, "class") {
				case "value":
					it.value = textOf(c)
				case "unit":
					it.unit = textOf(c)
				case "note":
					it.note = textOf(c)
				}
			}
		}
		out[key] = it
	}
	return out
}

// printedEqual reports whether the printed number s equals want to the
// precision printed: within half a unit in its last decimal place (and a
// relative 1e-12 for the arithmetic of the scaling).
func printedEqual(s string, want float64) bool {
	s = strings.TrimSpace(s)
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return false
	}
	d := 0
	if i := strings.IndexByte(s, '.'); i >= 0 {
		d = len(s) - i - 1
	}
	return math.Abs(v-want) <= 0.5*math.Pow(10, -float64(d))+1e-12*math.Abs(want)
}

// numberIn returns the first number in s after prefix.
func numberIn(s, prefix string) string {
	_, rest, ok := strings.Cut(s, prefix)
	if !ok {
		return ""
	}
	f := strings.Fields(rest)
	if len(f) == 0 {
		return ""
	}
	return strings.TrimRight(f[0], ",%")
}

func jsonOf(t *testing.T, path string) map[string]any {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var v map[string]any
	if err := json.Unmarshal(b, &v); err != nil {
		t.Fatal(err)
	}
	return v
}

func TestReport(t *testing.T) {
	_, page, sum := runReport(t, reportJob)
	doc, err := html.Parse(bytes.NewReader(page))
	if err != nil {
		t.Fatal(err)
	}
	h := headlineOf(doc)
	num := func(key string) float64 { v, _ := sum[key].(float64); return v }

	// Every number in the headline equals the JSON summary of the run.
	for _, c := range []struct {
		name, text string
		want       float64
	}{
		{"good parts per panel", h["good_parts_per_panel"].value, num("good_parts_per_panel")},
		{"parts per panel", numberIn(h["good_parts_per_panel"].unit, "of "), num("parts_per_panel")},
		{"part yield", numberIn(h["good_parts_per_panel"].note, "part yield "), 100 * num("part_yield_mean")},
		{"trials", numberIn(h["good_parts_per_panel"].note, "Monte Carlo of "), num("trials")},
		{"sites in spec", h["in_spec"].value, num("in_spec")},
		{"sites", numberIn(h["in_spec"].unit, "of "), num("sites")},
		{"solver accuracy", h["solver_accuracy"].value, 100 * num("solver_accuracy")},
		{"worst section yield", numberIn(h["worst_section"].note, "site yield "), 100 * num("worst_section_site_yield")},
		{"worst site margin", numberIn(h["worst_site"].note, "margin "), num("worst_site_margin_db")},
		{"worst site probability", numberIn(h["worst_site"].note, "P(in spec) "), num("worst_site_p_in_spec")},
		{"expected in spec", h["expected_in_spec"].value, num("expected_in_spec")},
	} {
		if !printedEqual(c.text, c.want) {
			t.Errorf("headline %s shows %q, the JSON summary %g", c.name, c.text, c.want)
		}
	}
	for key, want := range map[string]string{"worst_section": "worst_section", "worst_site": "worst_site", "version": "version", "date": ""} {
		if want != "" && h[key].value != sum[want] {
			t.Errorf("headline %s shows %q, the JSON summary %q", key, h[key].value, sum[want])
		}
		if h[key].value == "" {
			t.Errorf("headline %s is empty", key)
		}
	}

	// The same numbers as map and yield give for the job.
	mapDir, yieldDir := t.TempDir(), t.TempDir()
	if code, _, stderr := run(t, "map", reportJob, "-o", mapDir); code != 0 {
		t.Fatal(stderr)
	}
	if code, _, stderr := run(t, "yield", reportJob, "-o", yieldDir, "--trials", reportTrials); code != 0 {
		t.Fatal(stderr)
	}
	ms, ys := jsonOf(t, filepath.Join(mapDir, "summary.json")), jsonOf(t, filepath.Join(yieldDir, "yield.json"))
	gp, _ := ys["good_parts_per_panel"].(map[string]any)
	if sum["in_spec"] != ms["in_spec"] || sum["expected_in_spec"] != ms["expected_in_spec"] || sum["sites"] != ms["sites"] || sum["good_parts_per_panel"] != gp["mean"] || sum["part_yield_mean"] != ys["part_yield_mean"] {
		t.Errorf("report says %v in spec of %v, %v good parts, part yield %v; map %v of %v, yield %v, %v",
			sum["in_spec"], sum["sites"], sum["good_parts_per_panel"], sum["part_yield_mean"], ms["in_spec"], ms["sites"], gp["mean"], ys["part_yield_mean"])
	}

	// The sections, in the order a reader asks.
	var titles []string
	for n := range doc.Descendants() {
		if n.Type == html.ElementNode && n.Data == "h2" && strings.HasSuffix(attrOf(n, "id"), "-h") {
			titles = append(titles, textOf(n))
		}
	}
	want := []string{"Summary", "Coupling against offset", "Panel map", "Yield", "Error budget", "Drawing tolerance", "Assumptions and cautions", "Job file"}
	if strings.Join(titles, "|") != strings.Join(want, "|") {
		t.Errorf("sections %q, want %q", titles, want)
	}
	if int(num("report_sections")) != len(titles) {
		t.Errorf("JSON counts %v sections, the page has %d", sum["report_sections"], len(titles))
	}

	// The job text, byte for byte.
	src, err := os.ReadFile(reportJob)
	if err != nil {
		t.Fatal(err)
	}
	var pres []string
	for n := range doc.Descendants() {
		if n.Type == html.ElementNode && n.Data == "pre" {
			pres = append(pres, textOf(n))
		}
	}
	if len(pres) != 1 || pres[0] != string(src) {
		t.Errorf("the page holds %d files; the first differs from %s", len(pres), reportJob)
	}
}

// TestReportIncludes checks that every included file is embedded verbatim,
// and the fit and compensation sections with --targets.
func TestReportIncludes(t *testing.T) {
	dir := t.TempDir()
	base, err := os.ReadFile(reportJob)
	if err != nil {
		t.Fatal(err)
	}
	s := string(base)
	i := strings.Index(s, "[[contributor]]")
	inc := s[i:] + "\r\n# a CR LF line, kept as it is\r\n"
	main := "include = [\"contrib.toml\"]\n" + s[:i]
	os.WriteFile(filepath.Join(dir, "contrib.toml"), []byte(inc), 0o644)
	os.WriteFile(filepath.Join(dir, "job.toml"), []byte(main), 0o644)
	_, page, _ := runReport(t, filepath.Join(dir, "job.toml"), "--targets", reportTargets)
	doc, err := html.Parse(bytes.NewReader(page))
	if err != nil {
		t.Fatal(err)
	}
	var pres []string
	var titles []string
	for n := range doc.Descendants() {
		if n.Type == html.ElementNode && n.Data == "pre" {
			pres = append(pres, textOf(n))
		}
		if n.Type == html.ElementNode && n.Data == "h2" {
			titles = append(titles, textOf(n))
		}
	}
	if len(pres) != 2 || pres[0] != main || pres[1] != inc {
		t.Errorf("the page holds %d files, want job.toml and contrib.toml byte for byte", len(pres))
	}
	for _, w := range []string{"Fit of the measured targets", "Compensation"} {
		if !strings.Contains(strings.Join(titles, "|"), w) {
			t.Errorf("no section %q with --targets: %q", w, titles)
		}
	}
}

// TestReportBrowser opens the two-core report in headless Chromium: no
// console error, no request, every picture decodes, and clicking a site
// where the map draws it shows that site's row of sites.csv.
func TestReportBrowser(t *testing.T) {
	t.Cleanup(reporttest.Stop)
	dir, _, _ := runReport(t, reportJob)
	mapDir, yieldDir := t.TempDir(), t.TempDir()
	if code, _, stderr := run(t, "map", reportJob, "-o", mapDir); code != 0 {
		t.Fatal(stderr)
	}
	if code, _, stderr := run(t, "yield", reportJob, "-o", yieldDir, "--trials", reportTrials); code != 0 {
		t.Fatal(stderr)
	}
	sites := readCSV(t, filepath.Join(mapDir, "sites.csv"))
	yields := readCSV(t, filepath.Join(yieldDir, "yield.csv"))
	col := func(h []string, name string) int {
		for i, c := range h {
			if c == name {
				return i
			}
		}
		t.Fatalf("no column %q in %q", name, h)
		return -1
	}

	// Where the map draws each site: the figure drawn again at the report's
	// width, and its view's transform.
	j, err := loadJob(reportJob, nil)
	if err != nil {
		t.Fatal(err)
	}
	a, err := drift.Analyse(context.Background(), input(j), &drift.Settings{CacheDir: cacheDir(t)})
	if err != nil {
		t.Fatal(err)
	}
	view, err := figure.MapView(io.Discard, a, a.Summary(10), figure.MapOptions{Width: 1600, Units: unit.MilInch})
	if err != nil {
		t.Fatal(err)
	}

	p := reporttest.Open(t, filepath.Join(dir, "report.html"), reporttest.Options{})
	for _, im := range p.Images() {
		if !im.Decoded || im.Natural <= 0 {
			t.Errorf("image %q does not decode", im.Alt)
		}
	}
	m := p.Map("")
	h := sites[0]
	for _, k := range []int{1, len(sites) / 2, len(sites) - 1} {
		row := sites[k]
		name := row[col(h, "site")]
		x, _ := strconv.ParseFloat(row[col(h, "x [in]")], 64)
		y, _ := strconv.ParseFloat(row[col(h, "y [in]")], 64)
		px, py := view.Pixel(render.Point{X: x * unit.Inch, Y: y * unit.Inch})
		m.Click(px, py)
		r := m.Readout()
		if r.Caption != "Site "+name {
			t.Errorf("clicked %s at pixel (%.1f, %.1f), the readout shows %q", name, px, py, r.Caption)
			continue
		}
		in := map[string]string{"true": "yes", "false": "no"}[row[col(h, "in_spec")]]
		want := []string{row[col(h, "section")], row[col(h, "x [in]")] + ", " + row[col(h, "y [in]")],
			row[col(h, "offset_across [mil]")] + " ± " + row[col(h, "sigma_across [mil]")],
			row[col(h, "coupling [dB]")], row[col(h, "drift [dB]")], row[col(h, "margin [dB]")], in}
		if len(r.Values) != len(want)+1 || strings.Join(r.Values[:len(want)], "|") != strings.Join(want, "|") {
			t.Errorf("site %s: readout %q, sites.csv %q", name, r.Values, want)
			continue
		}
		yr := yields[k]
		if yr[col(yields[0], "name")] != name {
			t.Fatalf("yield.csv row %d is %s, sites.csv %s", k, yr[1], name)
		}
		pc, _ := strconv.ParseFloat(yr[col(yields[0], "p_closed")], 64)
		// p_closed has 6 decimals as a fraction, the readout 4 as a percentage:
		// they agree to half a unit in the 6th decimal, twice (two roundings).
		got, _ := strconv.ParseFloat(r.Values[len(want)], 64)
		if math.Abs(got/100-pc) > 1e-6 {
			t.Errorf("site %s: probability in spec %s %%, yield.csv p_closed %g", name, r.Values[len(want)], pc)
		}
	}
	name := sites[len(sites)/3][col(h, "site")]
	if r := m.Find(name); r.Caption != "Site "+name {
		t.Errorf("search for %q shows %q (%s)", name, r.Caption, r.Status)
	}
	pr := p.Print()
	if pr.Tools != "none" || pr.HiddenTables != 0 || pr.HiddenFiles != 0 || pr.NoBreak != 0 {
		t.Errorf("print style %+v", pr)
	}
	p.Check()
}

// TestReportBadInput checks that bad input is reported as for the other
// commands, with exit status 2 and nothing written.
func TestReportBadInput(t *testing.T) {
	src, err := os.ReadFile(reportJob)
	if err != nil {
		t.Fatal(err)
	}
	bad := filepath.Join(t.TempDir(), "bad.toml")
	os.WriteFile(bad, []byte(strings.Replace(string(src), `border = "0.8 in"`, `border = "0.8"`, 1)), 0o644)
	for _, c := range []struct {
		name string
		args []string
		want string
	}{
		{"job without a unit", []string{bad}, "bad.toml:"},
		{"no job", nil, "one job file"},
		{"width", []string{reportJob, "--width", "99999"}, "--width"},
		{"trials", []string{reportJob, "--trials", "0"}, "--trials"},
		{"targets missing", []string{reportJob, "--targets", filepath.Join(t.TempDir(), "none.csv")}, "none.csv"},
	} {
		t.Run(c.name, func(t *testing.T) {
			out := t.TempDir()
			code, _, stderr := run(t, append(append([]string{"report"}, c.args...), "-o", out)...)
			if code != exitBadInput || !strings.Contains(stderr, c.want) {
				t.Errorf("exit %d, stderr %q; want 2 and %q", code, stderr, c.want)
			}
			if ents, _ := os.ReadDir(out); len(ents) != 0 {
				t.Errorf("wrote %d files", len(ents))
			}
		})
	}
}

// TestReportCautions checks that the report states the README's
// assumptions and cautions, word for word.
func TestReportCautions(t *testing.T) {
	b, err := os.ReadFile("../../README.md")
	if err != nil {
		t.Fatal(err)
	}
	readme := strings.Join(strings.Fields(string(b)), " ")
	for _, s := range [][]string{reportAssumptions, reportCautions} {
		if text := strings.Join(s, " "); !strings.Contains(readme, text) {
			t.Errorf("the README does not say %q", text)
		}
	}
}

// TestReportSize10k checks that the report of a 10,000-site panel stays
// small enough to send: under 5 MB.
func TestReportSize10k(t *testing.T) {
	if testing.Short() {
		t.Skip("a 10,000-site report")
	}
	_, page, sum := runReport(t, bigJob(t))
	if sum["sites"] != 10000.0 {
		t.Fatalf("%v sites", sum["sites"])
	}
	const limit = 5e6 // bytes
	if len(page) > limit {
		t.Errorf("the report of 10,000 sites is %.2f MB, over %.0f MB", float64(len(page))/1e6, limit/1e6)
	}
	t.Logf("10,000-site report: %.2f MB", float64(len(page))/1e6)
}

// BenchmarkReportTwoCore times the report of the two-core demo job end to
// end, the field solves cached: analysis, Monte Carlo of 10,000 panels,
// tolerance, every figure and the page, written to disk.
func BenchmarkReportTwoCore(b *testing.B) {
	benchReport(b, reportJob)
}

// BenchmarkReport10k is the report of a 10,000-site panel; it reports the
// page's size.
func BenchmarkReport10k(b *testing.B) {
	benchReport(b, bigJob(b))
}

func benchReport(b *testing.B, job string) {
	cache, out := b.TempDir(), b.TempDir()
	benchCommand(b, "report", job, "-o", out, "--cache-dir", cache)
	fi, err := os.Stat(filepath.Join(out, "report.html"))
	if err != nil {
		b.Fatal(err)
	}
	b.ReportMetric(float64(fi.Size())/1e6, "MB/report")
	b.ReportMetric(b.Elapsed().Seconds()/float64(b.N), "s/report")
}
