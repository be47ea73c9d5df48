package section

import "testing"

// BenchmarkSParams is one evaluation of the 4-port (the inner loop of the
// peak search and of every point of a sweep).
func BenchmarkSParams(b *testing.B) {
	l := NewLines(asymC, asymC0)
	length := l.QuarterWave(2.45e9)
	b.ReportAllocs()
	var sink SParams
	for b.Loop() {
		sink = l.SParams(2.45e9, length, 50)
	}
	_ = sink
}

// BenchmarkPeakFrequency is the first-maximum search of one sweep point.
func BenchmarkPeakFrequency(b *testing.B) {
	l := NewLines(asymC, asymC0)
	length := l.QuarterWave(2.45e9)
	b.ReportAllocs()
	var sink float64
	for b.Loop() {
		sink = l.peakFrequency(2.45e9, length, 50)
	}
	_ = sink
}

// BenchmarkNewLines derives the line parameters and modes of one point.
func BenchmarkNewLines(b *testing.B) {
	b.ReportAllocs()
	var sink Lines
	for b.Loop() {
		sink = NewLines(asymC, asymC0)
	}
	_ = sink
}
