package report_test

import (
	"math"
	"os"
	"strings"
	"testing"

	"github.com/chromedp/chromedp"

	"github.com/regdrift/regdrift/render/report/reporttest"
)

// The browser tests open the synthetic report in headless Chromium
// (Debian's chromium package; .ci/run installs it) and use it as a reader
// would. They never skip: without a browser they fail and say why.

func TestMain(m *testing.M) {
	code := m.Run()
	reporttest.Stop()
	os.Exit(code)
}

// shows checks that the readout shows site s with the test fields.
func shows(t testing.TB, r reporttest.Readout, s testSite) {
	t.Helper()
	if r.Caption != "Site "+s.name {
		t.Errorf("readout caption %q, want %q", r.Caption, "Site "+s.name)
	}
	if strings.Join(r.Values, "|") != strings.Join(s.values, "|") {
		t.Errorf("readout of %s shows %q, want %q", s.name, r.Values, s.values)
	}
	var want []string
	for _, f := range testFields {
		want = append(want, f.Label+" ["+f.Unit+"]")
	}
	if strings.Join(r.Rows, "|") != strings.Join(want, "|") {
		t.Errorf("readout rows %q, want %q", r.Rows, want)
	}
}

// markedAt checks that the mark ring is centred on image pixel (x, y).
func markedAt(t testing.TB, m *reporttest.Map, x, y float64) {
	t.Helper()
	mx, my, ok := m.Mark()
	// markTol: the ring is placed in percent of the image and drawn on
	// whole CSS pixels, so its centre may sit a pixel or two off.
	const markTol = 2.5
	if !ok {
		t.Errorf("no site marked")
	} else if math.Hypot(mx-x, my-y) > markTol {
		t.Errorf("mark at pixel (%.1f, %.1f), want (%.1f, %.1f)", mx, my, x, y)
	}
}

func TestBrowser(t *testing.T) {
	p := reporttest.OpenHTML(t, writeDoc(t, testDocument(t)), reporttest.Options{})
	_, view := testMap(t, 600)
	m := p.Map("")

	t.Run("images decode", func(t *testing.T) {
		imgs := p.Images()
		if len(imgs) != 2 {
			t.Fatalf("%d images, want 2", len(imgs))
		}
		for _, im := range imgs {
			if !im.Complete || !im.Decoded || im.Natural <= 0 {
				t.Errorf("image %q: complete %v, decoded %v, naturalWidth %d", im.Alt, im.Complete, im.Decoded, im.Natural)
			}
		}
	})

	t.Run("job text exact", func(t *testing.T) {
		// The browser's parser, like golang.org/x/net/html in
		// TestVerbatimExact, gives back the bytes: CR, CR LF, markup and all.
		got := reporttest.Eval[[]string](p, `Array.from(document.querySelectorAll("details.verbatim pre")).map(e => e.textContent)`)
		if len(got) != 2 || got[0] != string(testJob) || got[1] != string(testInclude) {
			t.Errorf("the page shows %q, want %q and %q", got, testJob, testInclude)
		}
	})

	t.Run("hover and click", func(t *testing.T) {
		if !m.Readout().Tools {
			t.Errorf("the script did not show the look-up controls")
		}
		for _, s := range []testSite{testSites[2], testSites[1], testSites[4]} {
			x, y := view.Pixel(s.at)
			m.Hover(x, y)
			shows(t, m.Readout(), s)
			m.Click(x, y)
			shows(t, m.Readout(), s)
			markedAt(t, m, x, y)
		}
		// Pointing at another site shows it; leaving the picture shows the
		// marked one again.
		m.Hover(view.Pixel(testSites[3].at))
		shows(t, m.Readout(), testSites[3])
		m.Leave()
		shows(t, m.Readout(), testSites[4])
	})

	t.Run("search", func(t *testing.T) {
		r := m.Find("m4.h2")
		shows(t, r, testSites[3])
		if r.Status != "Found M4.H2." {
			t.Errorf("status %q", r.Status)
		}
		x, y := view.Pixel(testSites[3].at)
		markedAt(t, m, x, y)
		r = m.Find("H2")
		shows(t, r, testSites[2])
		if !strings.HasPrefix(r.Status, "2 sites contain") {
			t.Errorf("status %q", r.Status)
		}
		if r = m.Find("nowhere"); r.Status != "No site is named “nowhere”." {
			t.Errorf("status %q", r.Status)
		}
	})

	t.Run("print", func(t *testing.T) {
		got := p.Print()
		want := reporttest.PrintStyle{Tools: "none", TableHeader: "table-header-group", ClosedFiles: 2, Images: 2}
		if got != want {
			t.Errorf("print style %+v, want %+v", got, want)
		}
		for _, paper := range []struct {
			name string
			size chromedp.PaperSize
		}{{"A4", chromedp.PaperA4}, {"Letter", chromedp.PaperLetter}} {
			pdf := p.PrintPDF(paper.size)
			// One page for the title and contents, then at least one per section.
			if len(pdf.Pages) < 1+len(testSectionTitles) {
				t.Errorf("%s: %d pages for %d sections", paper.name, len(pdf.Pages), len(testSectionTitles))
			}
			for _, pg := range pdf.Pages {
				// 1.5 pt: the paper sizes are given to 0.01 in (0.72 pt).
				if math.Abs(pg[0]-paper.size.Width*72) > 1.5 || math.Abs(pg[1]-paper.size.Height*72) > 1.5 {
					t.Errorf("%s: page of %.1f x %.1f pt", paper.name, pg[0], pg[1])
				}
			}
			for _, s := range append([]string{"Invented test report"}, testSectionTitles...) {
				if !contains(pdf.Outline, s) {
					t.Errorf("%s: the PDF outline %q lacks %q", paper.name, pdf.Outline, s)
				}
			}
		}
	})

	t.Run("screenshot", func(t *testing.T) {
		ink, colours, err := reporttest.Ink(p.Screenshot())
		// The top of the test report has black headings, grey boxes and a
		// coloured plot; 2 % ink in 50 colours is far below that and far
		// above a blank or error page.
		if err != nil || ink < 0.02 || colours < 50 {
			t.Errorf("screenshot looks blank: %.1f %% ink, %d colours, %v", 100*ink, colours, err)
		}
	})

	p.Check()
}

// TestBrowserNoScript loads the report with scripts disabled: the pictures
// and tables are all there, the look-up controls stay hidden.
func TestBrowserNoScript(t *testing.T) {
	p := reporttest.OpenHTML(t, writeDoc(t, testDocument(t)), reporttest.Options{NoScript: true})
	imgs := p.Images()
	for _, im := range imgs {
		if !im.Decoded || im.Natural <= 0 {
			t.Errorf("image %q does not decode without scripts", im.Alt)
		}
	}
	if n := len(imgs); n != 2 {
		t.Errorf("%d images", n)
	}
	if p.Map("").Readout().Tools {
		t.Errorf("look-up controls shown without the script that drives them")
	}
	if n := reporttest.Eval[int](p, `document.querySelectorAll("tbody tr").length`); n != len(testSites) {
		t.Errorf("%d table rows without scripts, want %d", n, len(testSites))
	}
	p.Check()
}

func contains(list []string, s string) bool {
	for _, v := range list {
		if v == s {
			return true
		}
	}
	return false
}
