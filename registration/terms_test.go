package registration

import (
	"regexp"
	"testing"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/unit"
)

// TestTermTable walks every TermKind: each has a job-file key of its own, a
// unit kind, a display unit the unit package knows for both output choices,
// a JSON key of its own and a displacement in Basis. A term added to the
// constants but not to the table or to Basis fails here.
func TestTermTable(t *testing.T) {
	keyRE := regexp.MustCompile(`^[a-z][a-z0-9_]*$`)
	keys, jsonKeys := map[string]bool{}, map[string]bool{}
	// A point off every axis and diagonal of the datum, so that no term's
	// basis vanishes there by accident.
	p, p0 := panel.Vec{X: 0.123, Y: -0.0457}, panel.Vec{X: 0.01, Y: 0.02}
	b := Basis(p, p0)
	for k := TermKind(0); k < NumTerms; k++ {
		info := k.Info()
		t.Run(k.String(), func(t *testing.T) {
			if !keyRE.MatchString(info.Key) || keys[info.Key] {
				t.Errorf("key %q is empty, malformed or repeated", info.Key)
			}
			keys[info.Key] = true
			if got, ok := TermByKey(info.Key); !ok || got != k {
				t.Errorf("TermByKey(%q) = %v, %v", info.Key, got, ok)
			}
			switch info.Kind {
			case unit.Length:
				if info.Unit != "" {
					t.Errorf("a length term follows the output unit, but the table gives %q", info.Unit)
				}
			case unit.Angle, unit.Strain:
				if _, ok := unit.Factor(info.Kind, info.Unit); !ok {
					t.Errorf("display unit %q is not a %s unit", info.Unit, info.Kind)
				}
			default:
				t.Errorf("unit kind %v is not a length, angle or strain", info.Kind)
			}
			for _, o := range []unit.Output{unit.MilInch, unit.MicronMM} {
				if _, ok := unit.Factor(info.Kind, k.Unit(o)); !ok {
					t.Errorf("%v output: unit %q is not a %s unit", o, k.Unit(o), info.Kind)
				}
			}
			if jk := k.JSONKey(); jk == "" || jsonKeys[jk] {
				t.Errorf("JSON key %q is empty or repeated", jk)
			} else {
				jsonKeys[jk] = true
			}
			if b[k] == (panel.Vec{}) {
				t.Errorf("Basis gives no displacement at %v", p)
			}
		})
	}
	if _, ok := TermByKey("rotaton"); ok {
		t.Error("TermByKey accepted a misspelt key")
	}
}
