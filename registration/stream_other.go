//go:build !amd64 || purego

package registration

// normsFast is normsFastGo where there is no assembly of it.
func (r *Stream) normsFast(dst []float64) ([]float64, uint64) { return r.normsFastGo(dst) }
