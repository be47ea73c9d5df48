// Package reporttest opens a report written by package report in headless
// Chromium and uses it as a reader would: it loads the page, looks at its
// pictures, points at and clicks the panel map, searches for a site, prints
// and takes screenshots, and fails the test for any console error,
// exception or network request. It is for tests only.
//
// The browser is Debian's chromium package, found on PATH; without it a
// test fails and says why — it never skips. One browser serves every test
// of a binary: call Stop from TestMain after m.Run.
package reporttest

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
	"unicode/utf16"

	"github.com/chromedp/cdproto/cdp"
	"github.com/chromedp/cdproto/emulation"
	cdplog "github.com/chromedp/cdproto/log"
	"github.com/chromedp/cdproto/network"
	"github.com/chromedp/cdproto/runtime"
	"github.com/chromedp/chromedp"
)

// Flags are the flags the browser runs with. As root it needs
// --no-sandbox; without the background-networking flags it tries to reach
// update and sync servers, which a closed network refuses.
var Flags = []string{"headless", "no-sandbox", "disable-gpu", "disable-quic", "no-first-run",
	"disable-background-networking", "disable-component-update", "disable-sync"}

// WindowWidth and WindowHeight are the size of the browser window, CSS pixels.
const WindowWidth, WindowHeight = 1200, 900

// stepTimeout bounds one page's work: every step is quick, and a minute
// only ends a browser that hangs.
const stepTimeout = time.Minute

var shared struct {
	mu      sync.Mutex
	ctx     context.Context
	err     error
	started bool
	stop    func()
}

// chromium returns the browser's path, or an error saying how to get one.
func chromium() (string, error) {
	for _, name := range []string{"chromium", "chromium-browser"} {
		if p, err := exec.LookPath(name); err == nil {
			return p, nil
		}
	}
	return "", fmt.Errorf("no chromium on PATH: the browser test needs headless Chromium (Debian: apt-get install -y chromium; .ci/run installs it when it is missing)")
}

// browser returns the shared browser, starting it in a new, empty profile
// on first use.
func browser() (context.Context, error) {
	shared.mu.Lock()
	defer shared.mu.Unlock()
	if shared.started {
		return shared.ctx, shared.err
	}
	shared.started = true
	path, err := chromium()
	if err != nil {
		shared.err = err
		return nil, err
	}
	profile, err := os.MkdirTemp("", "reporttest-chromium-")
	if err != nil {
		shared.err = err
		return nil, err
	}
	opts := []chromedp.ExecAllocatorOption{chromedp.ExecPath(path), chromedp.UserDataDir(profile), chromedp.WindowSize(WindowWidth, WindowHeight)}
	for _, f := range Flags {
		opts = append(opts, chromedp.Flag(f, true))
	}
	actx, cancelAlloc := chromedp.NewExecAllocator(context.Background(), opts...)
	bctx, cancelBrowser := chromedp.NewContext(actx)
	shared.stop = func() { cancelBrowser(); cancelAlloc(); os.RemoveAll(profile) }
	if err := chromedp.Do(bctx); err != nil {
		shared.err = fmt.Errorf("starting %s: %w", path, err)
		return nil, shared.err
	}
	shared.ctx = bctx
	return bctx, nil
}

// Stop stops the shared browser, if one was started, and removes its profile.
func Stop() {
	shared.mu.Lock()
	defer shared.mu.Unlock()
	if shared.stop != nil {
		shared.stop()
	}
	shared.started, shared.ctx, shared.err, shared.stop = false, nil, nil, nil
}

// Page is a report open in a browser tab.
type Page struct {
	t   testing.TB
	ctx context.Context
	url string

	mu       sync.Mutex
	problems []string // console errors and warnings, exceptions, log errors
	requests []string // every URL the tab asked for
}

// Options change how a page is opened.
type Options struct {
	// NoScript opens the page with scripts disabled.
	NoScript bool
}

// Open loads the HTML file at path in a new tab of the shared browser. The
// tab closes when the test ends.
func Open(t testing.TB, path string, o Options) *Page {
	t.Helper()
	bctx, err := browser()
	if err != nil {
		t.Fatal(err)
	}
	abs, err := filepath.Abs(path)
	if err != nil {
		t.Fatal(err)
	}
	p := &Page{t: t, url: "file://" + abs}
	ctx, cancel := chromedp.NewContext(bctx, chromedp.WithListener(p.record))
	t.Cleanup(cancel)
	ctx, cancelTimeout := context.WithTimeout(ctx, stepTimeout)
	t.Cleanup(cancelTimeout)
	p.ctx = ctx
	p.Do(Call(network.Enable, network.EnableParams{}), Call(cdplog.Enable, cdp.Empty{}))
	if o.NoScript {
		p.Do(Call(emulation.SetScriptExecutionDisabled, emulation.SetScriptExecutionDisabledParams{Value: true}))
	}
	p.Do(chromedp.Navigate(p.url))
	return p
}

// OpenHTML writes page to a file in a temporary directory and opens it.
func OpenHTML(t testing.TB, page []byte, o Options) *Page {
	t.Helper()
	name := filepath.Join(t.TempDir(), "report.html")
	if err := os.WriteFile(name, page, 0o644); err != nil {
		t.Fatal(err)
	}
	return Open(t, name, o)
}

// Call makes a chromedp action of one protocol command.
func Call[P, R any](cmd cdp.Command[P, R], params P) chromedp.Action[chromedp.Void] {
	return chromedp.Func(func(ctx context.Context, t *chromedp.Target) error {
		_, err := cdp.Call(ctx, t, cmd, params)
		return err
	})
}

// record runs in the tab's message loop: it only appends, under the lock.
func (p *Page) record(ev any) {
	p.mu.Lock()
	defer p.mu.Unlock()
	switch ev := ev.(type) {
	case *runtime.EventConsoleAPICalled:
		switch ev.Type {
		case runtime.ConsoleAPICalledTypeError, runtime.ConsoleAPICalledTypeWarning, runtime.ConsoleAPICalledTypeAssert:
			var args []string
			for _, a := range ev.Args {
				args = append(args, string(a.Value)+a.Description)
			}
			p.problems = append(p.problems, fmt.Sprintf("console.%s: %s", ev.Type, strings.Join(args, " ")))
		}
	case *runtime.EventExceptionThrown:
		d := ev.ExceptionDetails
		msg := d.Text
		if d.Exception != nil {
			msg += " " + d.Exception.Description
		}
		p.problems = append(p.problems, fmt.Sprintf("exception at %d:%d: %s", d.LineNumber+1, d.ColumnNumber+1, msg))
	case *cdplog.EventEntryAdded:
		if e := ev.Entry; e.Level == cdplog.EntryLevelError || e.Level == cdplog.EntryLevelWarning {
			p.problems = append(p.problems, fmt.Sprintf("log %s (%s): %s %s", e.Level, e.Source, e.Text, e.URL))
		}
	case *network.EventRequestWillBeSent:
		p.requests = append(p.requests, ev.Request.URL)
	}
}

// Do runs chromedp actions in the page's tab, failing the test on an error.
func (p *Page) Do(steps ...chromedp.Action[chromedp.Void]) {
	p.t.Helper()
	if err := chromedp.Do(p.ctx, steps...); err != nil {
		p.t.Fatal(err)
	}
}

// Eval evaluates a JavaScript expression in the page, awaiting a promise,
// and decodes its value into T.
func Eval[T any](p *Page, expr string) T {
	p.t.Helper()
	v, err := chromedp.Run(p.ctx, chromedp.Evaluate[T](expr, chromedp.EvalAwaitPromise))
	if err != nil {
		p.t.Fatalf("%s: %v", expr, err)
	}
	return v
}

// Check fails the test for every console error or warning, exception and
// log error so far, and for every request other than the page itself and
// data: URIs; then it checks that the recording works at all, with a
// console.error of its own, so that a silent check means a quiet page.
// Call it last: the probe leaves a logged error behind.
func (p *Page) Check() {
	p.t.Helper()
	p.mu.Lock()
	for _, s := range p.problems {
		p.t.Errorf("page logged: %s", s)
	}
	loaded := false
	for _, u := range p.requests {
		if u == p.url {
			loaded = true
		} else if !strings.HasPrefix(u, "data:") {
			p.t.Errorf("page requested %s", u)
		}
	}
	n := len(p.problems)
	p.mu.Unlock()
	if !loaded {
		p.t.Errorf("no request for the page itself recorded: the network listener saw nothing")
	}
	p.Do(chromedp.Evaluate[chromedp.Void](`console.error("reporttest probe")`))
	// The event may arrive just after the reply to Evaluate.
	for range 100 {
		p.mu.Lock()
		m := len(p.problems)
		p.mu.Unlock()
		if m > n {
			return
		}
		time.Sleep(10 * time.Millisecond)
	}
	p.t.Errorf("a console.error in the page was not recorded: the console listener saw nothing")
}

// Image is what the page says of one <img>.
type Image struct {
	Alt      string `json:"alt"`
	Complete bool   `json:"complete"`
	Natural  int    `json:"natural"` // naturalWidth, pixels
	Decoded  bool   `json:"decoded"` // decode() resolved
}

// Images waits for every <img> of the page to decode and reports each.
func (p *Page) Images() []Image {
	p.t.Helper()
	return Eval[[]Image](p, `Promise.all(Array.from(document.images).map(i =>
  i.decode().then(() => true, () => false).then(ok => ({alt: i.alt, complete: i.complete, natural: i.naturalWidth, decoded: ok}))))`)
}

// Map is one panel map of the page.
type Map struct {
	p   *Page
	sel string // CSS selector of its <figure>
}

// Map returns the panel map with element id id, or the first with "".
func (p *Page) Map(id string) *Map {
	sel := "figure.panel-map"
	if id != "" {
		sel = "figure.panel-map#" + id
	}
	return &Map{p: p, sel: sel}
}

// js returns the selector quoted for JavaScript.
func (m *Map) js() string { return strconv.Quote(m.sel) }

// ToView scrolls the map's image pixel (x, y) to the middle of the window
// and returns where it is there, in CSS pixels.
func (m *Map) ToView(x, y float64) (float64, float64) {
	m.p.t.Helper()
	xy := Eval[[2]float64](m.p, fmt.Sprintf(`(() => {
  const img = document.querySelector(%[1]s + " .map-frame img");
  let r = img.getBoundingClientRect();
  window.scrollBy(0, r.top + %[3]g * r.height / img.naturalHeight - window.innerHeight / 2);
  r = img.getBoundingClientRect();
  return [r.left + %[2]g * r.width / img.naturalWidth, r.top + %[3]g * r.height / img.naturalHeight];
})()`, m.js(), x, y))
	return xy[0], xy[1]
}

// Hover moves the pointer to the map's image pixel (x, y).
func (m *Map) Hover(x, y float64) {
	m.p.t.Helper()
	vx, vy := m.ToView(x, y)
	m.p.Do(chromedp.MouseEvent("mouseMoved", vx, vy))
}

// Click clicks the map's image pixel (x, y).
func (m *Map) Click(x, y float64) {
	m.p.t.Helper()
	vx, vy := m.ToView(x, y)
	m.p.Do(chromedp.MouseEvent("mouseMoved", vx, vy), chromedp.MouseClickXY(vx, vy))
}

// Leave moves the pointer off the map, to the window's top left corner.
func (m *Map) Leave() {
	m.p.t.Helper()
	m.p.Do(chromedp.Evaluate[chromedp.Void](`window.scrollTo(0, 0)`), chromedp.MouseEvent("mouseMoved", 1, 1))
}

// Readout is what the map's look-up shows: the site's name in the caption
// and one row per value.
type Readout struct {
	Caption string   `json:"caption"` // "Site NAME", or "" for none
	Rows    []string `json:"rows"`    // row headers, "label [unit]"
	Values  []string `json:"values"`
	Status  string   `json:"status"` // the search's message
	Tools   bool     `json:"tools"`  // the look-up controls are shown
}

// Readout returns what the look-up shows now.
func (m *Map) Readout() Readout {
	m.p.t.Helper()
	return Eval[Readout](m.p, fmt.Sprintf(`(() => {
  const f = document.querySelector(%s), r = f.querySelector(".map-readout");
  const c = r.querySelector("caption");
  return {caption: c ? c.textContent : "",
    rows: Array.from(r.querySelectorAll("tbody th")).map(e => e.textContent),
    values: Array.from(r.querySelectorAll("tbody td")).map(e => e.textContent),
    status: f.querySelector(".map-status").textContent,
    tools: !f.querySelector(".map-tools").hidden};
})()`, m.js()))
}

// Find types q into the map's search box, submits it and returns the readout.
func (m *Map) Find(q string) Readout {
	m.p.t.Helper()
	m.p.Do(chromedp.SetValue(chromedp.CSS(m.sel+" input[type=search]"), q),
		chromedp.Click(chromedp.CSS(m.sel+" button[type=submit]")))
	return m.Readout()
}

// Mark returns the image pixel at the centre of the mark ring, and false
// when no site is marked.
func (m *Map) Mark() (x, y float64, ok bool) {
	m.p.t.Helper()
	xy := Eval[*[2]float64](m.p, fmt.Sprintf(`(() => {
  const f = document.querySelector(%s), mk = f.querySelector(".map-mark"), img = f.querySelector(".map-frame img");
  if (mk.hidden) return null;
  const b = mk.getBoundingClientRect(), r = img.getBoundingClientRect();
  return [((b.left + b.right) / 2 - r.left) * img.naturalWidth / r.width, ((b.top + b.bottom) / 2 - r.top) * img.naturalHeight / r.height];
})()`, m.js()))
	if xy == nil {
		return 0, 0, false
	}
	return xy[0], xy[1], true
}

// PrintStyle is what the print style sheet does to the page.
type PrintStyle struct {
	Tools        string `json:"tools"`        // display of the look-up controls
	HiddenTables int    `json:"hiddenTables"` // tables outside the look-up not shown
	TableHeader  string `json:"tableHeader"`  // display of <thead>
	HiddenFiles  int    `json:"hiddenFiles"`  // verbatim texts of closed <details> not shown
	ClosedFiles  int    `json:"closedFiles"`  // closed <details>
	NoBreak      int    `json:"noBreak"`      // sections not starting a page
	Images       int    `json:"images"`       // images shown
}

// Print returns the page's state under the print media type.
func (p *Page) Print() PrintStyle {
	p.t.Helper()
	p.Do(Call(emulation.SetEmulatedMedia, emulation.SetEmulatedMediaParams{Media: "print"}))
	defer p.Do(Call(emulation.SetEmulatedMedia, emulation.SetEmulatedMediaParams{}))
	return Eval[PrintStyle](p, `(() => {
  const cs = e => getComputedStyle(e);
  const tools = document.querySelector(".map-tools");
  return {
    tools: tools ? cs(tools).display : "",
    hiddenTables: Array.from(document.querySelectorAll("table")).filter(t => !t.closest(".map-tools") && (cs(t).display !== "table" || t.offsetHeight === 0)).length,
    tableHeader: document.querySelector("thead") ? cs(document.querySelector("thead")).display : "",
    hiddenFiles: Array.from(document.querySelectorAll("details:not([open]) pre")).filter(p => p.offsetHeight === 0).length,
    closedFiles: document.querySelectorAll("details:not([open])").length,
    noBreak: Array.from(document.querySelectorAll("main > section")).filter(s => cs(s).breakBefore !== "page").length,
    images: Array.from(document.images).filter(i => i.offsetWidth > 0).length,
  };
})()`)
}

// PDF is a printed page.
type PDF struct {
	Bytes   []byte
	Pages   [][2]float64 // width and height of each page, points
	Outline []string     // outline titles and the document title
}

// PrintPDF prints the page on paper of the given size, with an outline.
func (p *Page) PrintPDF(paper chromedp.PaperSize) PDF {
	p.t.Helper()
	b, err := chromedp.Run(p.ctx, chromedp.PrintToPDF(chromedp.PDFPaper(paper), chromedp.PDFOutlineAndTagged()))
	if err != nil {
		p.t.Fatal(err)
	}
	pages, err := pdfPages(b)
	if err != nil {
		p.t.Fatal(err)
	}
	return PDF{Bytes: b, Pages: pages, Outline: pdfTitles(b)}
}

var (
	pdfPageRE     = regexp.MustCompile(`/Type\s*/Page\b[^s]`)
	pdfMediaBoxRE = regexp.MustCompile(`/MediaBox\s*\[\s*([\d.]+)\s+([\d.]+)\s+([\d.]+)\s+([\d.]+)\s*\]`)
	pdfTitleRE    = regexp.MustCompile(`/Title\s*(<[0-9A-Fa-f\s]*>|\((?:[^()\\]|\\.)*\))`)
)

// pdfPages returns the width and height in points of each page of a PDF
// Chromium printed. Its page objects are not compressed, so the media
// boxes can be read from the bytes (ISO 32000-1:2008, 7.7.3.3, "Page Objects").
func pdfPages(pdf []byte) ([][2]float64, error) {
	if !bytes.HasPrefix(pdf, []byte("%PDF-")) {
		return nil, fmt.Errorf("not a PDF: %.20q", pdf)
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
		return nil, fmt.Errorf("%d page objects, %d media boxes", n, len(pages))
	}
	return pages, nil
}

// pdfTitles returns the titles of a PDF's outline items and document
// information: text strings, literal or hexadecimal UTF-16BE with a byte
// order mark (ISO 32000-1:2008, 7.9.2.2, "Text String Type"; 12.3.3,
// "Document Outline").
func pdfTitles(pdf []byte) []string {
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
			out = append(out, string(utf16.Decode(u)))
		} else {
			out = append(out, strings.NewReplacer(`\(`, "(", `\)`, ")", `\\`, `\`).Replace(s[1:len(s)-1]))
		}
	}
	return out
}

// Screenshot returns a PNG of the window with the page scrolled to the top.
func (p *Page) Screenshot() []byte {
	p.t.Helper()
	p.Do(chromedp.Evaluate[chromedp.Void](`window.scrollTo(0, 0)`))
	b, err := chromedp.Run(p.ctx, chromedp.CaptureScreenshot())
	if err != nil {
		p.t.Fatal(err)
	}
	return b
}

// Ink measures a screenshot: the fraction of pixels (every second one in
// each direction) that differ from its top left pixel, the background, and
// how many colours it has.
func Ink(shot []byte) (ink float64, colours int, err error) {
	im, err := png.Decode(bytes.NewReader(shot))
	if err != nil {
		return 0, 0, err
	}
	b := im.Bounds()
	bg := im.At(b.Min.X, b.Min.Y)
	seen := map[[3]uint32]bool{}
	n, total := 0, 0
	for y := b.Min.Y; y < b.Max.Y; y += 2 {
		for x := b.Min.X; x < b.Max.X; x += 2 {
			c := im.At(x, y)
			r, g, bl, _ := c.RGBA()
			seen[[3]uint32{r >> 8, g >> 8, bl >> 8}] = true
			if c != bg {
				n++
			}
			total++
		}
	}
	return float64(n) / math.Max(1, float64(total)), len(seen), nil
}
