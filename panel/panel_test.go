package panel

import (
	"errors"
	"math"
	"testing"
)

const in = 0.0254

func testLayout(rotate int) Layout {
	return Layout{
		Panel: Panel{Size: Vec{18 * in, 24 * in}, Border: 0.5 * in},
		Parts: []Part{{Name: "p", Size: Vec{1 * in, 2 * in},
			Couplers: []Coupler{{Name: "K", Section: "s", At: Vec{0.25 * in, 0.5 * in}}}}},
		Arrays: []Array{{Part: "p", Count: [2]int{2, 1}, Pitch: Vec{2.5 * in, 3 * in},
			Origin: Vec{1 * in, 1 * in}, UseOrigin: true, Rotate: rotate}},
	}
}

// TestExpandRotated checks positions and angles of a turned, offset array
// against values worked by hand: a part of 1 x 2 in with a coupler at
// (0.25, 0.5) in along x, turned by a quarter turn counter-clockwise about its
// lower-left corner and moved back so that its outline starts at the origin.
func TestExpandRotated(t *testing.T) {
	tests := []struct {
		rotate int
		pos    [2]Vec // in inches
		angle  float64
	}{
		{0, [2]Vec{{1.25, 1.5}, {3.75, 1.5}}, 0},
		{90, [2]Vec{{2.5, 1.25}, {5.0, 1.25}}, math.Pi / 2},
		{180, [2]Vec{{1.75, 2.5}, {4.25, 2.5}}, math.Pi},
		{270, [2]Vec{{1.5, 1.75}, {4.0, 1.75}}, 3 * math.Pi / 2},
	}
	for _, tt := range tests {
		l := testLayout(tt.rotate)
		inst, sites, err := l.Expand()
		if err != nil {
			t.Fatalf("rotate %d: %v", tt.rotate, err)
		}
		if len(inst) != 2 || len(sites) != 2 {
			t.Fatalf("rotate %d: %d instances, %d sites", tt.rotate, len(inst), len(sites))
		}
		for k, s := range sites {
			want := Vec{tt.pos[k].X * in, tt.pos[k].Y * in}
			if math.Hypot(s.Pos.X-want.X, s.Pos.Y-want.Y) > 1e-12 {
				t.Errorf("rotate %d site %d at %v in, want %v", tt.rotate, k, Vec{s.Pos.X / in, s.Pos.Y / in}, tt.pos[k])
			}
			if math.Abs(s.Angle-tt.angle) > 1e-12 {
				t.Errorf("rotate %d site %d angle %v, want %v", tt.rotate, k, s.Angle, tt.angle)
			}
			if s.I != k || s.J != 0 || s.Instance != k {
				t.Errorf("rotate %d site %d indices %d,%d inst %d", tt.rotate, k, s.I, s.J, s.Instance)
			}
		}
	}
}

func TestExpandCentred(t *testing.T) {
	l := testLayout(0)
	l.Arrays[0].UseOrigin = false
	l.Arrays[0].Count = [2]int{3, 4}
	inst, sites, err := l.Expand()
	if err != nil {
		t.Fatal(err)
	}
	if len(inst) != 12 || len(sites) != 12 {
		t.Fatalf("%d instances, %d sites", len(inst), len(sites))
	}
	// Extent: 2·2.5 + 1 = 6 in by 3·3 + 2 = 11 in, centred on the origin.
	first := inst[0].Bounds.Min
	if math.Abs(first.X+3*in) > 1e-12 || math.Abs(first.Y+5.5*in) > 1e-12 {
		t.Errorf("first part at %v in", Vec{first.X / in, first.Y / in})
	}
	if sites[11].Name != "a1 p(3,4) K" {
		t.Errorf("last site name %q", sites[11].Name)
	}
}

func TestExpandErrors(t *testing.T) {
	tests := []struct {
		name   string
		modify func(*Layout)
		want   error
		key    string
	}{
		{"pitch overlap", func(l *Layout) { l.Arrays[0].Pitch.X = 1.5 * in; l.Arrays[0].Rotate = 90 }, ErrOverlap, "array[0].pitch"},
		{"in border", func(l *Layout) { l.Arrays[0].Origin = Vec{-9 * in, 0} }, ErrInBorder, "array[0]"},
		{"off panel", func(l *Layout) { l.Arrays[0].Origin = Vec{8 * in, 0} }, ErrOffPanel, "array[0]"},
		{"arrays overlap", func(l *Layout) {
			a := l.Arrays[0]
			a.Origin.X += 0.5 * in
			l.Arrays = append(l.Arrays, a)
		}, ErrOverlap, "array[1]"},
		{"unknown part", func(l *Layout) { l.Arrays[0].Part = "q" }, nil, "array[0].part"},
		{"bad rotate", func(l *Layout) { l.Arrays[0].Rotate = 45 }, nil, "array[0].rotate"},
		// The part's outline enters the 0.5 in border although its coupler,
		// 0.25 in from the part's left edge, is 0.55 in from the panel edge.
		{"part in border", func(l *Layout) {
			l.Parts[0].Couplers[0].At.X = 0.75 * in
			l.Arrays[0].Origin = Vec{-8.8 * in, 0}
		}, ErrInBorder, "array[0]"},
		{"too many sites", func(l *Layout) {
			for k := 0; k < 10; k++ {
				l.Parts[0].Couplers = append(l.Parts[0].Couplers, l.Parts[0].Couplers[0])
			}
			l.Parts[0].Size = Vec{1e-4, 1e-4}
			l.Parts[0].Couplers = l.Parts[0].Couplers[:11]
			for k := range l.Parts[0].Couplers {
				l.Parts[0].Couplers[k].At = Vec{5e-5, 5e-5}
			}
			l.Arrays[0] = Array{Part: "p", Count: [2]int{500, 400}, Pitch: Vec{1e-4, 1e-4}}
		}, nil, "array[0].count"},
		{"huge panel", func(l *Layout) { l.Panel.Size.Y = 1e250 * in }, nil, "panel.size"},
		{"array name twice", func(l *Layout) {
			a := l.Arrays[0]
			a.Origin.Y += 5 * in
			l.Arrays[0].Name, a.Name = "x", "x"
			l.Arrays = append(l.Arrays, a)
		}, ErrDuplicateName, "array[1].name"},
		{"array name equals a default one", func(l *Layout) {
			a := l.Arrays[0]
			a.Origin.Y += 5 * in
			a.Name = "a1"
			l.Arrays = append(l.Arrays, a)
		}, ErrDuplicateName, "array[1].name"},
		{"array name with a blank at its end", func(l *Layout) { l.Arrays[0].Name = "x " }, nil, "array[0].name"},
		{"too many placements", func(l *Layout) {
			l.Placements = make([]Placement, MaxSites)
		}, nil, "sites"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			l := testLayout(0)
			tt.modify(&l)
			_, _, err := l.Expand()
			if err == nil {
				t.Fatal("no error")
			}
			if tt.want != nil && !errors.Is(err, tt.want) {
				t.Errorf("error %v, want %v", err, tt.want)
			}
			var fe *FieldError
			if tt.key != "" && (!errors.As(err, &fe) || fe.Key != tt.key) {
				t.Errorf("error %v does not name key %q", err, tt.key)
			}
		})
	}
}

// TestOverlapManyParts checks that overlap detection stays fast for a long
// single column and still finds a second array laid over the first.
func TestOverlapManyParts(t *testing.T) {
	l := Layout{
		Panel:  Panel{Size: Vec{18 * in, 24 * in}},
		Parts:  []Part{{Name: "p", Size: Vec{1e-6, 1e-6}}},
		Arrays: []Array{{Part: "p", Count: [2]int{1, 500000}, Pitch: Vec{1e-6, 1.1e-6}, Center: Vec{}}},
	}
	if _, _, err := l.Expand(); err != nil {
		t.Fatal(err)
	}
	l.Arrays = append(l.Arrays, Array{Part: "p", Count: [2]int{3, 3}, Pitch: Vec{1.1e-6, 1.1e-6}, Center: Vec{}})
	if _, _, err := l.Expand(); !errors.Is(err, ErrOverlap) {
		t.Fatalf("error %v, want an overlap", err)
	}
	l.Arrays[0].Count = [2]int{2000, 2000}
	if _, _, err := l.Expand(); err == nil {
		t.Fatal("four million parts accepted")
	}
}

// TestArrayExtents: each array's extent is the union of its parts' outlines
// (hand-worked from the pitch and part size); placements belong to none.
func TestArrayExtents(t *testing.T) {
	inst := []Instance{
		{Array: 0, Bounds: Rect{Vec{0, 0}, Vec{1, 2}}},
		{Array: 0, Bounds: Rect{Vec{3, 0}, Vec{4, 2}}},
		{Array: 1, Bounds: Rect{Vec{-5, -5}, Vec{-4, -3}}},
		{Array: -1, Bounds: Rect{Vec{9, 9}, Vec{10, 10}}},
	}
	got := ArrayExtents(3, inst)
	want := []Rect{{Vec{0, 0}, Vec{4, 2}}, {Vec{-5, -5}, Vec{-4, -3}}, {}}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("array %d: extent %v, want %v", i, got[i], want[i])
		}
	}
}

// TestExpandNamesAndCoupons: an array's name heads its parts' and sites'
// names (a1, a2, … without one), and a coupon array marks its instances.
func TestExpandNamesAndCoupons(t *testing.T) {
	l := testLayout(0)
	b := l.Arrays[0]
	b.Origin.Y += 5 * in
	b.Name, b.Coupon = "strip", true
	l.Arrays = append(l.Arrays, b)
	inst, sites, err := l.Expand()
	if err != nil {
		t.Fatal(err)
	}
	want := []struct {
		name   string
		coupon bool
	}{{"a1 p(1,1)", false}, {"a1 p(2,1)", false}, {"strip p(1,1)", true}, {"strip p(2,1)", true}}
	if len(inst) != len(want) {
		t.Fatalf("%d instances", len(inst))
	}
	for k, w := range want {
		if inst[k].Name != w.name || inst[k].Coupon != w.coupon {
			t.Errorf("instance %d: %q coupon %v, want %q %v", k, inst[k].Name, inst[k].Coupon, w.name, w.coupon)
		}
		if sites[k].Name != w.name+" K" {
			t.Errorf("site %d: %q, want %q", k, sites[k].Name, w.name+" K")
		}
	}
	if l.ArrayName(0) != "a1" || l.ArrayName(1) != "strip" {
		t.Errorf("array names %q, %q", l.ArrayName(0), l.ArrayName(1))
	}
}
