package figure

import "testing"

// TestSampleTarget checks the fit figure's sample: all targets up to the
// limit, about the limit beyond it, and spread evenly over the file order.
// Fibonacci hashing of consecutive integers has the three-distance property
// (Knuth, The Art of Computer Programming, vol. 3, sec. 6.4), so the count
// kept from n is within a few of limit; 1 % of limit is that bound with a
// wide margin for the float rounding of the threshold.
func TestSampleTarget(t *testing.T) {
	for _, tc := range []struct{ n, limit int }{
		{160, 5000}, {5000, 5000}, {5001, 5000}, {24000, 5000}, {300000, 5000}, {2400000, 20000},
	} {
		th := sampleThreshold(tc.n, tc.limit)
		got := sampledCount(tc.n, th)
		want := min(tc.n, tc.limit)
		if d := got - want; d > want/100 || -d > want/100 {
			t.Errorf("n %d, limit %d: kept %d, want about %d", tc.n, tc.limit, got, want)
		}
		// Every tenth of the file keeps about a tenth of the sample.
		if tc.n > tc.limit {
			for part := range 10 {
				k := 0
				for i := tc.n * part / 10; i < tc.n*(part+1)/10; i++ {
					if sampleTarget(uint32(i), th) {
						k++
					}
				}
				if d := k - want/10; d > want/50 || -d > want/50 {
					t.Errorf("n %d: tenth %d keeps %d, want about %d", tc.n, part, k, want/10)
				}
			}
		}
	}
	if s := groupThousands(2400000); s != "2,400,000" {
		t.Errorf("groupThousands = %q", s)
	}
}
