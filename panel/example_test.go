package panel_test

import (
	"fmt"

	"github.com/regdrift/regdrift/panel"
)

// Two columns of a part turned a quarter turn: the coupler's lines, along x in
// the part, run along y on the panel.
func ExampleLayout_Expand() {
	const in = 0.0254
	l := panel.Layout{
		Panel: panel.Panel{Size: panel.Vec{X: 18 * in, Y: 24 * in}, Border: 0.8 * in},
		Parts: []panel.Part{{Name: "module", Size: panel.Vec{X: 1 * in, Y: 2 * in},
			Couplers: []panel.Coupler{{Name: "K", Section: "hybrid", At: panel.Vec{X: 0.25 * in, Y: 0.5 * in}}}}},
		Arrays: []panel.Array{{Part: "module", Count: [2]int{2, 1}, Pitch: panel.Vec{X: 2.5 * in},
			Center: panel.Vec{}, Rotate: 90}},
	}
	_, sites, err := l.Expand()
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, s := range sites {
		fmt.Printf("%s at (%.3f, %.3f) in, lines along (%.0f, %.0f)\n", s.Name, s.Pos.X/in, s.Pos.Y/in, s.U.X, s.U.Y)
	}
	// Output:
	// a1 module(1,1) K at (-0.750, -0.250) in, lines along (0, 1)
	// a1 module(2,1) K at (1.750, -0.250) in, lines along (0, 1)
}
