package main

import (
	"fmt"
	"strings"

	"github.com/regdrift/regdrift/registration"
)

// appliedHelp is the usage of --applied, shared by comp and fit.
const appliedHelp = "artwork scale each layer of the measured lot was built with: a CSV file (layer, scale_x [ppm], scale_y [ppm]) or LAYER:x=SCALE,y=SCALE (repeatable); layers not named were built at CAD size"

// parseApplied reads the --applied values: each is either a file (CSV, see
// registration.ReadApplied; "-" for stdin) or the compact form
// LAYER:x=SCALE[,y=SCALE] with a strain unit on each scale (an axis left out
// is zero). A layer may be given once over all values. Errors are bad input
// naming the file's row or the flag value.
//
// src names where each layer was given: its file, or "--applied" for the
// compact form.
func parseApplied(values []string, std stdio) (set registration.AppliedSet, src map[string]string, err error) {
	set, src = registration.AppliedSet{}, map[string]string{}
	for _, v := range values {
		var part registration.AppliedSet
		from := "--applied"
		if strings.Contains(v, "=") {
			a, err := parseAppliedFlag(v)
			if err != nil {
				return nil, nil, err
			}
			part = registration.AppliedSet{a.Layer: a}
		} else {
			data, name, err := readFile(v, std.in)
			if err != nil {
				return nil, nil, badInput(fmt.Errorf("--applied: %w", err))
			}
			if part, err = registration.ReadApplied(strings.NewReader(string(data)), name); err != nil {
				return nil, nil, badInput(fmt.Errorf("--applied: %w", err))
			}
			from = name
		}
		for l, a := range part {
			if _, dup := set[l]; dup {
				return nil, nil, usageErr("--applied: layer %q is given twice", l)
			}
			set[l], src[l] = a, from
		}
	}
	return set, src, nil
}

// parseAppliedFlag reads LAYER:x=SCALE[,y=SCALE] (registration.ParseAppliedFlag);
// an error is a usage error naming the value.
func parseAppliedFlag(v string) (registration.Applied, error) {
	a, err := registration.ParseAppliedFlag(v)
	if err != nil {
		return a, usageErr("--applied %q: %v", v, err)
	}
	return a, nil
}
