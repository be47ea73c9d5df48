package main

import (
	"errors"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration/drift"
)

// lengthUnit is the output unit choice of --units (unit.Output), with its
// names and sizes at hand.
type lengthUnit struct {
	unit.Output
	name   string  // "mil" or "um"
	factor float64 // metres per unit
	panel  string  // unit of panel coordinates: "in" or "mm"
	pfac   float64
}

func parseUnits(s string) (lengthUnit, error) {
	o, err := unit.ParseOutput(s)
	if err != nil {
		return lengthUnit{}, usageErr("--units: %v", err)
	}
	return lengthUnit{o, o.Length(), o.LengthSI(), o.Panel(), o.PanelSI()}, nil
}

// units returns the output units of the library's writers and figures.
func (lu lengthUnit) units() unit.Output { return lu.Output }

// input is what the analysis library needs of a job.
func input(j *Job) *drift.Input {
	return &drift.Input{Title: j.Title, Source: j.File, Layout: j.Layout, Instances: j.Instances,
		Sites: j.Sites, Sections: j.Sections, Model: j.Model, Process: j.Process}
}

// solveErr marks an error of the library as bad input when a section's own
// values caused it (a *section.FieldError), naming the line of j that
// defines the section.
func solveErr(j *Job, err error) error {
	var fe *section.FieldError
	if !errors.As(err, &fe) {
		return err
	}
	for i, s := range j.Sections {
		if s.Name == fe.Section {
			return badInput(j.SectionError(i, fe.Key, fe.Err))
		}
	}
	return badInput(err)
}
