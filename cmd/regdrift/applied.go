package main

import (
	"fmt"
	"math"
	"strings"

	"github.com/regdrift/regdrift/panel/unit"
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

// parseAppliedFlag reads LAYER:x=SCALE[,y=SCALE].
func parseAppliedFlag(v string) (registration.Applied, error) {
	const want = "want LAYER:x=SCALE,y=SCALE such as L3:x=+200ppm,y=+180ppm"
	layer, rest, ok := strings.Cut(v, ":")
	layer = strings.TrimSpace(layer)
	a := registration.Applied{Layer: layer}
	if !ok || layer == "" || rest == "" {
		return a, usageErr("--applied %q: %s", v, want)
	}
	if strings.Contains(layer, "-") {
		return a, usageErr("--applied %q: the artwork belongs to one layer, not a pair", v)
	}
	seen := map[string]bool{}
	for _, kv := range strings.Split(rest, ",") {
		k, val, ok := strings.Cut(kv, "=")
		k = strings.ToLower(strings.TrimSpace(k))
		if !ok || (k != "x" && k != "y") || seen[k] {
			return a, usageErr("--applied %q: %s", v, want)
		}
		seen[k] = true
		s, err := unit.Parse(strings.TrimSpace(val), unit.Strain)
		if err != nil {
			return a, usageErr("--applied %q: %s: %v", v, k, err)
		}
		if !(math.Abs(s) < 0.5) {
			return a, usageErr("--applied %q: %s: an artwork scale must lie within ±50 %%", v, k)
		}
		if k == "x" {
			a.ScaleX = s
		} else {
			a.ScaleY = s
		}
	}
	return a, nil
}
