//go:build amd64 && !purego

package registration

// normsFast is normsFastGo in assembly (stream_amd64.s): the same words,
// numbers and state, in about 40 instructions a word where the compiler's
// code of normsFastGo takes 54 (it runs out of registers for the
// generator's state, dst and the two halves, and steps dst as a slice).
func (r *Stream) normsFast(dst []float64) ([]float64, uint64) {
	n, u := normsFastAsm(r, dst)
	return dst[n:], u
}

// normsFastAsm fills dst as normsFastGo does and returns how many numbers
// it filled (even) and the word that stopped it, if any.
//
//go:noescape
func normsFastAsm(r *Stream, dst []float64) (n int, u uint64)
