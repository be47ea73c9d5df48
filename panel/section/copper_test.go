package section

import (
	"errors"
	"math"
	"testing"
)

// TestCopperWeight: 1 oz/ft² is 28.349523125 g over 0.09290304 m² (both
// exact by definition of the international avoirdupois ounce and foot,
// 1959), 305.1517 g/m²; at the handbook density of copper, 8.96 g/cm³ (CRC
// Handbook of Chemistry and Physics), that is 34.0571 µm = 1.3408 mil
// (calculated here). The trade quotes 1.35–1.4 mil per ounce (common
// practice), which is what a density a little below 8.96 or rounding gives.
func TestCopperWeight(t *testing.T) {
	if got, want := OunceMass/SquareFoot, 0.30515172727; math.Abs(got/want-1) > 1e-10 {
		t.Errorf("1 oz/ft² = %.10g kg/m², want %.10g", got, want)
	}
	if got, want := CopperWeightThickness(1), 34.057112e-6; math.Abs(got/want-1) > 1e-7 {
		t.Errorf("1 oz copper = %.8g m, want %.8g (34.0571 µm)", got, want)
	}
	if got := CopperWeightThickness(1) / (25.4e-6); math.Abs(got-1.34083) > 1e-5 {
		t.Errorf("1 oz copper = %.6f mil, want 1.34083", got)
	}
	// Foil plus plating sums exactly (in binary floating point the sum is
	// the sum: one rounding per step).
	foil := CopperWeightThickness(0.5)
	plating := []float64{1.0 * testMil, 0.3 * testMil}
	if got, want := FinishedThickness(foil, plating), foil+1.0*testMil+0.3*testMil; got != want {
		t.Errorf("finished %.17g, want %.17g", got, want)
	}
}

func TestBuildErrors(t *testing.T) {
	base := func() *Section {
		s := edgeMicro(10*testMil, 18*testMil, 6*testMil, 1.4*testMil, 3.48)
		l := &s.Stackup.Layers[0]
		l.Foil = CopperWeightThickness(0.5)
		l.Plating = []float64{0.5 * testMil, 0.2 * testMil}
		l.Thickness = FinishedThickness(l.Foil, l.Plating)
		return s
	}
	if err := base().Validate(); err != nil {
		t.Fatalf("foil and plating: %v", err)
	}
	for _, c := range []struct {
		name string
		edit func(s *Section)
		key  string
	}{
		{"sum", func(s *Section) { s.Stackup.Layers[0].Thickness += 0.1 * testMil }, "stackup.layers[0].thickness"},
		{"plating step", func(s *Section) { s.Stackup.Layers[0].Plating[1] = -0.1 * testMil }, "stackup.layers[0].plating[1]"},
		{"negative foil", func(s *Section) { s.Stackup.Layers[0].Foil = -1e-6 }, "stackup.layers[0].foil"},
		{"dielectric foil", func(s *Section) { s.Stackup.Layers[1].Foil = 1e-6 }, "stackup.layers[1].foil"},
		{"two names", func(s *Section) { s.Stackup.Layers[1].Name = "G" }, "stackup.layers[2].name"},
	} {
		s := base()
		c.edit(s)
		err := s.Validate()
		var fe *FieldError
		if !errors.As(err, &fe) || fe.Key != c.key {
			t.Errorf("%s: error %v, want a FieldError for %s", c.name, err, c.key)
		}
	}
	// Perturbing the finished copper moves the foil, keeping the sum.
	s := base()
	p := s.Perturbed(paramByKey(t, s, "T.copper"), 0.1*testMil)
	if err := p.Validate(); err != nil {
		t.Errorf("perturbed copper: %v", err)
	}
}

// TestPerturbedPastFoil: a copper change is the foil's (the finished
// thickness is what the field sees); one that thins the layer by more than
// its foil, as a term on a plating step can at a large excursion, leaves no
// foil and the plating steps in proportion, the finished thickness still
// their sum, so that the perturbed section validates.
func TestPerturbedPastFoil(t *testing.T) {
	s := edgeMicro(10*testMil, 18*testMil, 6*testMil, 1.4*testMil, 3.48)
	l := &s.Stackup.Layers[0]
	l.Foil = CopperWeightThickness(0.5) // 0.67 mil
	l.Plating = []float64{0.6 * testMil, 1.0 * testMil}
	l.Thickness = FinishedThickness(l.Foil, l.Plating)
	p := Param{Kind: ParamCopper, Layer: 0}
	for _, dv := range []float64{0.3 * testMil, -0.3 * testMil, -0.9 * testMil} {
		ps := s.Perturbed(p, dv)
		pl := ps.Stackup.Layers[0]
		if err := ps.Validate(); err != nil {
			t.Errorf("copper %+.1f mil: %v", dv/testMil, err)
		}
		if got, want := pl.Thickness, l.Thickness+dv; math.Abs(got-want) > 1e-12*want {
			t.Errorf("copper %+.1f mil: finished %.6g mil, want %.6g", dv/testMil, got/testMil, want/testMil)
		}
		wantFoil := math.Max(0, l.Foil+dv)
		if math.Abs(pl.Foil-wantFoil) > 1e-12*l.Thickness {
			t.Errorf("copper %+.1f mil: foil %.6g mil, want %.6g", dv/testMil, pl.Foil/testMil, wantFoil/testMil)
		}
		if wantFoil == 0 {
			if r := pl.Plating[1] / pl.Plating[0]; math.Abs(r-1.0/0.6) > 1e-12 {
				t.Errorf("copper %+.1f mil: plating steps %v, not in the proportion 0.6 : 1.0", dv/testMil, pl.Plating)
			}
		}
	}
	if s.Stackup.Layers[0].Foil != CopperWeightThickness(0.5) || s.Stackup.Layers[0].Plating[0] != 0.6*testMil {
		t.Error("Perturbed changed the section it copied")
	}
}
