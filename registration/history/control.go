package history

import (
	"math"
	"slices"

	"github.com/regdrift/regdrift/registration"
)

// ControllerLambda is the weight of the newest lot in the run-to-run
// estimate of the material movement.
//
// The next lot's artwork setting comes from an EWMA controller (Ingolfsson
// & Sachs, "Stability and sensitivity of an EWMA controller", Journal of
// Quality Technology 25(4), 1993): the estimate of the movement is
// m̂ₙ = λ·mₙ + (1−λ)·m̂ₙ₋₁ and the next setting cancels it. Here the process
// gain is known exactly — the finished scale is (1+a)(1+m), so taking the
// applied artwork a out of each measurement recovers m whatever a was — and
// the loop is stable for any 0 < λ < 2 (their condition 0 < λ·ξ < 2 with
// the gain ratio ξ = 1). λ then only trades noise against lag: in a steady
// process the estimate scatters by σ·√(λ/(2−λ)) about the true movement
// (0.42σ at λ = 0.3), and after a step it is left (1−λ)ⁿ of the step behind
// n lots later (3 % after ten lots at λ = 0.3). A fab changes material lots
// every few weeks, so catching a step within ten lots is worth the noise of
// 0.42σ, which is below the spread of a single lot.
const ControllerLambda = 0.3

// ShiftWindow is the number of latest lots in which a chart signal flags a
// construction as shifted: about the lots the controller needs to absorb a
// step ((1−λ)¹⁰ = 2.8 %).
const ShiftWindow = 10

// ShiftBaseline is the number of latest lots the table's shift test charts
// (centre, σ̂ and the rules from those lots alone): a step well inside it
// shows as runs on both sides of the centre, while a step the controller
// absorbed long ago no longer flags the construction for ever, as a chart
// of the whole history would.
const ShiftBaseline = 30

// Estimate is the controller's estimate of a series' material movement for
// the next lot.
type Estimate struct {
	// Movement is the EWMA of the lot means, started at the first lot.
	Movement float64
	// SE is its standard error for a process in control: with σ the
	// lot-to-lot standard deviation and n lots,
	// σ·√((1−λ)^{2(n−1)} + λ/(2−λ)·[1 − (1−λ)^{2(n−1)}]) (the variance of
	// an EWMA started at the first observation; Montgomery, EWMA section,
	// for the sum of the geometric weights).
	SE float64
	N  int
}

// EWMAEstimate returns the controller's estimate from the lot means x (in
// order) with lot-to-lot standard deviation sigma.
func EWMAEstimate(x []float64, sigma, lambda float64) Estimate {
	if len(x) == 0 {
		return Estimate{Movement: math.NaN(), SE: math.NaN()}
	}
	z := x[0]
	for _, v := range x[1:] {
		z = lambda*v + (1-lambda)*z
	}
	p := math.Pow(1-lambda, 2*float64(len(x)-1))
	return Estimate{Movement: z, SE: sigma * math.Sqrt(p+lambda/(2-lambda)*(1-p)), N: len(x)}
}

// TableRow is one line of the scale table: a construction's layer role on
// one axis.
type TableRow struct {
	Construction, Role string
	Axis               string // "x" or "y"
	Layers             []string
	Lots               int
	LastLot, LastDate  string
	// Movement is the estimated material movement of the next lot (strain),
	// Setting the artwork scale that cancels it (registration.Setting), SE
	// the standard error of both (the setting's derivative is −1/(1+m)², one
	// to within 1e-3 for any real movement).
	Movement, Setting, SE float64
	// LotSigma is the lot-to-lot standard deviation of the lot means
	// (MR̄/d₂); WithinSD the pooled panel-to-panel standard deviation within
	// a lot.
	LotSigma, WithinSD float64
	// Signals are the signals among the last ShiftWindow lots of a chart of
	// the last ShiftBaseline lots: the process has shifted, and the estimate
	// may still lag. SignalLots names the lot of each.
	Signals    []Signal
	SignalLots []string
}

// Shifted reports whether the chart shows a shift in the latest lots.
func (r *TableRow) Shifted() bool { return len(r.Signals) > 0 }

// Table returns the scale table of every series in s: two rows (x, y) per
// series.
func Table(series []Series) []TableRow {
	var out []TableRow
	for i := range series {
		s := &series[i]
		if len(s.Points) == 0 {
			continue
		}
		last := s.Points[len(s.Points)-1]
		for _, ax := range []struct {
			name string
			k    registration.TermKind
		}{{"x", registration.ScaleX}, {"y", registration.ScaleY}} {
			x := s.Values(ax.k)
			tr := NewTrend(s, ax.k)
			sigma := tr.Chart.Sigma
			if math.IsNaN(sigma) {
				sigma = 0
			}
			est := EWMAEstimate(x, sigma, ControllerLambda)
			row := TableRow{
				Construction: s.Construction, Role: s.Role, Axis: ax.name, Layers: slices.Clone(s.Layers),
				Lots: len(x), LastLot: last.Lot, LastDate: last.Date,
				Movement: est.Movement, Setting: registration.Setting(est.Movement), SE: est.SE,
				LotSigma: tr.Chart.Sigma, WithinSD: pooledWithin(s, ax.k),
			}
			if len(x) < 2 {
				row.SE = math.NaN()
			}
			off := max(0, len(x)-ShiftBaseline)
			recent := Series{Points: s.Points[off:]}
			for _, sg := range NewTrend(&recent, ax.k).Signals {
				if i := sg.Index + off; i >= len(x)-ShiftWindow {
					row.Signals = append(row.Signals, Signal{i, sg.Rule})
					row.SignalLots = append(row.SignalLots, s.Points[i].Lot)
				}
			}
			out = append(out, row)
		}
	}
	return out
}

// pooledWithin is the pooled within-lot standard deviation of term k:
// √(Σ(nᵢ−1)sᵢ² / Σ(nᵢ−1)).
func pooledWithin(s *Series, k registration.TermKind) float64 {
	var ss, dof float64
	for _, p := range s.Points {
		if p.N > 1 {
			ss += float64(p.N-1) * p.SD[k] * p.SD[k]
			dof += float64(p.N - 1)
		}
	}
	if dof == 0 {
		return 0
	}
	return math.Sqrt(ss / dof)
}

// Trend is the control chart of one term of one series.
type Trend struct {
	Series  *Series
	Term    registration.TermKind
	Values  []float64 // lot means
	Chart   Individuals
	EWMA    EWMA
	Signals []Signal // Western Electric rules and the EWMA beyond its limits, by index
}

// NewTrend charts term k of s: an individuals chart of the lot means with
// limits from the average moving range, the EWMA chart about the same
// centre and σ̂ (ChartLambda, ChartL), and the Western Electric signals.
func NewTrend(s *Series, k registration.TermKind) Trend {
	x := s.Values(k)
	t := Trend{Series: s, Term: k, Values: x, Chart: NewIndividuals(x)}
	t.EWMA = NewEWMA(x, t.Chart.Centre, t.Chart.Sigma, ChartLambda, ChartL)
	t.Signals = WesternElectric(x, t.Chart.Centre, t.Chart.Sigma)
	var all []Signal
	j := 0
	for i := range x {
		for j < len(t.Signals) && t.Signals[j].Index == i {
			all = append(all, t.Signals[j])
			j++
		}
		if t.EWMA.Out(i) {
			all = append(all, Signal{i, EWMAOut})
		}
	}
	t.Signals = all
	return t
}
