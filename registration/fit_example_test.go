package registration_test

import (
	"fmt"
	"strings"

	"github.com/regdrift/regdrift/registration"
)

// ExampleFitAll reads a measurement file and fits one panel's layer: the
// targets were displaced by a −200 ppm scale in x, +100 ppm in y and a
// 0.5 mil offset in x, so the affine fit returns those terms.
func ExampleFitAll() {
	const csv = `panel,layer,target,x [in],y [in],dx [mil],dy [mil]
P1,L3,T1,-8,-10,2.1,-1.0
P1,L3,T2,8,-10,-1.1,-1.0
P1,L3,T3,8,10,-1.1,1.0
P1,L3,T4,-8,10,2.1,1.0
`
	ts, err := registration.ReadTargets(strings.NewReader(csv), "example.csv")
	if err != nil {
		fmt.Println(err)
		return
	}
	fits, err := registration.FitAll(ts, &registration.FitSettings{Model: registration.Affine})
	if err != nil {
		fmt.Println(err)
		return
	}
	f := fits[0]
	fmt.Printf("panel %s layer %s: offset_x %.2f mil, scale_x %.0f ppm, scale_y %.0f ppm, rms %.3f mil\n",
		f.Panel, f.Layer, f.Terms[registration.OffsetX]/25.4e-6,
		f.Terms[registration.ScaleX]*1e6, f.Terms[registration.ScaleY]*1e6, f.RMS/25.4e-6)
	// Output:
	// panel P1 layer L3: offset_x 0.50 mil, scale_x -200 ppm, scale_y 100 ppm, rms 0.000 mil
}
