package drift

import "testing"

// BenchmarkCouplingBudget10k ranks the 12 process terms of
// bigProcessInput and its registration terms over 10,000 sites (the budget
// of every yield run).
func BenchmarkCouplingBudget10k(b *testing.B) {
	in := bigProcessInput(b)
	set := &Settings{Accuracy: 0.01, CacheDir: b.TempDir()}
	a, err := Analyse(b.Context(), in, set)
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		if cb := a.CouplingBudget(); len(cb.Panel) == 0 {
			b.Fatal("empty budget")
		}
	}
}
