package section_test

import (
	"fmt"
	"log"
)

// The cross-section as the solver meshes it, 3 mil offset: each layer's
// faces (the grounds bound the domain, y = 0 at the lower ground's inner
// face) and the traces' foot and far-face widths.
func ExampleSection_Drawing() {
	s := example()
	d, err := s.Drawing(3 * mil)
	if err != nil {
		log.Fatal(err)
	}
	for _, l := range d.Layers {
		name := s.Stackup.Layers[l.Index].Name
		if name == "" {
			name = fmt.Sprintf("layer %d", l.Index+1)
		}
		fmt.Printf("%-8s %6.2f .. %6.2f mil ground=%v\n", name, l.Y0/mil, l.Y1/mil, l.Ground)
	}
	for _, t := range d.Traces {
		fmt.Printf("%s centre %.2f mil, foot %.2f mil, far face %.2f mil\n", t.Layer, t.Centre/mil, t.Foot/mil, t.Far/mil)
	}
	// Output:
	// L2        47.40 ..  48.80 mil ground=true
	// layer 2   27.40 ..  47.40 mil ground=false
	// L3        26.20 ..  27.40 mil ground=false
	// layer 4   21.20 ..  26.20 mil ground=false
	// L4        20.00 ..  21.20 mil ground=false
	// layer 6    0.00 ..  20.00 mil ground=false
	// L5        -1.40 ..   0.00 mil ground=true
	// L3 centre 3.00 mil, foot 14.00 mil, far face 12.80 mil
	// L4 centre 0.00 mil, foot 14.00 mil, far face 12.80 mil
}
