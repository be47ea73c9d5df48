package section

// Report is the machine-readable form of a curve for `regdrift sweep
// --json`: SI values with the unit in the key.
type Report struct {
	Section     string        `json:"section"`
	FrequencyHz float64       `json:"frequency_hz"`
	LengthM     float64       `json:"length_m"`
	ZRefOhm     float64       `json:"z_ref_ohm"`
	Points      []PointReport `json:"points"`
}

// PointReport is one solved offset of a Report.
type PointReport struct {
	OffsetM         float64       `json:"offset_m"`
	CFPerM          [2][2]float64 `json:"c_f_per_m"`
	C0FPerM         [2][2]float64 `json:"c0_f_per_m"`
	LHPerM          [2][2]float64 `json:"l_h_per_m"`
	KC              float64       `json:"k_c"`
	KL              float64       `json:"k_l"`
	CouplingDB      float64       `json:"coupling_db"`
	DirectivityDB   float64       `json:"directivity_db"`
	PeakFrequencyHz float64       `json:"peak_frequency_hz"`    // first maximum of the coupling; 0 if none below twice the higher quarter-wave frequency
	ZEvenOhm        *float64      `json:"z_even_ohm,omitempty"` // when the section is symmetric at this offset
	ZOddOhm         *float64      `json:"z_odd_ohm,omitempty"`
	ZLineOhm        [2]float64    `json:"z_line_ohm"`                 // √(L_ii/C_ii)
	ZModeOhm        [2]float64    `json:"z_mode_ohm"`                 // mode order of eps_eff; degenerate modes: odd-like first
	ModesDegenerate bool          `json:"modes_degenerate,omitempty"` // one εeff (one εr everywhere): any basis is a mode basis
	EpsEff          [2]float64    `json:"eps_eff"`                    // the two modes, ascending
	Convergence     ConvReport    `json:"convergence"`
}

// ConvReport is the convergence report of a point: the capacitances at the
// coarse and fine mesh levels and the extrapolated estimate.
type ConvReport struct {
	Levels []LevelReport `json:"levels"` // rough, coarse, fine
	// Extrapolated values are the point's c_f_per_m and c0_f_per_m.
	EstimatedError float64 `json:"estimated_error"` // relative
	Target         float64 `json:"target"`
	Iterations     int     `json:"iterations"`
	Residual       float64 `json:"residual"`
}

// LevelReport is one mesh level of a ConvReport.
type LevelReport struct {
	Level    float64       `json:"level"`
	Unknowns int           `json:"unknowns"`
	CFPerM   [2][2]float64 `json:"c_f_per_m"`
	C0FPerM  [2][2]float64 `json:"c0_f_per_m"`
}

// Report returns the curve's points in that JSON shape.
func (c *Curve) Report() Report {
	r := Report{Section: c.Section, FrequencyHz: c.Frequency, LengthM: c.Length, ZRefOhm: c.ZRef}
	for _, p := range c.Points {
		q := PointReport{
			OffsetM: p.Offset, CFPerM: p.C, C0FPerM: p.C0, LHPerM: p.L, KC: p.KC, KL: p.KL,
			CouplingDB: p.CouplingDB, DirectivityDB: p.DirectivityDB, PeakFrequencyHz: p.PeakFrequency,
			ZLineOhm: p.ZLine, ZModeOhm: p.ZMode, EpsEff: p.EpsEff, ModesDegenerate: p.Degenerate,
		}
		if p.Symmetric {
			ze, zo := p.ZEven, p.ZOdd
			q.ZEvenOhm, q.ZOddOhm = &ze, &zo
		}
		cv := p.Convergence
		for _, l := range []MeshLevel{cv.Rough, cv.Coarse, cv.Fine} {
			q.Convergence.Levels = append(q.Convergence.Levels, LevelReport{l.Level, l.Unknowns, l.C, l.C0})
		}
		q.Convergence.EstimatedError = cv.EstimatedError
		q.Convergence.Target = cv.Target
		q.Convergence.Iterations = cv.Iterations
		q.Convergence.Residual = cv.Residual
		r.Points = append(r.Points, q)
	}
	return r
}
