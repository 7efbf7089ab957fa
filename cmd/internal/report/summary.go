package report

import (
	"fmt"
	"math"
	"slices"
	"time"

	"phipsi/cmd/internal/scenario"
	"phipsi/mesh"
	"phipsi/solver"
	"phipsi/solver/flow"
)

// Caution is the warning every report carries.
const Caution = "Ideal (potential) flow: no viscosity, boundary layers, separation, wakes, free-surface " +
	"or cavitation damage are modelled, and a closed body feels no drag. Treat these numbers as a " +
	"screening aid; defer to local codes, validated analysis, model tests and licensed engineers " +
	"wherever people or property are at risk."

// Summary is the content of summary.json. Its keys are a contract: add, never rename.
type Summary struct {
	Name       string          `json:"name"`
	Title      string          `json:"title"`
	Version    string          `json:"version"`
	Inputs     InputInfo       `json:"inputs"`
	Grid       GridInfo        `json:"grid"`
	Solve      SolveInfo       `json:"solve"`
	Flow       FlowInfo        `json:"flow"`
	Obstacles  []ObstacleInfo  `json:"obstacles"`
	Walls      []WallInfo      `json:"walls"`
	Probes     []ProbeInfo     `json:"probes"`
	Blockage   *BlockageInfo   `json:"blockage,omitempty"`
	Cavitation *CavitationInfo `json:"cavitation,omitempty"`
	Warnings   []string        `json:"warnings"`
	Caution    string          `json:"caution"`
	// ErrorBands, with run --with-error, are grid-error bands of the key numbers.
	ErrorBands *ErrorBands `json:"error_bands,omitempty"`
}

// ErrorBands are grid-error bands of a run's key numbers (run --with-error): the run's grid and
// two coarser ones, studied as phipsi converge does (see GCIMethod). Values[0] of each quantity
// is the number the summary reports; the quantities are named as in convergence.json.
type ErrorBands struct {
	Ratio      float64         `json:"ratio"`
	Spacings   []float64       `json:"spacings"`
	Quantities []QuantityStudy `json:"quantities"`
}

// Find returns the study of the quantity name, or nil.
func (e *ErrorBands) Find(name string) *QuantityStudy {
	for i := range e.Quantities {
		if e.Quantities[i].Name == name {
			return &e.Quantities[i]
		}
	}
	return nil
}

// GridInfo describes the grid.
type GridInfo struct {
	NX       int     `json:"nx"`
	NY       int     `json:"ny"`
	Spacing  float64 `json:"spacing"`
	Unknowns int     `json:"unknowns"`
	Cells    int     `json:"cells"`
}

// InputInfo echoes the scenario's physical and solver settings, so that a summary read on its own
// says what was computed.
type InputInfo struct {
	Density        float64  `json:"density"`         // kg/m³
	InletSpeed     float64  `json:"inlet_speed"`     // m/s, the reference speed U
	InletPressure  float64  `json:"inlet_pressure"`  // Pa
	VapourPressure *float64 `json:"vapour_pressure"` // Pa; null when not given
	SoundSpeed     float64  `json:"sound_speed"`     // m/s, for the Mach check
	Tolerance      float64  `json:"tolerance"`       // relative residual asked of every solve
	MaxIterations  int      `json:"max_iterations"`  // per solve
}

// SolveInfo describes the linear solves.
type SolveInfo struct {
	Method       string  `json:"method"`
	Solves       int     `json:"solves"`
	Iterations   int     `json:"iterations"` // total over all solves
	Residual     float64 `json:"residual"`   // largest final relative residual of any solve
	Seconds      float64 `json:"seconds"`
	SetupSeconds float64 `json:"setup_seconds"`
	// PhiIterations is the velocity-potential solve's share of Iterations.
	PhiIterations int `json:"phi_iterations"`
	// TotalSeconds is the whole run before the files are written, wall clock.
	TotalSeconds float64 `json:"total_seconds"`
	// AtFloor is true when a solve ended above the tolerance on the rounding floor of its
	// residual (solver.Stats.Floor) and every other solve reached the tolerance.
	AtFloor bool `json:"at_rounding_floor"`
}

// FlowInfo holds the channel-wide numbers.
type FlowInfo struct {
	Rate            float64  `json:"rate"`
	InletSpeed      float64  `json:"inlet_speed"`
	OutletSpeed     float64  `json:"outlet_speed"`
	DynamicPressure float64  `json:"dynamic_pressure"`
	PhiPsiMismatch  *float64 `json:"phi_psi_mismatch"`
	MaxSpeed        float64  `json:"max_speed"`
	MaxSpeedAt      Point    `json:"max_speed_at"`
	MaxMach         float64  `json:"max_mach"`
}

// Point is an [x, y] pair in metres.
type Point [2]float64

func pt(p mesh.Point) Point { return Point{p.X, p.Y} }

// ObstacleInfo holds one body's numbers.
type ObstacleInfo struct {
	Name               string       `json:"name"`
	Psi                float64      `json:"psi"`
	Circulation        float64      `json:"circulation"`
	MaxSpeed           float64      `json:"max_speed"`
	MaxSpeedAt         Point        `json:"max_speed_at"`
	MinCp              float64      `json:"min_cp"`
	MinCpAt            Point        `json:"min_cp_at"`
	Force              Point        `json:"force"`
	LiftKuttaJoukowski float64      `json:"lift_kutta_joukowski"`
	StagnationPoints   []Point      `json:"stagnation_points"`
	CellsAcross        float64      `json:"cells_across"`
	Kutta              bool         `json:"kutta"`
	TrailingEdge       *Point       `json:"trailing_edge"`
	Blockage           BlockageInfo `json:"blockage"`
	// GapToWall and GapToBody are the narrowest gaps, m (null when there is no other body).
	GapToWall *float64 `json:"gap_to_wall"`
	GapToBody *float64 `json:"gap_to_body"`
}

// BlockageInfo is how much of the section a body (or all bodies) fills; see flow.Blockage.
type BlockageInfo struct {
	X                  float64  `json:"x"`
	Frontal            float64  `json:"frontal"`
	Height             float64  `json:"height"`
	Ratio              float64  `json:"ratio"`
	ClassicalIncrement *float64 `json:"classical_increment"`
	WallIncrement      float64  `json:"wall_increment"`
}

// StretchInfo is an x-range of a wall where the pressure rises downstream.
type StretchInfo struct {
	X0          float64 `json:"x0"`
	X1          float64 `json:"x1"`
	CpRise      float64 `json:"cp_rise"`
	MaxGradient float64 `json:"max_gradient"`
}

// WallInfo holds one wall's numbers.
type WallInfo struct {
	Name                 string  `json:"name"`
	MinCp                float64 `json:"min_cp"`
	MinCpAt              Point   `json:"min_cp_at"`
	MaxCp                float64 `json:"max_cp"`
	MaxCpAt              Point   `json:"max_cp_at"`
	MaxAdverseGradient   float64 `json:"max_adverse_gradient"`
	MaxAdverseGradientAt Point   `json:"max_adverse_gradient_at"`
	// AdverseStretches lists where dCp/d(x/H) exceeds AdverseThreshold.
	AdverseStretches []StretchInfo `json:"adverse_stretches"`
	AdverseThreshold float64       `json:"adverse_threshold"`
}

// ProbeInfo holds the flow at one probe.
type ProbeInfo struct {
	Name     string  `json:"name"`
	At       Point   `json:"at"`
	U        float64 `json:"u"`
	V        float64 `json:"v"`
	Speed    float64 `json:"speed"`
	Pressure float64 `json:"pressure"`
	Cp       float64 `json:"cp"`
	// DeltaP is p_in − p at the probe, Pa, and K the calibration factor DeltaP/(½ρV²) that sets
	// the speed at the probe from a measured pressure drop.
	DeltaP float64  `json:"delta_p"`
	K      *float64 `json:"k"`
}

// CavitationInfo is the cavitation check.
type CavitationInfo struct {
	Sigma   float64 `json:"sigma"`
	MinCp   float64 `json:"min_cp"`
	MinCpAt Point   `json:"min_cp_at"`
	MinCpOn string  `json:"min_cp_on"`
	Margin  float64 `json:"margin"`
}

// Input is what a summary is made from.
type Input struct {
	Version  string
	Scenario *scenario.Scenario
	Method   string
	Result   *flow.Result
	Probes   []flow.ProbeValue
	Phi      *solver.PhiSolution
	Mismatch *flow.WorstMismatch // the φ/ψ cross-check; nil when φ was not solved
	Elapsed  time.Duration
}

// NewSummary gathers the numbers of a run and the warnings they call for.
func NewSummary(in Input) (*Summary, error) {
	r := in.Result
	sol := r.Sol
	sys := sol.Sys
	m := sys.Mesh
	sc := in.Scenario
	s := &Summary{Name: sc.Name, Title: sc.Title, Version: in.Version, Caution: Caution,
		Obstacles: []ObstacleInfo{}, Walls: []WallInfo{}, Probes: []ProbeInfo{}, Warnings: []string{}}
	s.Inputs = InputInfo{Density: sc.Fluid.Density, InletSpeed: sc.Inflow.Speed, InletPressure: sc.Inflow.Pressure,
		SoundSpeed: sc.Fluid.SoundSpeed, Tolerance: sc.Solver.Tolerance, MaxIterations: sc.Solver.MaxIterations}
	if sc.Fluid.HasVapourPressure {
		pv := sc.Fluid.VapourPressure
		s.Inputs.VapourPressure = &pv
	}
	s.Grid = GridInfo{NX: m.NX, NY: m.NY, Spacing: m.H, Unknowns: len(sys.Nodes), Cells: m.Cells()}
	s.Solve = SolveInfo{Method: in.Method, Solves: len(sol.Solves), Seconds: sol.Solve.Seconds(), SetupSeconds: sol.Setup.Seconds()}
	for _, st := range sol.Solves {
		s.Solve.Iterations += st.Iterations
		s.Solve.Residual = math.Max(s.Solve.Residual, st.Residual)
	}
	if p := in.Phi; p != nil {
		s.Solve.Solves++
		s.Solve.Iterations += p.Stats.Iterations
		s.Solve.Residual = math.Max(s.Solve.Residual, p.Stats.Residual)
		s.Solve.Seconds += p.Solve.Seconds()
		s.Solve.SetupSeconds += p.Setup.Seconds()
		s.Solve.PhiIterations = p.Stats.Iterations
		if p.Stats.Floor {
			s.warnf("the velocity-potential solve stopped at a relative residual of %.3g, above the tolerance %.3g: that is the rounding floor of double-precision arithmetic on this grid, so φ is as converged as the arithmetic allows (a coarser grid or a larger tolerance avoids this note)",
				p.Stats.Residual, sc.Solver.Tolerance)
		}
	}
	all := slices.Clone(sol.Solves)
	if in.Phi != nil {
		all = append(all, in.Phi.Stats)
	}
	for _, st := range all {
		if st.Residual > sc.Solver.Tolerance {
			if !st.Floor {
				s.Solve.AtFloor = false
				break
			}
			s.Solve.AtFloor = true
		}
	}
	geo := m.Geom
	outH := geo.Upper.Y(geo.Length) - geo.Lower.Y(geo.Length)
	vmax, vat := r.MaxFieldSpeed()
	for i := range r.Surfaces {
		e := r.Surfaces[i].MaxSpeed(r.Surfaces[i].Boundary >= 2)
		if e.Value > vmax {
			vmax, vat = e.Value, e.At
		}
	}
	s.Flow = FlowInfo{Rate: r.Q, InletSpeed: r.Speed, OutletSpeed: r.Q / outH, DynamicPressure: r.Q2(),
		PhiPsiMismatch: mismatchValue(in.Mismatch), MaxSpeed: vmax, MaxSpeedAt: pt(vat), MaxMach: vmax / sc.Fluid.SoundSpeed}
	for k := range geo.Bodies {
		b := r.Body(k)
		info := ObstacleInfo{Name: b.Name, Psi: b.Psi, Circulation: b.Circulation,
			MaxSpeed: b.MaxSpeed.Value, MaxSpeedAt: pt(b.MaxSpeed.At), MinCp: b.MinCp.Value, MinCpAt: pt(b.MinCp.At),
			Force: Point(b.Force), LiftKuttaJoukowski: -r.Fluid.Density * r.Speed * b.Circulation,
			StagnationPoints: []Point{}, CellsAcross: b.CellsAcross}
		for _, p := range b.Stagnation {
			info.StagnationPoints = append(info.StagnationPoints, pt(p))
		}
		if te := sys.BC.TrailingEdges[k]; te.Set {
			info.Kutta = true
			p := pt(te.P)
			info.TrailingEdge = &p
		}
		bl := r.BodyBlockage(k)
		info.Blockage = BlockageInfo{X: bl.X, Frontal: bl.Frontal, Height: bl.Height, Ratio: bl.Ratio,
			ClassicalIncrement: &bl.Classical, WallIncrement: bl.WallIncrement}
		gw, gb := r.Clearance(k, m.H/2)
		info.GapToWall = &gw
		if !math.IsInf(gb, 1) {
			info.GapToBody = &gb
		}
		s.Obstacles = append(s.Obstacles, info)
		if b.CellsAcross < 20 {
			s.warnf("obstacle %q spans only %.1f cells across (fewer than 20): refine the grid before trusting its peak speed", b.Name, b.CellsAcross)
		}
		if gap := math.Min(gw, gb); gap < 4*m.H {
			s.warnf("obstacle %q leaves a gap of %.3g m (%.1f cells, fewer than 4) to a wall or another obstacle: the flow in the gap is under-resolved", b.Name, gap, gap/m.H)
		}
		box := geo.Bodies[k].Shape.Bounds()
		hIn := sys.BC.InletHigh - sys.BC.InletLow
		if up, down := box.Min.X, geo.Length-box.Max.X; math.Min(up, down) < 2*hIn {
			s.warnf("obstacle %q is %.3g m from the inlet and %.3g m from the outlet, closer than two channel heights (%.3g m): the uniform-inflow and parallel-outflow conditions distort its flow", b.Name, up, down, 2*hIn)
		}
	}
	if len(geo.Bodies) > 0 {
		tb := r.TotalBlockage()
		s.Blockage = &BlockageInfo{X: tb.X, Frontal: tb.Frontal, Height: tb.Height, Ratio: tb.Ratio, WallIncrement: tb.WallIncrement}
	}
	for _, id := range []int{mesh.LowerWall, mesh.UpperWall} {
		w := r.Wall(id)
		info := WallInfo{Name: w.Name, MinCp: w.MinCp.Value, MinCpAt: pt(w.MinCp.At),
			MaxCp: w.MaxCp.Value, MaxCpAt: pt(w.MaxCp.At), MaxAdverseGradient: w.MaxAdverseGradient,
			MaxAdverseGradientAt: pt(w.MaxAdverseAt), AdverseStretches: []StretchInfo{}, AdverseThreshold: flow.AdverseThreshold}
		for _, st := range r.AdverseStretches(id) {
			info.AdverseStretches = append(info.AdverseStretches, StretchInfo{X0: st.X0, X1: st.X1, CpRise: st.CpRise, MaxGradient: st.MaxGrad})
			if st.Strong() {
				s.warnf("%s wall: pressure rises by %.0f %% of the local dynamic pressure from x = %.3g to %.3g m (adverse gradient): a real boundary layer may separate there, which ideal flow cannot show", w.Name, 100*st.Recovery, st.X0, st.X1)
			}
		}
		s.Walls = append(s.Walls, info)
	}
	for _, p := range in.Probes {
		info := ProbeInfo{Name: p.Name, At: pt(p.At), U: p.U, V: p.V, Speed: p.Speed, Pressure: p.Pressure, Cp: p.Cp,
			DeltaP: r.Fluid.Pressure - p.Pressure}
		if q := 0.5 * r.Fluid.Density * p.Speed * p.Speed; q > 0 {
			k := info.DeltaP / q
			info.K = &k
		}
		s.Probes = append(s.Probes, info)
	}
	if s.Flow.MaxMach > 0.3 {
		s.warnf("peak speed %.4g m/s is Mach %.2f (above 0.3, speed of sound %g m/s): compressibility is no longer negligible", vmax, s.Flow.MaxMach, sc.Fluid.SoundSpeed)
	}
	if sc.Fluid.HasVapourPressure {
		e, on := r.MinCp()
		sigma := (sc.Inflow.Pressure - sc.Fluid.VapourPressure) / r.Q2()
		s.Cavitation = &CavitationInfo{Sigma: sigma, MinCp: e.Value, MinCpAt: pt(e.At), MinCpOn: on, Margin: sigma + e.Value}
		if s.Cavitation.Margin < 0 {
			s.warnf("cavitation margin σ + Cp_min = %.3g is negative (σ = %.3g, Cp_min = %.3g on %s): ideal flow predicts vapour at the surface", s.Cavitation.Margin, sigma, e.Value, on)
		}
	}
	if w := in.Mismatch; w != nil && w.Value > MismatchWarn {
		s.warnf("the velocities from φ and from ψ differ by %.1f %% of the inlet speed at (%.4g, %.4g) m, near %s: the grid resolves the flow there poorly (sharp edges and tight curves need finer cells); refine the grid before relying on local speeds and pressures near it",
			100*w.Value, w.At.X, w.At.Y, w.Near)
	}
	return s, s.check()
}

// MismatchWarn is the φ/ψ mismatch above which a run warns that its grid resolves part of the
// flow poorly. Smooth bodies at 40 cells across show at most 0.44 % (solver/flow's cross-check
// tests), falling like H²; sharp leading edges two cells out show several per cent.
const MismatchWarn = 0.01

// mismatchValue returns the cross-check's value, or nil without one.
func mismatchValue(w *flow.WorstMismatch) *float64 {
	if w == nil {
		return nil
	}
	v := w.Value
	return &v
}

func (s *Summary) warnf(format string, args ...any) {
	s.Warnings = append(s.Warnings, fmt.Sprintf(format, args...))
}

// check refuses a summary with a NaN or infinite number: such a result is an error, not an output.
func (s *Summary) check() error {
	bad := func(what string, v float64) error {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("result is not finite: %s = %g", what, v)
		}
		return nil
	}
	vals := map[string]float64{"flow.max_speed": s.Flow.MaxSpeed, "solve.residual": s.Solve.Residual}
	for _, o := range s.Obstacles {
		for k, v := range map[string]float64{"psi": o.Psi, "circulation": o.Circulation, "max_speed": o.MaxSpeed,
			"min_cp": o.MinCp, "force.x": o.Force[0], "force.y": o.Force[1]} {
			vals[o.Name+"."+k] = v
		}
	}
	for _, w := range s.Walls {
		vals[w.Name+".min_cp"] = w.MinCp
		vals[w.Name+".max_cp"] = w.MaxCp
	}
	for _, p := range s.Probes {
		vals["probe."+p.Name+".speed"] = p.Speed
	}
	for k, v := range vals {
		if err := bad(k, v); err != nil {
			return err
		}
	}
	return nil
}
