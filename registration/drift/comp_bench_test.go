package drift

import (
	"testing"

	"github.com/regdrift/regdrift/registration"
)

// BenchmarkCompensate10k times comp's whole analysis of 10,000 sites with the
// curve in the cache: the windows, the yield objective's recommendation, and
// both panels evaluated (the speed target is 1 s).
func BenchmarkCompensate10k(b *testing.B) {
	in := bigInput(b)
	set := &Settings{Accuracy: 0.01, CacheDir: b.TempDir()}
	if _, err := Compensate(b.Context(), in, nil, &registration.CompSettings{}, set); err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Compensate(b.Context(), in, nil, &registration.CompSettings{Step: 5e-6}, set); err != nil {
			b.Fatal(err)
		}
	}
}
