package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"time"

	"golang.org/x/term"

	"phipsi/cmd/internal/render"
	"phipsi/cmd/internal/report"
	"phipsi/cmd/internal/scenario"
	"phipsi/internal/pages"
	"phipsi/mesh"
	"phipsi/solver"
	"phipsi/solver/flow"
)

// runOptions are the flags of run and check.
type runOptions struct {
	out       string
	spacing   float64
	method    string
	tolerance float64
	quiet     bool
	json      bool
	maxMemory byteSize
	withError bool // run: grid-error bands from two extra, coarser solves
}

// load reads the scenario, applies the overrides and plans the grid within the memory bound.
func load(path string, o *runOptions) (*scenario.Plan, error) {
	sc, err := scenario.Load(path)
	if err != nil {
		return nil, err
	}
	if o.method != "" {
		if !slices.Contains(scenario.Methods(), o.method) {
			return nil, &usageError{fmt.Sprintf("--method: must be one of %s, got %q", strings.Join(scenario.Methods(), ", "), o.method)}
		}
		sc.Solver.Method = o.method
	}
	if o.tolerance != 0 {
		if !(o.tolerance > 0 && o.tolerance < scenario.MaxTolerance) {
			return nil, &usageError{fmt.Sprintf("--tolerance: must be in (0, %g), got %g", scenario.MaxTolerance, o.tolerance)}
		}
		sc.Solver.Tolerance = o.tolerance
	}
	if o.spacing < 0 {
		return nil, &usageError{fmt.Sprintf("--spacing: must be > 0, got %g", o.spacing)}
	}
	plan, err := sc.Plan(o.spacing)
	if err != nil {
		return nil, err
	}
	if plan.Memory > int64(o.maxMemory) {
		key := "grid.spacing"
		if sc.Grid.CellsAcross > 0 && o.spacing == 0 {
			key = "grid.cells_across"
		}
		return nil, sc.Errorf(key, "a %d × %d grid needs an estimated %s, more than the limit of %s (--max-memory): use a coarser grid",
			plan.Grid.NX, plan.Grid.NY, formatBytes(plan.Memory), formatBytes(int64(o.maxMemory)))
	}
	return plan, nil
}

func checkCmd(args []string, stdout, stderr io.Writer) error {
	o := &runOptions{maxMemory: byteSize(defaultMaxMemory())}
	fs := newFlags("check", "phipsi check SCENARIO.toml [--spacing H] [--max-memory SIZE]", stdout)
	fs.Float64Var(&o.spacing, "spacing", 0, "grid spacing in metres, overriding the scenario's")
	fs.Var(&o.maxMemory, "max-memory", "refuse a grid whose estimated memory exceeds this (default: half of physical memory)")
	path, err := parse(fs, args)
	if err != nil {
		return err
	}
	plan, err := load(path, o)
	if err != nil {
		return err
	}
	g := plan.Grid
	fmt.Fprintf(stdout, "%s: valid\n", path)
	fmt.Fprintf(stdout, "  grid    %d × %d nodes (%d cells), spacing %.6g m\n", g.NX, g.NY, g.Cells(), g.H)
	fmt.Fprintf(stdout, "  bodies  %d, probes %d\n", len(plan.Geom.Bodies), len(plan.Scenario.Probes))
	fmt.Fprintf(stdout, "  memory  about %s (limit %s)\n", formatBytes(plan.Memory), formatBytes(int64(o.maxMemory)))
	return nil
}

func runCmd(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	o := &runOptions{maxMemory: byteSize(defaultMaxMemory())}
	fs := newFlags("run", "phipsi run SCENARIO.toml [flags]", stdout)
	fs.StringVar(&o.out, "out", "", "output folder (default ./<name>-out)")
	fs.Float64Var(&o.spacing, "spacing", 0, "grid spacing in metres, overriding the scenario's")
	fs.StringVar(&o.method, "method", "", "linear solver: auto, mgcg, cg or sor (default: the scenario's)")
	fs.Float64Var(&o.tolerance, "tolerance", 0, "relative residual to stop at (default: the scenario's)")
	fs.BoolVar(&o.withError, "with-error", false, "also solve on grids 2 and 4 times coarser and put grid-error bands (±) beside the key numbers")
	fs.BoolVar(&o.quiet, "quiet", false, "no progress line and no console report")
	fs.BoolVar(&o.json, "json", false, "print summary.json to stdout instead of the console report")
	fs.Var(&o.maxMemory, "max-memory", "refuse a grid whose estimated memory exceeds this (default: half of physical memory)")
	path, err := parse(fs, args)
	if err != nil {
		return err
	}
	start := time.Now()
	plan, err := load(path, o)
	if err != nil {
		return err
	}
	sc := plan.Scenario
	// The computation runs apart so that an interrupt is answered at once, whatever stage it
	// falls in; it writes no file, so abandoning it leaves nothing behind. The solvers also watch
	// ctx and stop within an iteration.
	type outcome struct {
		r   *computed
		err error
	}
	done := make(chan outcome, 1)
	go func() {
		r, err := compute(ctx, plan, o, stderr)
		done <- outcome{r, err}
	}()
	var c *computed
	select {
	case <-ctx.Done():
		return ctx.Err()
	case oc := <-done:
		if oc.err != nil {
			if ctx.Err() != nil {
				return ctx.Err()
			}
			return oc.err
		}
		c = oc.r
	}
	c.sum.Solve.TotalSeconds = time.Since(start).Seconds()
	out := o.out
	if out == "" {
		out = sc.Name + "-out"
	}
	if err := writeOutputs(ctx, out, sc, c); err != nil {
		return err
	}
	switch {
	case o.json:
		return report.WriteJSON(stdout, c.sum)
	case o.quiet:
		return nil
	}
	return report.WriteConsole(stdout, c.sum, out)
}

// computed is everything a run produces before any file is written.
type computed struct {
	res    *flow.Result
	phi    []float64
	sum    *report.Summary
	images []render.Image
}

// compute solves the planned scenario and derives every number and picture of the run.
func compute(ctx context.Context, plan *scenario.Plan, o *runOptions, stderr io.Writer) (*computed, error) {
	// The collector works to the run's memory estimate (the figure `check` prints and
	// --max-memory guards) instead of to a multiple of the live data. On these machines a page
	// costs far more to map the first time (about 0.35 GB/s) than to write again (20 GB/s), and
	// under proportional pacing (GOGC) the runtime hands the pages a stage has freed back to the
	// system, so the next stage maps them afresh. With the pacing off and the estimate as the
	// limit the heap keeps its pages: collections run at the stage boundaries below, or when the
	// heap reaches the estimate. Measured against GOGC = 25 (6 × 1 channel, medians of 3
	// interleaved runs, page faults from /usr/bin/time): 1M cells 1.29 → 1.22 s, 49k → 39k
	// faults, peak 142 → 159 MB; 4M cells 4.48 → 4.13 s, 164k → 130k faults, peak 511 → 527 MB.
	// Between the solver stages' collections the limit is lifted to --max-memory (pages.Collect
	// tells why: the scavenger would otherwise hand back what the next stage reuses), and set
	// back to the estimate before the pictures (pages.Settle). A GOGC or GOMEMLIMIT set in the
	// environment wins.
	if os.Getenv("GOGC") == "" && os.Getenv("GOMEMLIMIT") == "" {
		defer pages.SetBudget(plan.Memory, int64(o.maxMemory))()
	}
	sc := plan.Scenario
	m, set, err := plan.Build()
	if err != nil {
		return nil, err
	}
	sys, err := solver.AssemblePsi(m, set)
	if err != nil {
		return nil, err
	}
	settings := &solver.Settings{Tolerance: sc.Solver.Tolerance, MaxIterations: sc.Solver.MaxIterations}
	prog := newProgress(stderr, o.quiet)
	settings.Progress = prog.update
	sol, err := solver.SolvePsi(ctx, sys, sc.Solver.Method, settings)
	prog.done()
	if err != nil {
		return nil, err
	}
	// Each stage's matrices and work vectors are dropped and collected before the next stage
	// allocates, so that it reuses their pages: on these machines fresh memory costs more to touch
	// than most stages take to compute (about 0.35 GB/s against 20 GB/s for memory already mapped).
	sys.Release()
	pages.Collect()
	phiSys, err := solver.AssemblePhi(m, set, sol.Circulation, nil)
	if err != nil {
		return nil, err
	}
	prog.stage = "velocity potential"
	phiSol, err := solver.SolvePhi(ctx, phiSys, sc.Solver.Method, settings)
	prog.done()
	if err != nil {
		return nil, err
	}
	phiSys.Release()
	pages.Collect()
	res, err := flow.Derive(sol, flow.Fluid{Density: sc.Fluid.Density, Pressure: sc.Inflow.Pressure})
	if err != nil {
		return nil, err
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	mismatch, err := flow.MismatchAt(res, phiSol)
	if err != nil {
		return nil, err
	}
	var probes []flow.ProbeValue
	for _, p := range sc.Probes {
		v, err := res.Probe(p.Name, mesh.Point{X: p.At[0], Y: p.At[1]})
		if err != nil {
			return nil, err
		}
		probes = append(probes, v)
	}
	sum, err := report.NewSummary(report.Input{Version: version, Scenario: sc, Method: methodName(sc.Solver.Method),
		Result: res, Phi: phiSol, Mismatch: &mismatch, Probes: probes})
	if err != nil {
		return nil, err
	}
	if o.withError {
		if err := addErrorBands(ctx, sum, plan, res, probes, stderr, o.quiet); err != nil {
			return nil, err
		}
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	pages.Settle()
	images, err := render.Render(res, phiSol.Phi, render.Options{Width: sc.Output.ImageWidth, Title: sc.Title, Images: sc.Output.Images})
	if err != nil {
		return nil, err
	}
	return &computed{res: res, phi: phiSol.Phi, sum: sum, images: images}, nil
}

// methodName says what a scenario's method name means for the ψ problem.
func methodName(m string) string {
	switch m {
	case solver.MethodSOR:
		return "sor (red–black SOR)"
	case solver.MethodMG:
		return "mgcg (multigrid-preconditioned BiCGStab)"
	}
	if m == solver.MethodKrylov {
		return "cg (BiCGStab, Jacobi-preconditioned)"
	}
	return m + " (BiCGStab, multigrid-preconditioned)"
}

// writeOutputs writes every output file atomically into dir.
func writeOutputs(ctx context.Context, dir string, sc *scenario.Scenario, c *computed) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("output folder: %w", err)
	}
	type file struct {
		name  string
		write func(io.Writer) error
	}
	files := []file{{"summary.json", func(w io.Writer) error { return report.WriteJSON(w, c.sum) }}}
	for i := range c.res.Surfaces {
		s := &c.res.Surfaces[i]
		name := "surface-" + s.Name + ".csv"
		if s.Boundary < 2 {
			name = "wall-" + s.Name + ".csv"
		}
		files = append(files, file{name, func(w io.Writer) error { return report.WriteSurfaceCSV(w, s) }})
	}
	for _, im := range c.images {
		files = append(files, file{im.Name + ".png", func(w io.Writer) error { _, err := w.Write(im.PNG); return err }})
	}
	figs := make([]report.Figure, len(c.images))
	for i, im := range c.images {
		figs[i] = report.Figure(im)
	}
	files = append(files, file{"report.html", func(w io.Writer) error {
		return report.WriteHTML(w, report.HTMLInput{Summary: c.sum, Scenario: sc, Geometry: c.res.Sol.Sys.Mesh.Geom, Figures: figs})
	}})
	if sc.Output.FieldCSV {
		files = append(files, file{"field.csv", func(w io.Writer) error { return report.WriteFieldCSV(w, c.res, c.phi) }})
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

// writeAtomic writes a file under a temporary name in the same folder and renames it into place,
// so a reader never sees a half-written file and an interruption leaves none behind.
func writeAtomic(path string, write func(io.Writer) error) (err error) {
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	defer func() {
		if err != nil {
			tmp.Close()
			os.Remove(tmp.Name())
		}
	}()
	if err = write(tmp); err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err = tmp.Chmod(0o644); err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err = tmp.Close(); err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err = os.Rename(tmp.Name(), path); err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	return nil
}

// progress prints one updating line on a terminal during long solves.
type progress struct {
	stage  string
	w      io.Writer
	on     bool
	last   time.Time
	solve  int
	prevIt int
	shown  bool
}

func newProgress(w io.Writer, quiet bool) *progress {
	p := &progress{w: w, stage: "stream function"}
	if f, ok := w.(*os.File); ok && !quiet && term.IsTerminal(int(f.Fd())) {
		p.on = true
	}
	return p
}

func (p *progress) update(iter int, residual float64) {
	if !p.on {
		return
	}
	if iter < p.prevIt {
		p.solve++
	}
	p.prevIt = iter
	if now := time.Now(); now.Sub(p.last) > 200*time.Millisecond {
		p.last = now
		fmt.Fprintf(p.w, "\r%s, solve %d: iteration %d, residual %.2e   ", p.stage, p.solve+1, iter, residual)
		p.shown = true
	}
}

func (p *progress) done() {
	if p.shown {
		fmt.Fprint(p.w, "\r\033[K")
	}
}
