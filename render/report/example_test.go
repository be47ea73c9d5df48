package report_test

import (
	"bytes"
	"fmt"
	"strings"

	"github.com/regdrift/regdrift/render/report"
)

// Example builds a two-section report — key figures, a table and the
// input file — and writes it as one HTML page.
func Example() {
	doc := &report.Document{
		Title: "Invented example",
		Sections: []report.Section{
			{Title: "Summary", Blocks: []report.Block{
				&report.Headline{Items: []report.Item{{Label: "sites in spec", Value: "998 of 1000", Unit: "sites"}}},
				&report.Table{
					Caption: "Worst sites",
					Columns: []report.Column{{Label: "site"}, {Label: "offset", Unit: "mil", Numeric: true}},
					Rows:    [][]string{{"A1", "+1.20"}, {"B7", "-1.05"}},
				},
			}},
			{Title: "Job file", Blocks: []report.Block{
				&report.Verbatim{Name: "job.toml", Text: []byte("title = \"Invented\"\n")},
			}},
		},
	}
	var buf bytes.Buffer
	if err := doc.Write(&buf); err != nil {
		fmt.Println(err)
		return
	}
	page := buf.String()
	fmt.Println(strings.Count(page, "<section "), "sections")
	fmt.Println(strings.Contains(page, `<th scope="col" class="num">offset [mil]</th>`))
	fmt.Println(strings.Contains(page, "title = &#34;Invented&#34;"))
	// Output:
	// 2 sections
	// true
	// true
}
