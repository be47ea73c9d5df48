package report_test

import (
	"bytes"
	"context"
	"fmt"
	"image/png"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/cdproto/cdp"
	"github.com/chromedp/cdproto/emulation"
	cdplog "github.com/chromedp/cdproto/log"
	"github.com/chromedp/cdproto/network"
	"github.com/chromedp/cdproto/runtime"
	"github.com/chromedp/chromedp"
)

// The browser tests open the synthetic report in headless Chromium
// (Debian's chromium package; .ci/run installs it) and use it as a reader
// would. They never skip: without a browser they fail and say why.

// chromiumFlags are the flags the browser runs with. As root it needs
// --no-sandbox; without the background-networking flags it tries to reach
// update and sync servers, which a closed network refuses.
var chromiumFlags = []string{"headless", "no-sandbox", "disable-gpu", "disable-quic", "no-first-run",
	"disable-background-networking", "disable-component-update", "disable-sync"}

// findChromium returns the browser's path, or fails the test with the reason.
func findChromium(t testing.TB) string {
	t.Helper()
	for _, name := range []string{"chromium", "chromium-browser"} {
		if p, err := exec.LookPath(name); err == nil {
			return p
		}
	}
	t.Fatal("no chromium on PATH: the browser test needs headless Chromium (Debian: apt-get install -y chromium; .ci/run installs it when it is missing)")
	return ""
}

// tab is one browser tab with what the page logged and requested.
type tab struct {
	t   testing.TB
	ctx context.Context

	mu       sync.Mutex
	problems []string // console errors and warnings, exceptions, log errors
	requests []string // URLs the page asked for
}

// browser is the one Chromium the tests of this package share (starting
// it takes most of their time); TestMain stops it.
var browser struct {
	once    sync.Once
	ctx     context.Context
	err     error
	profile string
	stop    func()
}

// openBrowser returns a context for the shared browser, starting it in a
// fresh, empty profile on first use.
func openBrowser(t testing.TB) context.Context {
	t.Helper()
	path := findChromium(t)
	browser.once.Do(func() {
		browser.profile, browser.err = os.MkdirTemp("", "report-chromium-")
		if browser.err != nil {
			return
		}
		opts := []chromedp.ExecAllocatorOption{chromedp.ExecPath(path), chromedp.UserDataDir(browser.profile), chromedp.WindowSize(1200, 900)}
		for _, f := range chromiumFlags {
			opts = append(opts, chromedp.Flag(f, true))
		}
		actx, cancelAlloc := chromedp.NewExecAllocator(context.Background(), opts...)
		bctx, cancelBrowser := chromedp.NewContext(actx)
		browser.ctx = bctx
		browser.stop = func() { cancelBrowser(); cancelAlloc(); os.RemoveAll(browser.profile) }
		if err := chromedp.Do(bctx); err != nil {
			browser.err = fmt.Errorf("starting %s: %w", path, err)
		}
	})
	if browser.err != nil {
		t.Fatal(browser.err)
	}
	return browser.ctx
}

func TestMain(m *testing.M) {
	code := m.Run()
	if browser.stop != nil {
		browser.stop()
	}
	os.Exit(code)
}

// newTab opens a tab in the browser of bctx that records console messages,
// exceptions, log entries and network requests; setup runs before anything
// is loaded (to disable scripts, for one).
func newTab(t testing.TB, bctx context.Context, setup ...chromedp.Action[chromedp.Void]) *tab {
	t.Helper()
	tb := &tab{t: t}
	ctx, cancel := chromedp.NewContext(bctx, chromedp.WithListener(tb.record))
	t.Cleanup(cancel)
	// Each step of a test is quick; a minute bounds a hung browser.
	ctx, cancelTimeout := context.WithTimeout(ctx, time.Minute)
	t.Cleanup(cancelTimeout)
	tb.ctx = ctx
	steps := append([]chromedp.Action[chromedp.Void]{
		call(network.Enable, network.EnableParams{}),
		call(cdplog.Enable, cdp.Empty{}),
	}, setup...)
	tb.do(steps...)
	return tb
}

// call makes an action of one protocol command.
func call[P, R any](cmd cdp.Command[P, R], p P) chromedp.Action[chromedp.Void] {
	return chromedp.Func(func(ctx context.Context, t *chromedp.Target) error {
		_, err := cdp.Call(ctx, t, cmd, p)
		return err
	})
}

// record runs in the tab's message loop: it only appends, under the lock.
func (tb *tab) record(ev any) {
	tb.mu.Lock()
	defer tb.mu.Unlock()
	switch ev := ev.(type) {
	case *runtime.EventConsoleAPICalled:
		switch ev.Type {
		case runtime.ConsoleAPICalledTypeError, runtime.ConsoleAPICalledTypeWarning, runtime.ConsoleAPICalledTypeAssert:
			var args []string
			for _, a := range ev.Args {
				args = append(args, string(a.Value)+a.Description)
			}
			tb.problems = append(tb.problems, fmt.Sprintf("console.%s: %s", ev.Type, strings.Join(args, " ")))
		}
	case *runtime.EventExceptionThrown:
		d := ev.ExceptionDetails
		msg := d.Text
		if d.Exception != nil {
			msg += " " + d.Exception.Description
		}
		tb.problems = append(tb.problems, fmt.Sprintf("exception at %d:%d: %s", d.LineNumber+1, d.ColumnNumber+1, msg))
	case *cdplog.EventEntryAdded:
		if e := ev.Entry; e.Level == cdplog.EntryLevelError || e.Level == cdplog.EntryLevelWarning {
			tb.problems = append(tb.problems, fmt.Sprintf("log %s (%s): %s %s", e.Level, e.Source, e.Text, e.URL))
		}
	case *network.EventRequestWillBeSent:
		tb.requests = append(tb.requests, ev.Request.URL)
	}
}

func (tb *tab) do(steps ...chromedp.Action[chromedp.Void]) {
	tb.t.Helper()
	if err := chromedp.Do(tb.ctx, steps...); err != nil {
		tb.t.Fatal(err)
	}
}

// eval evaluates a JavaScript expression in the page, awaiting a promise,
// and decodes its value into T.
func eval[T any](tb *tab, expr string) T {
	tb.t.Helper()
	v, err := chromedp.Run(tb.ctx, chromedp.Evaluate[T](expr, chromedp.EvalAwaitPromise))
	if err != nil {
		tb.t.Fatalf("%s: %v", expr, err)
	}
	return v
}

// check fails the test for every console error, exception or log error so
// far, and for every request other than the page itself and data: URIs.
func (tb *tab) check(pageURL string) {
	tb.t.Helper()
	tb.mu.Lock()
	defer tb.mu.Unlock()
	for _, p := range tb.problems {
		tb.t.Errorf("page logged: %s", p)
	}
	loaded := false
	for _, u := range tb.requests {
		if u == pageURL {
			loaded = true
		} else if !strings.HasPrefix(u, "data:") {
			tb.t.Errorf("page requested %s", u)
		}
	}
	if !loaded {
		tb.t.Errorf("no request for the page itself recorded: the network listener saw nothing")
	}
}

// probe checks that the listener records console errors at all, so that
// a silent check means a quiet page.
func (tb *tab) probe() {
	tb.t.Helper()
	tb.do(chromedp.Evaluate[chromedp.Void](`console.error("listener probe")`))
	// The event may arrive just after the reply to Evaluate.
	for range 50 {
		tb.mu.Lock()
		n := len(tb.problems)
		tb.mu.Unlock()
		if n > 0 {
			return
		}
		time.Sleep(20 * time.Millisecond)
	}
	tb.t.Errorf("a console.error in the page was not recorded")
}

// loadTestReport writes the synthetic report to a file and returns its URL.
func loadTestReport(t testing.TB) (string, []byte) {
	page := writeDoc(t, testDocument(t))
	name := filepath.Join(t.TempDir(), "report.html")
	if err := os.WriteFile(name, page, 0o644); err != nil {
		t.Fatal(err)
	}
	return "file://" + name, page
}

// imageState is what the page says of one <img>.
type imageState struct {
	Alt      string `json:"alt"`
	Complete bool   `json:"complete"`
	Natural  int    `json:"natural"`
	Decoded  bool   `json:"decoded"`
}

const imagesJS = `Promise.all(Array.from(document.images).map(i =>
  i.decode().then(() => true, () => false).then(ok => ({alt: i.alt, complete: i.complete, natural: i.naturalWidth, decoded: ok}))))`

// readout is what the map's look-up shows.
type readout struct {
	Caption string   `json:"caption"`
	Rows    []string `json:"rows"`
	Values  []string `json:"values"`
	Status  string   `json:"status"`
	Mark    *[2]float64
}

const readoutJS = `(() => {
  const f = document.querySelector("figure.panel-map"), r = f.querySelector(".map-readout");
  const c = r.querySelector("caption");
  return {caption: c ? c.textContent : "",
    rows: Array.from(r.querySelectorAll("tbody th")).map(e => e.textContent),
    values: Array.from(r.querySelectorAll("tbody td")).map(e => e.textContent),
    status: f.querySelector(".map-status").textContent};
})()`

// markJS gives the viewport centre of the mark ring, or null when hidden.
const markJS = `(() => {
  const m = document.querySelector("figure.panel-map .map-mark");
  if (m.hidden) return null;
  const b = m.getBoundingClientRect();
  return [(b.left + b.right) / 2, (b.top + b.bottom) / 2];
})()`

// scrollToPixel scrolls the map's image pixel (x, y) to the middle of the
// viewport and returns where it is there, in CSS pixels.
func scrollToPixel(tb *tab, x, y float64) (float64, float64) {
	tb.t.Helper()
	xy := eval[[2]float64](tb, fmt.Sprintf(`(() => {
  const img = document.querySelector("figure.panel-map img");
  let r = img.getBoundingClientRect();
  window.scrollBy(0, r.top + %[2]g * r.height / img.naturalHeight - window.innerHeight / 2);
  r = img.getBoundingClientRect();
  return [r.left + %[1]g * r.width / img.naturalWidth, r.top + %[2]g * r.height / img.naturalHeight];
})()`, x, y))
	return xy[0], xy[1]
}

func (r readout) shows(t testing.TB, s testSite) {
	t.Helper()
	if r.Caption != "Site "+s.name {
		t.Errorf("readout caption %q, want %q", r.Caption, "Site "+s.name)
	}
	if strings.Join(r.Values, "|") != strings.Join(s.values, "|") {
		t.Errorf("readout of %s shows %q, want %q", s.name, r.Values, s.values)
	}
	for k, f := range testFields {
		if k < len(r.Rows) && r.Rows[k] != f.Label+" ["+f.Unit+"]" {
			t.Errorf("readout row %d is %q, want %q", k, r.Rows[k], f.Label+" ["+f.Unit+"]")
		}
	}
}

// markAt checks that the mark ring is centred on viewport point (x, y).
func markAt(t testing.TB, tb *tab, x, y float64) {
	t.Helper()
	m := eval[*[2]float64](tb, markJS)
	// markTol: the ring is an odd number of pixels across and placed in
	// percent of the image, so its centre may sit a pixel or two off.
	const markTol = 2.5
	if m == nil {
		t.Errorf("no site marked")
	} else if math.Hypot(m[0]-x, m[1]-y) > markTol {
		t.Errorf("mark at (%.1f, %.1f), want (%.1f, %.1f)", m[0], m[1], x, y)
	}
}

func TestBrowser(t *testing.T) {
	url, _ := loadTestReport(t)
	_, view := testMap(t, 600)
	bctx := openBrowser(t)
	tb := newTab(t, bctx)
	tb.do(chromedp.Navigate(url))

	t.Run("images decode", func(t *testing.T) {
		imgs := eval[[]imageState](tb, imagesJS)
		if len(imgs) != 2 {
			t.Fatalf("%d images, want 2", len(imgs))
		}
		for _, im := range imgs {
			if !im.Complete || !im.Decoded || im.Natural <= 0 {
				t.Errorf("image %q: complete %v, decoded %v, naturalWidth %d", im.Alt, im.Complete, im.Decoded, im.Natural)
			}
		}
	})

	t.Run("look-up shown", func(t *testing.T) {
		if hidden := eval[bool](tb, `document.querySelector(".map-tools").hidden`); hidden {
			t.Errorf("the script did not show the look-up controls")
		}
	})

	t.Run("hover and click", func(t *testing.T) {
		for _, s := range []testSite{testSites[2], testSites[1], testSites[4]} {
			px, py := view.Pixel(s.at)
			x, y := scrollToPixel(tb, px, py)
			tb.do(chromedp.MouseEvent("mouseMoved", x, y))
			eval[readout](tb, readoutJS).shows(t, s)
			tb.do(chromedp.MouseClickXY(x, y))
			eval[readout](tb, readoutJS).shows(t, s)
			markAt(t, tb, x, y)
		}
		// Moving away over another site shows it; leaving the picture shows
		// the marked one again.
		px, py := view.Pixel(testSites[3].at)
		x, y := scrollToPixel(tb, px, py)
		tb.do(chromedp.MouseEvent("mouseMoved", x, y))
		eval[readout](tb, readoutJS).shows(t, testSites[3])
		tb.do(chromedp.MouseEvent("mouseMoved", 2, 2))
		eval[readout](tb, readoutJS).shows(t, testSites[4])
	})

	t.Run("search", func(t *testing.T) {
		find := func(q string) readout {
			tb.do(chromedp.SetValue(chromedp.CSS("figure.panel-map input[type=search]"), q),
				chromedp.Click(chromedp.CSS("figure.panel-map button[type=submit]")))
			return eval[readout](tb, readoutJS)
		}
		r := find("m4.h2")
		r.shows(t, testSites[3])
		if r.Status != "Found M4.H2." {
			t.Errorf("status %q", r.Status)
		}
		px, py := view.Pixel(testSites[3].at)
		x, y := scrollToPixel(tb, px, py)
		markAt(t, tb, x, y)
		r = find("H2")
		r.shows(t, testSites[2])
		if !strings.HasPrefix(r.Status, "2 sites contain") {
			t.Errorf("status %q", r.Status)
		}
		r = find("nowhere")
		if r.Status != "No site is named “nowhere”." {
			t.Errorf("status %q", r.Status)
		}
	})

	t.Run("print", func(t *testing.T) {
		tb.do(call(emulation.SetEmulatedMedia, emulation.SetEmulatedMediaParams{Media: "print"}))
		st := eval[map[string]any](tb, `(() => {
  const cs = e => getComputedStyle(e);
  return {
    tools: cs(document.querySelector(".map-tools")).display,
    tables: Array.from(document.querySelectorAll("table")).filter(t => !t.closest(".map-tools")).filter(t => cs(t).display !== "table" || t.offsetHeight === 0).length,
    header: cs(document.querySelector("thead")).display,
    pre: Array.from(document.querySelectorAll("details:not([open]) pre")).filter(p => p.offsetHeight === 0).length,
    closed: document.querySelectorAll("details:not([open])").length,
    breaks: Array.from(document.querySelectorAll("main > section")).filter(s => cs(s).breakBefore !== "page").length,
  };
})()`)
		tb.do(call(emulation.SetEmulatedMedia, emulation.SetEmulatedMediaParams{}))
		want := map[string]any{"tools": "none", "tables": 0.0, "header": "table-header-group", "pre": 0.0, "closed": 2.0, "breaks": 0.0}
		for k, v := range want {
			if st[k] != v {
				t.Errorf("print style: %s = %v, want %v", k, st[k], v)
			}
		}
		for _, paper := range []struct {
			name string
			size chromedp.PaperSize
		}{{"A4", chromedp.PaperA4}, {"Letter", chromedp.PaperLetter}} {
			pdf, err := chromedp.Run(tb.ctx, chromedp.PrintToPDF(chromedp.PDFPaper(paper.size), chromedp.PDFOutlineAndTagged()))
			if err != nil {
				t.Fatal(err)
			}
			pages := pdfPages(t, pdf)
			// One page for the title and contents, then at least one per section.
			if len(pages) < 1+len(testSectionTitles) {
				t.Errorf("%s: %d pages for %d sections", paper.name, len(pages), len(testSectionTitles))
			}
			for _, p := range pages {
				if math.Abs(p[0]-paper.size.Width*72) > 1.5 || math.Abs(p[1]-paper.size.Height*72) > 1.5 {
					t.Errorf("%s: page of %.1f x %.1f pt", paper.name, p[0], p[1])
				}
			}
			outline := pdfOutline(pdf)
			for _, s := range append([]string{"Invented test report"}, testSectionTitles...) {
				if !contains(outline, s) {
					t.Errorf("%s: the PDF outline %q lacks %q", paper.name, outline, s)
				}
			}
		}
	})

	t.Run("screenshot", func(t *testing.T) {
		tb.do(chromedp.Evaluate[chromedp.Void](`window.scrollTo(0, 0)`))
		shot, err := chromedp.Run(tb.ctx, chromedp.CaptureScreenshot())
		if err != nil {
			t.Fatal(err)
		}
		notBlank(t, shot)
	})

	tb.check(url)
	tb.probe()
}

// TestBrowserNoScript loads the report with scripts disabled: the pictures
// and tables are all there, the look-up controls stay hidden.
func TestBrowserNoScript(t *testing.T) {
	url, _ := loadTestReport(t)
	bctx := openBrowser(t)
	tb := newTab(t, bctx, call(emulation.SetScriptExecutionDisabled, emulation.SetScriptExecutionDisabledParams{Value: true}))
	tb.do(chromedp.Navigate(url))
	imgs := eval[[]imageState](tb, imagesJS)
	for _, im := range imgs {
		if !im.Decoded || im.Natural <= 0 {
			t.Errorf("image %q does not decode without scripts", im.Alt)
		}
	}
	if n := len(imgs); n != 2 {
		t.Errorf("%d images", n)
	}
	if !eval[bool](tb, `document.querySelector(".map-tools").hidden`) {
		t.Errorf("look-up controls shown without the script that drives them")
	}
	if n := eval[int](tb, `document.querySelectorAll("tbody tr").length`); n != len(testSites) {
		t.Errorf("%d table rows without scripts, want %d", n, len(testSites))
	}
	tb.check(url)
}

var (
	pdfPageRE     = regexp.MustCompile(`/Type\s*/Page\b[^s]`)
	pdfMediaBoxRE = regexp.MustCompile(`/MediaBox\s*\[\s*([\d.]+)\s+([\d.]+)\s+([\d.]+)\s+([\d.]+)\s*\]`)
	pdfTitleRE    = regexp.MustCompile(`/Title\s*(<[0-9A-Fa-f\s]*>|\((?:[^()\\]|\\.)*\))`)
)

// pdfPages returns the width and height in points of each page of a PDF
// Chromium printed. Its page objects are not compressed, so the media
// boxes can be read from the bytes (ISO 32000-1:2008, 7.7.3.3, "Page Objects").
func pdfPages(t testing.TB, pdf []byte) [][2]float64 {
	t.Helper()
	if !bytes.HasPrefix(pdf, []byte("%PDF-")) {
		t.Fatalf("not a PDF: %.20q", pdf)
	}
	var pages [][2]float64
	for _, m := range pdfMediaBoxRE.FindAllSubmatch(pdf, -1) {
		var v [4]float64
		for i := range v {
			v[i], _ = strconv.ParseFloat(string(m[i+1]), 64)
		}
		pages = append(pages, [2]float64{v[2] - v[0], v[3] - v[1]})
	}
	if n := len(pdfPageRE.FindAll(pdf, -1)); n != len(pages) {
		t.Fatalf("%d page objects, %d media boxes", n, len(pages))
	}
	return pages
}

// pdfOutline returns the titles of the PDF's outline items and document
// information: text strings, either literal or hexadecimal UTF-16BE with a
// byte order mark (ISO 32000-1:2008, 7.9.2.2, "Text String Type"; 12.3.3,
// "Document Outline").
func pdfOutline(pdf []byte) []string {
	var out []string
	for _, m := range pdfTitleRE.FindAllSubmatch(pdf, -1) {
		s := string(m[1])
		if strings.HasPrefix(s, "<") {
			hex := strings.Join(strings.Fields(strings.Trim(s, "<>")), "")
			var u []uint16
			for i := 0; i+4 <= len(hex); i += 4 {
				v, _ := strconv.ParseUint(hex[i:i+4], 16, 16)
				u = append(u, uint16(v))
			}
			if len(u) > 0 && u[0] == 0xFEFF {
				u = u[1:]
			}
			out = append(out, string(utf16Decode(u)))
		} else {
			out = append(out, strings.NewReplacer(`\(`, "(", `\)`, ")", `\\`, `\`).Replace(s[1:len(s)-1]))
		}
	}
	return out
}

func utf16Decode(u []uint16) []rune {
	var r []rune
	for i := 0; i < len(u); i++ {
		c := rune(u[i])
		if c >= 0xD800 && c < 0xDC00 && i+1 < len(u) {
			c = (c-0xD800)<<10 + (rune(u[i+1]) - 0xDC00) + 0x10000
			i++
		}
		r = append(r, c)
	}
	return r
}

func contains(list []string, s string) bool {
	for _, v := range list {
		if v == s {
			return true
		}
	}
	return false
}

// notBlank fails unless the screenshot has text and pictures on it: at
// least minInk of its pixels differ from the page background, in at least
// minColours distinct colours.
func notBlank(t testing.TB, shot []byte) {
	t.Helper()
	im, err := png.Decode(bytes.NewReader(shot))
	if err != nil {
		t.Fatal(err)
	}
	// A blank page is one colour; the top of the test report has black
	// headings, grey boxes and a coloured plot. 2 % ink and 50 colours are
	// far below what it shows and far above a blank or error page.
	const minInk, minColours = 0.02, 50
	b := im.Bounds()
	bg := im.At(b.Min.X, b.Min.Y)
	colours := map[[3]uint32]bool{}
	ink := 0
	for y := b.Min.Y; y < b.Max.Y; y += 2 {
		for x := b.Min.X; x < b.Max.X; x += 2 {
			c := im.At(x, y)
			r, g, bl, _ := c.RGBA()
			colours[[3]uint32{r >> 8, g >> 8, bl >> 8}] = true
			if c != bg {
				ink++
			}
		}
	}
	frac := float64(ink) / float64((b.Dx()/2)*(b.Dy()/2))
	if frac < minInk || len(colours) < minColours {
		t.Errorf("screenshot looks blank: %.1f %% ink, %d colours (%v)", 100*frac, len(colours), b.Size())
	}
}
