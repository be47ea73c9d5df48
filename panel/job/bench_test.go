package job

import (
	"testing"

	"github.com/regdrift/regdrift/samples"
)

// BenchmarkParse loads each demo job: TOML decoding, the line index, the
// layout's expansion to sites and the model.
func BenchmarkParse(b *testing.B) {
	for _, name := range []string{"same-core.toml", "two-core.toml"} {
		data, err := samples.FS.ReadFile(name)
		if err != nil {
			b.Fatal(err)
		}
		b.Run(name, func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := Parse(data, name, "."); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
