package history

import (
	"errors"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/registration"
)

func TestReadConstructions(t *testing.T) {
	c, err := ReadConstructions(strings.NewReader("# job 12\nlayer,construction,role\nL3,C2 5mil,core top\nL4, C2 5mil ,core bottom\n"), "c.csv")
	if err != nil {
		t.Fatal(err)
	}
	if b, err := c.Of("L4"); err != nil || b.Construction != "C2 5mil" || b.Role != "core bottom" || b.Row != 4 {
		t.Errorf("L4: %+v, %v", b, err)
	}
	if b, err := c.Of("L3-L4"); err != nil || b.Role != "L3-L4 (core top − core bottom)" {
		t.Errorf("L3-L4: %+v, %v", b, err)
	}
	if _, err := c.Of("L5"); !errors.Is(err, ErrUnknownLayer) || !strings.Contains(err.Error(), "L5") {
		t.Errorf("L5: %v", err)
	}
	const h = "layer,construction,role\n"
	for _, tt := range []struct {
		name, csv string
		row       int
		column    string
	}{
		{"empty", "", 1, ""},
		{"unknown column", "layer,construction,role,note\n", 1, "note"},
		{"missing column", "layer,construction\n", 1, "role"},
		{"empty cell", h + "L3,,top\n", 2, "construction"},
		{"pair", h + "L3-L4,C,top\n", 2, "layer"},
		{"duplicate", h + "L3,C,a\nL3,C,b\n", 3, "layer"},
		{"no rows", h, 0, ""},
	} {
		t.Run(tt.name, func(t *testing.T) {
			_, err := ReadConstructions(strings.NewReader(tt.csv), "c.csv")
			var ce *registration.CSVError
			if !errors.As(err, &ce) || ce.Row != tt.row || ce.Column != tt.column || ce.File != "c.csv" {
				t.Errorf("got %v, want row %d, column %q", err, tt.row, tt.column)
			}
		})
	}
}

func FuzzReadConstructions(f *testing.F) {
	f.Add("layer,construction,role\nL3,C2 5mil,core top\n")
	f.Add("layer,role,construction\n\"L3\",a,b\n#x\nL4,c,d\n")
	f.Fuzz(func(t *testing.T, s string) {
		c, err := ReadConstructions(strings.NewReader(s), "f.csv")
		if err != nil {
			var ce *registration.CSVError
			if !errors.As(err, &ce) {
				t.Fatalf("error %v is not a *CSVError", err)
			}
			return
		}
		for l, b := range c {
			if l == "" || b.Construction == "" || b.Role == "" {
				t.Fatalf("empty entry %q: %+v", l, b)
			}
		}
	})
}
