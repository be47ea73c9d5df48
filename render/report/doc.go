// Package report writes a self-contained HTML report: one file that opens
// offline in a current browser, prints cleanly and needs nothing beside it.
//
// It knows nothing of circuit boards. The caller builds a Document of
// Sections, each a title and a list of Blocks — a headline of key figures,
// paragraphs, lists, figures, tables, verbatim text and the interactive
// panel map — and calls Document.Write. The sections appear in the order
// given; a report adds a section by appending one more, so a caller keeps
// one function per section:
//
//	sections := []func(*data) (report.Section, bool){headline, crossSection, curve, panelMap, ...}
//	for _, f := range sections {
//		if s, ok := f(d); ok {
//			doc.Sections = append(doc.Sections, s)
//		}
//	}
//	err := doc.Write(w)
//
// # Self-contained
//
// Pictures are PNG data URIs (RFC 2397) with their pixel size in the
// markup, styles are one inline style sheet and the script is inline, so
// the page makes no request: no fonts (the reader's own sans-serif is
// used), no framework, no network. Every <img> has alt text, every table
// has header cells, and a number always stands beside its unit — in the
// column header ("offset [mil]"), in the headline item, or in the text.
// Colours are black, white and greys, so the page reads the same in grey;
// the figures carry their own (perceptual) palettes.
//
// # With scripts off, and in print
//
// Everything a reader needs is in the markup: the tables, the pictures, the
// verbatim files. The script only adds the site look-up on the panel map,
// whose controls are hidden until the script shows them. The print style
// sheet (A4 and Letter alike: the page box is left to the printer, widths
// are relative) starts each section on a new page, repeats table headers
// on every page, keeps figures and table rows whole, hides the look-up
// controls and shows the collapsed verbatim files in full.
//
// # The panel map
//
// PanelMap is a PNG of the panel and, embedded beside it as JSON, every
// site's name, its position in the picture's pixels and the values to show
// for it. Hovering shows the nearest site's values, a click marks it, and a
// search box finds a site by name. Where the sites are in the picture is
// known only to whoever drew it, so the caller passes a Transform — the
// panel rectangle, the pixel rectangle it was drawn into, and whether y is
// flipped — and the sites are placed with it; ViewTransform takes it from a
// render.View.
package report
