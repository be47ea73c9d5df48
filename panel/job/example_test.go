package job_test

import (
	"errors"
	"fmt"
	"os"
	"strings"

	"github.com/regdrift/regdrift/panel/job"
	"github.com/regdrift/regdrift/registration"
)

// An invented job: one stripline section, a 2 x 3 array of one-coupler
// parts, and one contributor.
const exampleJob = `
[panel]
size   = ["12 in", "18 in"]
border = "0.5 in"

[stackup]
layers = [
  { copper = "L2", thickness = "1.4 mil" },
  { prepreg = "20 mil", er = 3.5 },
  { copper = "L3", thickness = "1.4 mil" },
  { core = "5 mil", er = 3.2 },
  { copper = "L4", thickness = "1.4 mil" },
  { prepreg = "20 mil", er = 3.5 },
  { copper = "L5", thickness = "1.4 mil" },
]

[[section]]
name      = "c3"
traces    = [ { layer = "L3", width = "12 mil" }, { layer = "L4", width = "12 mil" } ]
grounds   = ["L2", "L5"]
frequency = "1 GHz"
spec      = { coupling = "-3 dB", tolerance = "0.3 dB" }

[[part]]
name     = "p"
size     = ["1 in", "1 in"]
couplers = [ { section = "c3", at = ["0.5 in", "0.5 in"] } ]

[[array]]
part  = "p"
count = [2, 3]
pitch = ["1.5 in", "1.5 in"]

[[contributor]]
layers  = ["L3"]
scale_x = { mean = "-150 ppm", sigma = "30 ppm" }
`

func ExampleParse() {
	j, err := job.Parse([]byte(exampleJob), "example.toml", ".")
	if err != nil {
		fmt.Println(err)
		return
	}
	sx := j.Model.Contributors[0].Terms[registration.ScaleX]
	fmt.Printf("%d sites of section %s; scale_x %.0f ± %.0f ppm\n", len(j.Sites), j.Sections[0].Name, sx.Mean/1e-6, sx.SD()/1e-6)

	_, err = job.Parse([]byte(strings.Replace(exampleJob, `"0.5 in"`, `0.5`, 1)), "example.toml", ".")
	var pe *job.ParseError
	if errors.As(err, &pe) && errors.Is(err, job.ErrValue) {
		fmt.Printf("line %d, key %s\n", pe.Line, pe.Key)
	}
	fmt.Println(err)
	// Output:
	// 6 sites of section c3; scale_x -150 ± 30 ppm
	// line 4, key panel.border
	// example.toml:4: panel.border: invalid value: 0.5 needs a unit: write it as a string such as "0.5 in" (in, mil, mm, um, m)
}

func ExampleWriteCompensation() {
	res := &registration.CompResult{Objective: registration.Worst, Common: "smallest compensation",
		Layers: []registration.LayerComp{{Layer: "L3",
			X: registration.AxisComp{Scale: 150e-6, Factor: 1.00015, Net: 149.9775e-6},
			Y: registration.AxisComp{Factor: 1}}}}
	job.WriteCompensation(os.Stdout, "example.toml", res)
	// Output:
	// # Artwork scale compensation recommended by regdrift comp for example.toml
	// # (objective worst; common part: smallest compensation).
	// # Each block is the net change of the layer's scale term, (f − 1)(1 + s) for the
	// # artwork factor f and the layer's mean movement s; the factor itself is in the
	// # comment. Include this file in the job to map the compensated build.
	//
	// # L3: artwork factor X 1.000150000 (+150.00 ppm), Y 1.000000000 (+0.00 ppm)
	// [[contributor]]
	// name    = "artwork compensation L3"
	// layers  = ["L3"]
	// scale_x = "149.978 ppm"
	// scale_y = "0 ppm"
}
