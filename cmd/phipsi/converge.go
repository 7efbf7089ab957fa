package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"time"

	"phipsi/cmd/internal/render"
	"phipsi/cmd/internal/report"
	"phipsi/cmd/internal/scenario"
	"phipsi/internal/pages"
	"phipsi/mesh"
	"phipsi/solver"
	"phipsi/solver/flow"
)

// Limits of a convergence study.
const (
	defaultLevels = 3
	maxLevels     = 8
	defaultRatio  = 2.0
	// minRatio is the smallest refinement ratio accepted. Celik et al. (2008) ask for r > 1.3
	// so that the discretisation error stands out from other errors; below it a warning says so.
	minRatio       = 1.1
	advisedRatio   = 1.3
	maxRatio       = 4.0
	minCoarseCells = 8 // cells across a body on the coarsest grid below which a warning is given
	// noiseLevel is the size, relative to each quantity's natural scale, below which a change
	// between grids counts as solver round-off rather than grid error (solves stop at relative
	// residuals near 1e-10).
	noiseLevel = 1e-8
	// formalOrder is the order of accuracy of the discretisation (Shortley–Weller ψ and the
	// surface fits are second order): bands use no larger an order than this.
	formalOrder = 2.0
)

// convergeOptions are the flags of converge.
type convergeOptions struct {
	runOptions
	levels int
	ratio  float64
}

func convergeCmd(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	o := &convergeOptions{runOptions: runOptions{maxMemory: byteSize(defaultMaxMemory())}}
	fs := newFlags("converge", "phipsi converge SCENARIO.toml [--levels N] [--ratio R] [flags]", stdout)
	fs.IntVar(&o.levels, "levels", defaultLevels, "number of grids: the finest spacing h, then r·h, r²·h, … (2 to 8)")
	fs.Float64Var(&o.ratio, "ratio", defaultRatio, "refinement ratio r between successive grids (1.1 to 4; 1.3 or more advised)")
	fs.StringVar(&o.out, "out", "", "output folder (default ./<name>-out)")
	fs.Float64Var(&o.spacing, "spacing", 0, "finest grid spacing in metres, overriding the scenario's")
	fs.StringVar(&o.method, "method", "", "linear solver: auto, mgcg, cg or sor (default: the scenario's)")
	fs.Float64Var(&o.tolerance, "tolerance", 0, "relative residual to stop at (default: the scenario's)")
	fs.BoolVar(&o.quiet, "quiet", false, "no progress lines and no table")
	fs.BoolVar(&o.json, "json", false, "print convergence.json to stdout instead of the table")
	fs.Var(&o.maxMemory, "max-memory", "refuse a finest grid whose estimated memory exceeds this (default: half of physical memory)")
	path, err := parse(fs, args)
	if err != nil {
		return err
	}
	if o.levels < 2 || o.levels > maxLevels {
		return &usageError{fmt.Sprintf("--levels: must be from 2 to %d, got %d", maxLevels, o.levels)}
	}
	if !(o.ratio >= minRatio && o.ratio <= maxRatio) {
		return &usageError{fmt.Sprintf("--ratio: must be from %g to %g, got %g", minRatio, maxRatio, o.ratio)}
	}
	plan, err := load(path, &o.runOptions)
	if err != nil {
		return err
	}
	prog := newProgress(stderr, o.quiet)
	c, err := studyGrids(ctx, plan, nil, o.levels, o.ratio, prog)
	if err != nil {
		return err
	}
	if o.ratio < advisedRatio {
		c.Warnings = append(c.Warnings, fmt.Sprintf("refinement ratio %g is below %g, the least Celik et al. (2008) advise: the differences between grids may be swamped by other errors", o.ratio, advisedRatio))
	}
	out := o.out
	if out == "" {
		out = plan.Scenario.Name + "-out"
	}
	if err := writeConvergence(ctx, out, plan.Scenario, c); err != nil {
		return err
	}
	switch {
	case o.json:
		return report.WriteConvergenceJSON(stdout, c)
	case o.quiet:
		return nil
	}
	return report.WriteConvergenceConsole(stdout, c, out)
}

// writeConvergence writes convergence.json, convergence.csv and convergence.png atomically
// into dir.
func writeConvergence(ctx context.Context, dir string, sc *scenario.Scenario, c *report.Convergence) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("output folder: %w", err)
	}
	series := make([]render.ConvergenceSeries, len(c.Quantities))
	for i, q := range c.Quantities {
		series[i] = render.ConvergenceSeries{Name: q.Name, Unit: q.Unit, Spacings: c.Spacings, Values: q.Values, Study: c.Studies[i]}
	}
	png, err := render.ConvergenceChart(series, render.Options{Width: sc.Output.ImageWidth, Title: sc.Title})
	if err != nil {
		return err
	}
	files := []struct {
		name  string
		write func(io.Writer) error
	}{
		{"convergence.json", func(w io.Writer) error { return report.WriteConvergenceJSON(w, c) }},
		{"convergence.csv", func(w io.Writer) error { return report.WriteConvergenceCSV(w, c) }},
		{"convergence.png", func(w io.Writer) error { _, err := w.Write(png); return err }},
	}
	for _, f := range files {
		if err := ctx.Err(); err != nil {
			return err
		}
		if err := writeAtomic(filepath.Join(dir, f.name), f.write); err != nil {
			return err
		}
	}
	return nil
}

// solvedGrid is one solved grid of a study.
type solvedGrid struct {
	res        *flow.Result
	probes     []flow.ProbeValue
	iterations int
	elapsed    time.Duration
}

// solveGrid solves the stream function on plan's grid and derives the flow and the probes, as
// run does (the velocity potential is not needed for the key numbers).
func solveGrid(ctx context.Context, plan *scenario.Plan, prog *progress) (*solvedGrid, error) {
	start := time.Now()
	sc := plan.Scenario
	m, set, err := plan.Build()
	if err != nil {
		return nil, err
	}
	sys, err := solver.AssemblePsi(m, set)
	if err != nil {
		return nil, err
	}
	settings := &solver.Settings{Tolerance: sc.Solver.Tolerance, MaxIterations: sc.Solver.MaxIterations, Progress: prog.update}
	sol, err := solver.SolvePsi(ctx, sys, sc.Solver.Method, settings)
	prog.done()
	if err != nil {
		return nil, err
	}
	sys.Release() // the next grid's stages reuse the matrix's pages
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	res, err := flow.Derive(sol, flow.Fluid{Density: sc.Fluid.Density, Pressure: sc.Inflow.Pressure})
	if err != nil {
		return nil, err
	}
	probes, err := probeValues(res, sc)
	if err != nil {
		return nil, err
	}
	g := &solvedGrid{res: res, probes: probes, elapsed: time.Since(start)}
	for _, st := range sol.Solves {
		g.iterations += st.Iterations
	}
	return g, nil
}

// probeValues evaluates the scenario's probes.
func probeValues(res *flow.Result, sc *scenario.Scenario) ([]flow.ProbeValue, error) {
	var out []flow.ProbeValue
	for _, p := range sc.Probes {
		v, err := res.Probe(p.Name, mesh.Point{X: p.At[0], Y: p.At[1]})
		if err != nil {
			return nil, err
		}
		out = append(out, v)
	}
	return out, nil
}

// keyNumber is one key number of a solved grid.
type keyNumber struct {
	name, unit string
	value      float64
	scale      float64 // natural size of the quantity, for the round-off level
}

// keyNumbers returns the key numbers of a solved grid in a fixed order: per body its peak
// speed, lowest Cp, circulation and lift (the pressure force across the stream, per span); per
// wall its lowest Cp; per probe its speed and Cp.
func keyNumbers(g *solvedGrid) []keyNumber {
	r := g.res
	geo := r.Sol.Sys.Mesh.Geom
	height := geo.Upper.Y(0) - geo.Lower.Y(0)
	u := r.Speed
	var out []keyNumber
	for k := range geo.Bodies {
		b := r.Body(k)
		out = append(out,
			keyNumber{b.Name + ".max_speed", "m/s", b.MaxSpeed.Value, u},
			keyNumber{b.Name + ".min_cp", "", b.MinCp.Value, 1},
			keyNumber{b.Name + ".circulation", "m²/s", b.Circulation, u * height},
			keyNumber{b.Name + ".lift", "N/m", b.Force[1], r.Q2() * height})
	}
	for _, id := range []int{mesh.LowerWall, mesh.UpperWall} {
		w := r.Wall(id)
		out = append(out, keyNumber{w.Name + ".min_cp", "", w.MinCp.Value, 1})
	}
	for _, p := range g.probes {
		out = append(out,
			keyNumber{"probe." + p.Name + ".speed", "m/s", p.Speed, u},
			keyNumber{"probe." + p.Name + ".cp", "", p.Cp, 1})
	}
	return out
}

// studyGrids solves plan's scenario on levels grids of spacing h, r·h, r²·h, … (h that of plan,
// the finest) and estimates the grid error of every key number. finest, when not nil, is plan's
// grid already solved. Coarse grids are solved first, so a scenario too coarse to study fails
// fast, and only their key numbers are kept.
func studyGrids(ctx context.Context, plan *scenario.Plan, finest *solvedGrid, levels int, ratio float64, prog *progress) (*report.Convergence, error) {
	sc := plan.Scenario
	h0 := plan.Grid.H
	c := &report.Convergence{Name: sc.Name, Title: sc.Title, Version: version, Ratio: ratio, Method: report.GCIMethod,
		Spacings: make([]float64, levels), Grids: make([]report.ConvergenceGrid, levels), Warnings: []string{}, Caution: report.Caution}
	values := make([][]keyNumber, levels)
	for lv := levels - 1; lv >= 0; lv-- {
		p := plan
		if lv > 0 {
			var err error
			if p, err = sc.Plan(h0 * math.Pow(ratio, float64(lv))); err != nil {
				return nil, fmt.Errorf("grid %d of %d (%g × the finest spacing): %w", lv+1, levels, math.Pow(ratio, float64(lv)), err)
			}
		}
		g := finest
		if lv > 0 || g == nil {
			if prog.on {
				fmt.Fprintf(prog.w, "grid %d of %d: spacing %.4g m, %d × %d nodes\n", lv+1, levels, p.Grid.H, p.Grid.NX, p.Grid.NY)
			}
			// The grid solved before this one is garbage by now but its numbers: collected,
			// its pages serve this one.
			pages.Collect()
			var err error
			if g, err = solveGrid(ctx, p, prog); err != nil {
				return nil, fmt.Errorf("grid %d of %d (spacing %.4g m): %w", lv+1, levels, p.Grid.H, err)
			}
		}
		values[lv] = keyNumbers(g)
		c.Spacings[lv] = p.Grid.H
		c.Grids[lv] = report.ConvergenceGrid{Spacing: p.Grid.H, NX: p.Grid.NX, NY: p.Grid.NY,
			Unknowns: len(g.res.Sol.Sys.Nodes), Iterations: g.iterations, Seconds: g.elapsed.Seconds()}
		if lv == levels-1 {
			for k := range p.Geom.Bodies {
				if b := g.res.Body(k); b.CellsAcross < minCoarseCells*(1-1e-9) {
					c.Warnings = append(c.Warnings, fmt.Sprintf("obstacle %q spans only %.1f cells on the coarsest grid (fewer than %d): its values there may lie outside the asymptotic range; use fewer levels or a finer spacing", b.Name, b.CellsAcross, minCoarseCells))
				}
			}
		}
	}
	for lv := 1; lv < levels; lv++ {
		if !(c.Spacings[lv] > c.Spacings[lv-1]) {
			return nil, &usageError{fmt.Sprintf("--ratio: grids %d and %d come out with the same spacing %.6g m; use a larger ratio", lv, lv+1, c.Spacings[lv])}
		}
	}
	for i, kn := range values[0] {
		f := make([]float64, levels)
		for lv := range levels {
			f[lv] = values[lv][i].value
		}
		st := solver.GCI(c.Spacings, f, &solver.GCISettings{Noise: noiseLevel * kn.scale, FormalOrder: formalOrder})
		c.Quantities = append(c.Quantities, report.NewQuantityStudy(kn.name, kn.unit, f, st))
		c.Studies = append(c.Studies, st)
	}
	return c, nil
}

// addErrorBands puts grid-error bands beside a run's key numbers (run --with-error): it solves
// the scenario on two grids 2 and 4 times coarser than the run's, whose solved grid is res with
// the probe values probes, and studies the three. When a coarse grid cannot be built or solved,
// the run keeps its results and says in a warning why it has no bands; only an interruption is
// an error.
func addErrorBands(ctx context.Context, sum *report.Summary, plan *scenario.Plan, res *flow.Result, probes []flow.ProbeValue, stderr io.Writer, quiet bool) error {
	prog := newProgress(stderr, quiet)
	fine := &solvedGrid{res: res, probes: probes, elapsed: res.Sol.Setup + res.Sol.Solve}
	for _, st := range res.Sol.Solves {
		fine.iterations += st.Iterations
	}
	c, err := studyGrids(ctx, plan, fine, 3, defaultRatio, prog)
	if err != nil {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		sum.Warnings = append(sum.Warnings, fmt.Sprintf("no grid-error bands (--with-error): %v", err))
		return nil
	}
	sum.ErrorBands = &report.ErrorBands{Ratio: c.Ratio, Spacings: c.Spacings, Quantities: c.Quantities}
	sum.Warnings = append(sum.Warnings, c.Warnings...)
	return nil
}
