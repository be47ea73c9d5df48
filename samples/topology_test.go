package samples_test

import (
	"context"
	"math"
	"reflect"
	"testing"

	"github.com/regdrift/regdrift/panel/job"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
)

// topologyVariants are the three builds of the topology comparison.
var topologyVariants = []string{"topology-one-core.toml", "topology-two-core.toml", "topology-microstrip.toml"}

// designTolerance is how closely the three designs' nominal couplings agree
// (the sample's header promises it): a tenth of a dB, a fifth of the spec
// tolerance, so that no build starts with an advantage a user could see in
// the yield.
const designTolerance = 0.1 // dB

// TestTopologyNominalCouplings solves each variant's cross-section directly
// at its design offset and checks that all three reach the same coupling,
// the spec's nominal, within designTolerance; that they share the panel,
// the placement, the stackup (the microstrip alone coated with mask) and
// the process file's terms.
func TestTopologyNominalCouplings(t *testing.T) {
	if testing.Short() {
		t.Skip("three field solves")
	}
	var jobs []*job.Job
	for _, name := range topologyVariants {
		j, err := job.Load(name, nil)
		if err != nil {
			t.Fatal(err)
		}
		jobs = append(jobs, j)
		if len(j.Sections) != 1 {
			t.Fatalf("%s: %d sections, want 1", name, len(j.Sections))
		}
		s := j.Sections[0]
		nom := s.NominalOffset()
		c, err := section.Sweep(context.Background(), s, []float64{nom, nom + 0.5*unit.Mil}, &section.Settings{})
		if err != nil {
			t.Fatal(err)
		}
		got := c.Points[0].CouplingDB
		if c.Points[0].Offset != nom {
			got = c.Points[1].CouplingDB
		}
		t.Logf("%s: coupling %.3f dB at %.2f mil", name, got, nom/unit.Mil)
		if d := got - s.Spec.Coupling; math.Abs(d) > designTolerance {
			t.Errorf("%s: nominal coupling %.3f dB, %+.3f dB from the spec's %.1f dB (want within %.2f dB)", name, got, d, s.Spec.Coupling, designTolerance)
		}
	}
	base := jobs[0]
	for k, j := range jobs[1:] {
		name := topologyVariants[k+1]
		if !reflect.DeepEqual(j.Layout.Panel, base.Layout.Panel) || len(j.Sites) != len(base.Sites) {
			t.Errorf("%s: panel or sites differ from %s", name, topologyVariants[0])
		}
		if !reflect.DeepEqual(j.Stackup.Layers, base.Stackup.Layers) {
			t.Errorf("%s: stackup differs from %s", name, topologyVariants[0])
		}
		if len(j.Model.Contributors) != len(base.Model.Contributors) {
			t.Errorf("%s: %d registration contributors, %s has %d", name, len(j.Model.Contributors), topologyVariants[0], len(base.Model.Contributors))
		}
	}
	if base.Stackup.Mask != nil || jobs[1].Stackup.Mask != nil || jobs[2].Stackup.Mask == nil {
		t.Error("only the microstrip build carries solder mask")
	}
}
