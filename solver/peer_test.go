//go:build peer

package solver

import (
	"bufio"
	"bytes"
	"context"
	"encoding/binary"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"
	"text/tabwriter"
	"time"

	"phipsi/bc"
	"phipsi/mesh"
)

// The peer comparison sets phipsi's solvers beside a widely used sparse direct solver, SciPy's
// spsolve (SuperLU with the minimum-degree ordering of AᵀA + A), run on the
// same systems written in the Matrix Market exchange format (R. F. Boisvert, R. Pozo, K. A.
// Remington, "The Matrix Market exchange formats: initial design", NISTIR 5935, 1996). It also
// sets each phipsi solve beside the memory-bandwidth bound of its own data movement (the byte
// model below ÷ the triad bandwidth of stream_test.go, measured in the same run).
//
// It is a measurement, not a unit test: it takes minutes, needs python3 with SciPy for its
// comparison (and skips that part without it), and is built only with the peer tag:
//
//	go test -tags peer ./solver -run Peer -v
//	go test -tags peer ./solver -run Peer -v -peer.runs 5 -peer.python /usr/bin/python3
//
// It checks that phipsi's solutions agree with SciPy's and that the solver-level work of a
// whole run of a one-body channel of 1M cells takes at most 1/50 of the time SciPy's direct
// solve of a 1M-unknown five-point Laplacian takes. The bandwidth ratios are reported beside
// their target, not checked.

var (
	peerRuns   = flag.Int("peer.runs", 3, "timed repetitions of each measurement (the median is reported)")
	peerPython = flag.String("peer.python", "", "python interpreter with SciPy (default: the first of python3 on $PATH and /usr/bin/python3 that imports scipy)")
)

const (
	// peerAgreement is the largest relative difference ‖x_phipsi − x_scipy‖∞ / ‖x_scipy‖∞ allowed
	// between the two solutions of one system: the acceptance criterion of the speed work. The
	// direct solve is exact to about κ·ε ≈ 1e-10 here (κ ≈ 4·10⁵ for 1000² unknowns), and the
	// iterative solve is run to peerTolerance, so a larger difference is a wrong solution.
	peerAgreement = 1e-8
	// peerTolerance is the relative residual of phipsi's solves that are compared with SciPy's:
	// two decades below the default, so that κ times the residual stays well under
	// peerAgreement whatever the error's shape.
	peerTolerance = 1e-12
	// peerMinSpeedup is the least ratio SciPy time ÷ phipsi time: the acceptance criterion of
	// the speed work (a whole run of a 1M-cell channel at least 50 times faster than a direct
	// solve of a 1M-unknown Laplacian).
	peerMinSpeedup = 50
	// peerMaxBoundRatio is the target for each solve's time ÷ the time its bytes take at the
	// triad bandwidth; reported beside the ratios, not checked (it moves with the host's load).
	peerMaxBoundRatio = 1.5
	// peerTriadReps is the number of timed triads on each side of the solves.
	peerTriadReps = 21
	// peerLaplacianSide is the number of unknowns per side of the Laplacian: 10⁶ unknowns.
	peerLaplacianSide = 1000
)

// peerSizes are the grids of the one-body channel: the spacing gives about 1M and 4M cells on
// the 6 × 1 channel. The same spacings reproduce the runs with the command line,
// phipsi run SCENARIO --spacing H.
var peerSizes = []struct {
	label   string
	spacing float64
}{{"1M", 0.00245}, {"4M", 0.001225}}

// peerScipyScript is the helper run by python3. It reads A and b from Matrix Market files,
// converts A to compressed columns outside the timing, times only the calls of spsolve, and
// writes the last solution as raw little-endian float64 and a JSON record on stdout.
const peerScipyScript = `
import json
import sys
import time

import numpy
import scipy
import scipy.io
import scipy.sparse.linalg


def main():
    a_path, b_path, x_path, runs = sys.argv[1], sys.argv[2], sys.argv[3], int(sys.argv[4])
    started = time.perf_counter()
    a = scipy.io.mmread(a_path).tocsc()
    b = numpy.asarray(scipy.io.mmread(b_path), dtype=numpy.float64).ravel()
    read_seconds = time.perf_counter() - started
    seconds = []
    x = None
    for _ in range(runs):
        started = time.perf_counter()
        x = scipy.sparse.linalg.spsolve(a, b, permc_spec="MMD_AT_PLUS_A")
        seconds.append(time.perf_counter() - started)
    residual = numpy.linalg.norm(b - a @ x) / numpy.linalg.norm(b)
    numpy.asarray(x, dtype="<f8").tofile(x_path)
    json.dump({
        "scipy": scipy.__version__,
        "numpy": numpy.__version__,
        "n": int(a.shape[0]),
        "nnz": int(a.nnz),
        "read_seconds": read_seconds,
        "solve_seconds": seconds,
        "residual": float(residual),
    }, sys.stdout)


main()
`

// peerScipyRecord is the JSON record of the helper script.
type peerScipyRecord struct {
	SciPy        string    `json:"scipy"`
	NumPy        string    `json:"numpy"`
	N            int       `json:"n"`
	NNZ          int       `json:"nnz"`
	ReadSeconds  float64   `json:"read_seconds"`
	SolveSeconds []float64 `json:"solve_seconds"`
	Residual     float64   `json:"residual"`
}

// peerFindPython returns the interpreter to use and its SciPy version, or "" when none imports
// SciPy.
func peerFindPython(t *testing.T) (python, version string) {
	t.Helper()
	candidates := []string{"python3", "/usr/bin/python3"}
	if *peerPython != "" {
		candidates = []string{*peerPython}
	}
	for _, c := range candidates {
		p, err := exec.LookPath(c)
		if err != nil {
			continue
		}
		out, err := exec.Command(p, "-c", "import numpy, scipy, scipy.sparse.linalg; print(scipy.__version__)").Output()
		if err != nil {
			t.Logf("%s: cannot import scipy (%v)", p, err)
			continue
		}
		return p, strings.TrimSpace(string(out))
	}
	return "", ""
}

// peerWriteMatrix writes a in Matrix Market coordinate format (real, general, 1-based indices),
// every value in the shortest form that reads back to the same float64.
func peerWriteMatrix(path string, a *CSR) error {
	return peerWriteFile(path, func(w *bufio.Writer) error {
		fmt.Fprintf(w, "%%%%MatrixMarket matrix coordinate real general\n%d %d %d\n", a.N, a.N, a.NNZ())
		line := make([]byte, 0, 64)
		for i := range a.N {
			for k := a.RowPtr[i]; k < a.RowPtr[i+1]; k++ {
				line = strconv.AppendInt(line[:0], int64(i+1), 10)
				line = append(line, ' ')
				line = strconv.AppendInt(line, int64(a.Col[k])+1, 10)
				line = append(line, ' ')
				line = strconv.AppendFloat(line, a.Val[k], 'g', -1, 64)
				line = append(line, '\n')
				if _, err := w.Write(line); err != nil {
					return err
				}
			}
		}
		return nil
	})
}

// peerWriteVector writes b as a Matrix Market array (real, general) of one column.
func peerWriteVector(path string, b []float64) error {
	return peerWriteFile(path, func(w *bufio.Writer) error {
		fmt.Fprintf(w, "%%%%MatrixMarket matrix array real general\n%d 1\n", len(b))
		line := make([]byte, 0, 32)
		for _, v := range b {
			line = strconv.AppendFloat(line[:0], v, 'g', -1, 64)
			line = append(line, '\n')
			if _, err := w.Write(line); err != nil {
				return err
			}
		}
		return nil
	})
}

// peerWriteFile creates path and writes it through a buffer with write.
func peerWriteFile(path string, write func(w *bufio.Writer) error) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	w := bufio.NewWriterSize(f, 1<<20)
	if err := write(w); err != nil {
		f.Close()
		return fmt.Errorf("write %s: %w", path, err)
	}
	if err := w.Flush(); err != nil {
		f.Close()
		return fmt.Errorf("write %s: %w", path, err)
	}
	return f.Close()
}

// peerReadFloat64s reads n little-endian float64 from path.
func peerReadFloat64s(path string, n int) ([]float64, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	if len(data) != 8*n {
		return nil, fmt.Errorf("read %s: %d bytes, want %d (8 per unknown)", path, len(data), 8*n)
	}
	x := make([]float64, n)
	for i := range x {
		x[i] = math.Float64frombits(binary.LittleEndian.Uint64(data[8*i:]))
	}
	return x, nil
}

// peerScipySolve writes a x = b into dir, solves it runs times with SciPy and returns the
// solution and the script's record.
func peerScipySolve(ctx context.Context, python, dir, name string, a *CSR, b []float64, runs int) ([]float64, peerScipyRecord, error) {
	var rec peerScipyRecord
	script := filepath.Join(dir, "peer_spsolve.py")
	if err := os.WriteFile(script, []byte(peerScipyScript), 0o644); err != nil {
		return nil, rec, err
	}
	aPath, bPath, xPath := filepath.Join(dir, name+"-A.mtx"), filepath.Join(dir, name+"-b.mtx"), filepath.Join(dir, name+"-x.f64")
	if err := peerWriteMatrix(aPath, a); err != nil {
		return nil, rec, err
	}
	if err := peerWriteVector(bPath, b); err != nil {
		return nil, rec, err
	}
	var stdout, stderr bytes.Buffer
	cmd := exec.CommandContext(ctx, python, script, aPath, bPath, xPath, strconv.Itoa(runs))
	cmd.Stdout, cmd.Stderr = &stdout, &stderr
	if err := cmd.Run(); err != nil {
		return nil, rec, fmt.Errorf("scipy helper: %w\n%s", err, stderr.Bytes())
	}
	if err := json.Unmarshal(stdout.Bytes(), &rec); err != nil {
		return nil, rec, fmt.Errorf("scipy helper output %q: %w", stdout.Bytes(), err)
	}
	if rec.N != a.N || rec.NNZ != a.NNZ() || len(rec.SolveSeconds) != runs {
		return nil, rec, fmt.Errorf("scipy helper read n = %d, nnz = %d and timed %d solves, want %d, %d and %d", rec.N, rec.NNZ, len(rec.SolveSeconds), a.N, a.NNZ(), runs)
	}
	x, err := peerReadFloat64s(xPath, a.N)
	return x, rec, err
}

// peerRelDiff returns ‖x − y‖∞ / ‖y‖∞.
func peerRelDiff(x, y []float64) float64 {
	var d, s float64
	for i, v := range y {
		d = math.Max(d, math.Abs(x[i]-v))
		s = math.Max(s, math.Abs(v))
	}
	return d / s
}

// peerLaplacian returns the 1000 × 1000 Dirichlet five-point Laplacian of poisson5 on the unit
// square with boundary values of the harmonic cubic u = x³ − 3xy², its grid (boundary nodes
// included) and the node of each unknown. The five-point stencil's truncation error,
// (h²/12)(u_xxxx + u_yyyy) to leading order and higher even derivatives beyond, vanishes for a
// cubic (from memory), so the discrete solution is u at the nodes, to rounding.
func peerLaplacian() (gridProblem, mesh.Grid, []int32) {
	n := peerLaplacianSide + 1 // cells per side
	p := poisson5(n, func(x, y float64) float64 { return x*x*x - 3*x*y*y }, func(x, y float64) float64 { return 0 })
	g := mesh.Grid{H: 1 / float64(n), NX: n + 1, NY: n + 1}
	nodes := make([]int32, 0, p.a.N)
	for j := 1; j < n; j++ {
		for i := 1; i < n; i++ {
			nodes = append(nodes, int32(g.Index(i, j)))
		}
	}
	return p, g, nodes
}

// peerChannelGeometry is the one-body channel of the comparison: 6 long and 1 high, straight
// walls, a cylinder of radius 0.08 with its centre at (2.5, 0.5), the geometry of
// scenarios/pier-in-flume.toml.
func peerChannelGeometry() (*mesh.Geometry, error) {
	lower, upper, err := mgStraight(6, 1)
	if err != nil {
		return nil, err
	}
	return &mesh.Geometry{Length: 6, Lower: lower, Upper: upper,
		Bodies: []mesh.Body{{Name: "pier", Shape: mesh.NewCircle(mesh.Point{X: 2.5, Y: 0.5}, 0.08)}}}, nil
}

// peerInflow is the channel's inflow speed, m/s (that of scenarios/pier-in-flume.toml).
const peerInflow = 0.8

// peerChannel classifies the channel on a grid of the given spacing and sets its conditions:
// the body at zero circulation, as the scenario has it.
func peerChannel(spacing float64) (*mesh.Mesh, *bc.Set, error) {
	geo, err := peerChannelGeometry()
	if err != nil {
		return nil, nil, err
	}
	g, err := mesh.PlanGrid(geo.Length, 0, 1, spacing)
	if err != nil {
		return nil, nil, err
	}
	m, err := mesh.Build(geo, g)
	if err != nil {
		return nil, nil, err
	}
	s, err := bc.New(m, peerInflow, make([]bc.Body, len(geo.Bodies)))
	return m, s, err
}

// peerPipelineRun is one timed pass of the solver-level work of a run, with the byte model of
// its solves.
type peerPipelineRun struct {
	cells                                     int
	build, asmPsi, solvePsi, asmPhi, solvePhi time.Duration // the stages, in order
	total                                     time.Duration
	psiSetup, phiSetup                        time.Duration // hierarchies (and ψ's contours), inside the stages
	psi, phi                                  peerBandwidth // the iterations of SolvePsi and SolvePhi; bound not yet set
}

// peerPipeline does and times what a run does up to the solved fields, with the default method
// and settings: classify the grid and set the conditions, assemble and solve ψ (every
// superposition solve and the body constant), assemble and solve φ with the circulation found.
// The derived fields, tables and files of a run (package flow and cmd/phipsi, which this package
// may not import) are left out; a whole run is timed from the command line instead. After the
// timing it applies the byte model to the solves.
func peerPipeline(ctx context.Context, spacing float64) (peerPipelineRun, error) {
	var r peerPipelineRun
	t0 := time.Now()
	m, s, err := peerChannel(spacing)
	if err != nil {
		return r, err
	}
	t1 := time.Now()
	psiSys, err := AssemblePsi(m, s)
	if err != nil {
		return r, err
	}
	t2 := time.Now()
	psi, err := SolvePsi(ctx, psiSys, MethodAuto, nil)
	if err != nil {
		return r, err
	}
	t3 := time.Now()
	phiSys, err := AssemblePhi(m, s, psi.Circulation, nil)
	if err != nil {
		return r, err
	}
	t4 := time.Now()
	phi, err := SolvePhi(ctx, phiSys, MethodAuto, nil)
	if err != nil {
		return r, err
	}
	t5 := time.Now()
	r = peerPipelineRun{
		cells: m.Grid.Cells(),
		build: t1.Sub(t0), asmPsi: t2.Sub(t1), solvePsi: t3.Sub(t2), asmPhi: t4.Sub(t3), solvePhi: t5.Sub(t4),
		total:    t5.Sub(t0),
		psiSetup: psi.Setup, phiSetup: phi.Setup,
	}
	if r.psi, err = peerPsiTraffic(psi); err != nil {
		return r, fmt.Errorf("ψ byte model: %w", err)
	}
	if r.phi, err = peerPhiTraffic(phi); err != nil {
		return r, fmt.Errorf("φ byte model: %w", err)
	}
	return r, nil
}

// Byte model. One solve must at least stream, from memory, every array each of its passes
// touches, once per pass: at 1M unknowns every vector (8 MB) and the matrix (12 MB) are far
// larger than the caches, so nothing survives from one pass to the next. Values are counted
// as STREAM counts them (each array read or written once per pass, no write-allocate traffic),
// so that the model divided by the triad bandwidth is the time of the solve at full memory speed.
// N is the number of unknowns, v = 8N the bytes of one vector.
//
//	matrix pass        M = 4N + N/8 + 4·nodes + R    the GridMatrix's node index (int32) and plain
//	                                                 bit per row, its node-to-unknown map (int32 per
//	                                                 grid node, read once: the rows above and below
//	                                                 stay in cache), and R the other rows' CSR arrays
//	A·x, with dots     M + 3v                        x and one more vector read, the product written (x's
//	                                                 neighbours come from cache: rows are visited in order)
//	residual b − A x   M + 3v                        b and x read, r written
//	dot product        2v; axpy-like update 3v; x += αp, r −= αq with ‖r‖²: 6v; copy 2v
//
// BiCGStab (krylov.go), per iteration: p = r + β(p − ωv) 4v; M⁻¹p; v = A p̂ with r̂·v, v·v;
// x += αp̂, s = r − αv, saving the best iterate on the way 7v (6v in the bordered ψ solve, which
// keeps no best iterate); M⁻¹s; t = A ŝ with t·s, t·t; x += ωŝ, r = s − ωt with r̂·r 7v. Per solve: ‖b‖ v, the first and the final true residual;
// per restart one true residual. (The first iteration's fresh start copies r into r̂ and p and
// takes one dot product, 6v, about a regular direction update.)
//
// CG, per iteration: q = A p with p·q (M + 2v, p read once); x += αp, r −= αq 6v; M⁻¹r;
// r·z 2v; p = z + βp 3v; the last iteration stops after its step. Per solve: ‖b‖, the first
// residual, the first M⁻¹r with p = z and r·z, the final true residual; per restart one true
// residual and one fresh start. SolvePhi's full-multigrid pass before it (Multigrid.Guess): one
// fine residual, the coarse levels' restrictions down, a coarse V-cycle from every level up with
// its interpolation and residual (about twice the coarse part of one V-cycle), the correction
// interpolated into x (2v).
//
// V-cycle (mg.go, mg_fine.go, mg_grid.go), for the fused red–black path with one sweep that
// every five-point system takes. The finest level is two passes over its rows: before the
// correction M + N(1 colour byte + 8 b read + 8 x written + 8 residual written); after it
// M + N(1 + 8 b read + 16 x read and written) + the first coarse level's x read (the node index
// is in M). A coarse level of P padded nodes (stencil of 9 float32, 36 B) costs, per V-cycle: the
// restriction 8·P_above + 8P (the residual of the level above read, b written); the smoothing
// before the correction 60P (stencil, b, 1/diagonal read, x written); the residual 60P (stencil,
// b, x read, r written); the interpolation 16P + 8·P_below (x read and written, the coarser x
// read); the smoothing after it 68P (x read as well). A four-colour sweep is counted as one
// pass over the level: its colours can share one pass as the finest level's fused steps do; nodes
// in runs of the level's standard stencil read no stencil. The coarsest level costs its
// restriction and its dense inverse, 8n² + 28n for n unknowns.
type peerTraffic struct {
	matrix, vector, vcycle float64 // bytes of one pass over A, one vector, one V-cycle
	coarse                 float64 // bytes of the coarse levels' part of one V-cycle
}

// stencilBytes is the size of one coarse-level stencil: nine float32.
const stencilBytes = 9 * 4

// newPeerTraffic returns the byte model of solves with matrix a and preconditioner mg.
func newPeerTraffic(a *GridMatrix, mg *Multigrid) (peerTraffic, error) {
	rest := 8*len(a.restPtr) + 12*len(a.restCol) + 8*len(a.restDiag)
	tr := peerTraffic{matrix: 4*float64(a.N) + 8*float64(len(a.plain)) + 4*float64(len(a.unknown)) + float64(rest), vector: 8 * float64(a.N)}
	f := mg.fine
	switch {
	case mg.direct != nil || f == nil:
		return tr, errors.New("the system is solved by a dense inverse, not a V-cycle")
	case f.ncolour != 2 || mg.smooth != 1 || mg.unfused:
		return tr, fmt.Errorf("the model covers the fused red–black V-cycle with one sweep, got %d colours and %d sweeps", f.ncolour, mg.smooth)
	}
	n := float64(f.a.N)
	vc := tr.matrix + n*(1+8+8+8) // before the correction
	vc += tr.matrix + n*(1+8+16) + 8*float64(len(mg.levels[0].x))
	above := float64(f.stride * (f.ny + 3)) // the padded residual grid of the finest level
	fine := vc
	for l, lv := range mg.levels {
		p := float64(len(lv.x))
		vc += 8*above + 8*p
		if lv.dense != nil {
			nc := float64(len(lv.dense.idx))
			vc += 8*nc*nc + 4*nc + 8*nc + 16*nc // inverse, index, b gathered, x written
			break
		}
		// Nodes in runs of the level's standard stencil read no stencil (mg_std.go).
		std := 0.0
		for _, run := range lv.stdRuns {
			std += float64(run[1] - run[0])
		}
		sb := stencilBytes * (p - std)
		vc += sb + 24*p                               // smoothing before
		vc += sb + 24*p                               // residual
		vc += 16*p + 8*float64(len(mg.levels[l+1].x)) // interpolation
		vc += sb + 32*p                               // smoothing after
		above = p
	}
	tr.vcycle = vc
	tr.coarse = vc - fine
	return tr, nil
}

// residual returns the bytes of b − A x.
func (tr peerTraffic) residual() float64 { return tr.matrix + 3*tr.vector }

// bicgstab returns the bytes of one BiCGStab solve with statistics st, which keeps its best
// iterate if best is set.
func (tr peerTraffic) bicgstab(st Stats, best bool) float64 {
	v := tr.vector
	mul := tr.matrix + 3*v
	half := 6 * v // x += αp̂, s = r − αv
	if best {
		half += v
	}
	iter := 4*v + tr.vcycle + mul + half + tr.vcycle + mul + 7*v
	fixed := v + 2*tr.residual()
	return fixed + float64(st.Restarts)*tr.residual() + float64(st.Iterations)*iter
}

// cg returns the bytes of one CG solve with statistics st.
func (tr peerTraffic) cg(st Stats) float64 {
	v := tr.vector
	if st.Iterations == 0 {
		return v + tr.residual()
	}
	start := tr.vcycle + 2*v + 2*v
	iter := (tr.matrix + 2*v) + 6*v + tr.vcycle + 2*v + 3*v
	last := tr.vcycle + 2*v + 3*v // not done by the last iteration
	fixed := v + tr.residual() + start + tr.residual()
	return fixed + float64(st.Iterations)*iter - last + float64(st.Restarts)*(tr.residual()+start)
}

// peerBandwidth is a set of solves beside its bandwidth bound.
type peerBandwidth struct {
	bytes   float64 // bytes moved, by the model
	seconds float64 // measured time of the iterations
	iters   int     // iterations, summed over the solves
	solves  int
}

// ratio returns the measured time ÷ the time the bytes take at bandwidth bw (bytes per second).
func (b peerBandwidth) ratio(bw float64) float64 { return b.seconds / (b.bytes / bw) }

// peerPsiTraffic returns the byte model of the ψ solves of sol (the hierarchy rebuilt, as
// SolvePsi builds it, for its level sizes) and their measured time.
func peerPsiTraffic(sol *PsiSolution) (peerBandwidth, error) {
	sys := sol.Sys
	mg, err := NewMultigrid(sys.A, sys.Mesh.Grid, sys.Nodes, MGOptions{})
	if err != nil {
		return peerBandwidth{}, err
	}
	tr, err := newPeerTraffic(sys.A, mg)
	if err != nil {
		return peerBandwidth{}, err
	}
	b := peerBandwidth{seconds: sol.Solve.Seconds(), solves: len(sol.Solves)}
	nb := len(sys.BK)
	bordered := nb > 0 && len(sol.Solves) == 1
	for _, st := range sol.Solves {
		b.bytes += tr.bicgstab(st, !bordered)
		b.iters += st.Iterations
	}
	if bordered {
		// The bordered solve (psi_bordered.go): Z = M⁻¹BK once (a V-cycle per body, BK expanded,
		// the result rounded into float32 z), the initial guess written, and in each of the two
		// preconditioner solves per iteration x += Σ c_b z_b (z read, 4 bytes an unknown; x read
		// and written).
		v := tr.vector
		b.bytes += float64(nb)*(tr.vcycle+2*v+1.5*v) + v + float64(b.iters)*2*float64(nb)*2.5*v
	}
	return b, nil
}

// peerPhiTraffic is peerPsiTraffic for the φ solve.
func peerPhiTraffic(sol *PhiSolution) (peerBandwidth, error) {
	sys := sol.Sys
	mg, err := NewMultigrid(sys.A, sys.Mesh.Grid, sys.Nodes, MGOptions{Symmetric: true})
	if err != nil {
		return peerBandwidth{}, err
	}
	tr, err := newPeerTraffic(sys.A, mg)
	if err != nil {
		return peerBandwidth{}, err
	}
	guess := tr.residual() + 2*tr.coarse + 2*tr.vector
	return peerBandwidth{bytes: guess + tr.cg(sol.Stats), seconds: sol.Solve.Seconds(), iters: sol.Stats.Iterations, solves: 1}, nil
}

// peerSeconds returns the median of the durations, seconds.
func peerSeconds(ds []time.Duration) float64 {
	s := make([]float64, len(ds))
	for i, d := range ds {
		s[i] = d.Seconds()
	}
	return peerMedian(s)
}

// peerTable collects the rows of the summary logged at the end.
type peerTable struct {
	rows [][2]string
}

func (p *peerTable) add(name, format string, args ...any) {
	p.rows = append(p.rows, [2]string{name, fmt.Sprintf(format, args...)})
}

func (p *peerTable) String() string {
	var sb strings.Builder
	w := tabwriter.NewWriter(&sb, 0, 0, 2, ' ', 0)
	for _, r := range p.rows {
		fmt.Fprintf(w, "%s\t%s\n", r[0], r[1])
	}
	w.Flush()
	return sb.String()
}

func TestPeerScipy(t *testing.T) {
	if testing.Short() {
		t.Skip("peer comparison: systems of 1M and 4M unknowns, minutes of work")
	}
	ctx := t.Context()
	runs := *peerRuns
	if runs < 1 {
		t.Fatalf("-peer.runs = %d, want >= 1", runs)
	}
	python, version := peerFindPython(t)
	if python == "" {
		t.Log("python3 with SciPy not found (install python3-scipy, or pass -peer.python): the SciPy solves, the agreement checks and the speed-up check are skipped")
	} else {
		t.Logf("SciPy %s from %s, %d timed solves per system", version, python, runs)
	}
	dir := t.TempDir()
	workers := runtime.GOMAXPROCS(0)
	var table peerTable
	table.add("machine", "%s/%s, GOMAXPROCS %d, %s", runtime.GOOS, runtime.GOARCH, workers, runtime.Version())

	// The triad bandwidth: measured before the solves here and again after them; the median of
	// all samples is the figure used.
	runtime.GC()
	_, triadBefore := measureTriad(triadElems, workers, peerTriadReps)

	scipySeconds := map[string]float64{}
	var phipsiLaplacian float64 // phipsi's time for the Laplacian, seconds
	t.Run("laplacian", func(t *testing.T) {
		p, g, nodes := peerLaplacian()
		mg, err := NewMultigrid(p.a, g, nodes, MGOptions{Symmetric: true})
		if err != nil {
			t.Fatal(err)
		}
		x := make([]float64, p.a.N) // to peerTolerance, for the comparisons
		st, err := CG(ctx, p.a, p.b, x, mg, &Settings{Tolerance: peerTolerance})
		if err != nil {
			t.Fatal(err)
		}
		// Ground truth: the discrete solution is the cubic at the nodes (see peerLaplacian).
		if d := peerRelDiff(x, p.exact); d > peerAgreement {
			t.Errorf("phipsi against the exact cubic: relative difference %.3g, want <= %g", d, peerAgreement)
		}
		// phipsi's own time for this system: hierarchy and CG at the default tolerance.
		var times []time.Duration
		iters := 0
		xd := make([]float64, p.a.N)
		for range runs {
			runtime.GC()
			start := time.Now()
			mg, err := NewMultigrid(p.a, g, nodes, MGOptions{Symmetric: true})
			if err != nil {
				t.Fatal(err)
			}
			clear(xd)
			st, err := CG(ctx, p.a, p.b, xd, mg, nil)
			if err != nil {
				t.Fatal(err)
			}
			times = append(times, time.Since(start))
			iters = st.Iterations
		}
		phipsiLaplacian = peerSeconds(times)
		table.add("laplacian 1000², phipsi (mg+cg, 1e-10)", "%.3f s (median of %d), %d iterations", peerSeconds(times), runs, iters)
		t.Logf("phipsi: %d unknowns, CG+multigrid to %g in %d iterations; at the default tolerance %.3f s (median of %v)",
			p.a.N, peerTolerance, st.Iterations, peerSeconds(times), times)
		if python == "" {
			t.Skip("no SciPy")
		}
		xs, rec, err := peerScipySolve(ctx, python, dir, "laplacian", p.a, p.b, runs)
		if err != nil {
			t.Fatal(err)
		}
		secs := peerMedian(rec.SolveSeconds)
		scipySeconds["laplacian"] = secs
		d := peerRelDiff(x, xs)
		t.Logf("scipy %s: spsolve %.2f s (median of %v), read %.1f s, residual %.2g; phipsi − scipy: %.3g relative",
			rec.SciPy, secs, rec.SolveSeconds, rec.ReadSeconds, rec.Residual, d)
		table.add("laplacian 1000², scipy spsolve", "%.2f s (median of %d: %v)", secs, runs, peerRound(rec.SolveSeconds))
		table.add("laplacian 1000², agreement", "%.2g (phipsi − scipy, ∞-norm relative), want <= %g", d, peerAgreement)
		if d > peerAgreement {
			t.Errorf("phipsi against scipy: relative difference %.3g, want <= %g", d, peerAgreement)
		}
		if ds := peerRelDiff(xs, p.exact); ds > peerAgreement {
			t.Errorf("scipy against the exact cubic: relative difference %.3g, want <= %g", ds, peerAgreement)
		}
	})

	t.Run("psi", func(t *testing.T) {
		m, s, err := peerChannel(peerSizes[0].spacing)
		if err != nil {
			t.Fatal(err)
		}
		sys, err := AssemblePsi(m, s)
		if err != nil {
			t.Fatal(err)
		}
		t.Logf("ψ system of the channel: %d × %d nodes, %d cells, %d unknowns, %d plain rows", m.Grid.NX, m.Grid.NY, m.Grid.Cells(), sys.A.N, sys.A.Plain())
		if python == "" {
			t.Skip("no SciPy")
		}
		mg, err := NewMultigrid(sys.A, m.Grid, sys.Nodes, MGOptions{})
		if err != nil {
			t.Fatal(err)
		}
		x := make([]float64, sys.A.N)
		sys.initialGuess(x)
		st, err := BiCGStab(ctx, sys.A, sys.B0, x, mg, &Settings{Tolerance: peerTolerance})
		if err != nil {
			t.Fatal(err)
		}
		xs, rec, err := peerScipySolve(ctx, python, dir, "psi", sys.A.CSR(), sys.B0, runs)
		if err != nil {
			t.Fatal(err)
		}
		secs := peerMedian(rec.SolveSeconds)
		scipySeconds["psi"] = secs
		d := peerRelDiff(x, xs)
		t.Logf("phipsi BiCGStab+multigrid to %g in %d iterations; scipy spsolve %.2f s (median of %v), residual %.2g; phipsi − scipy: %.3g relative",
			peerTolerance, st.Iterations, secs, rec.SolveSeconds, rec.Residual, d)
		table.add("ψ channel 1M, scipy spsolve", "%.2f s (median of %d: %v)", secs, runs, peerRound(rec.SolveSeconds))
		table.add("ψ channel 1M, agreement", "%.2g (phipsi − scipy, ∞-norm relative), want <= %g", d, peerAgreement)
		if d > peerAgreement {
			t.Errorf("phipsi against scipy: relative difference %.3g, want <= %g", d, peerAgreement)
		}
	})

	// The solver-level work of a run at each size, and the bandwidth of its solves.
	type sized struct {
		runs []peerPipelineRun
	}
	pipelines := map[string]*sized{}
	for _, size := range peerSizes {
		t.Run("pipeline/n="+size.label, func(t *testing.T) {
			sz := &sized{}
			for range runs {
				runtime.GC()
				r, err := peerPipeline(ctx, size.spacing)
				if err != nil {
					t.Fatal(err)
				}
				sz.runs = append(sz.runs, r)
			}
			pipelines[size.label] = sz
		})
	}

	runtime.GC()
	_, triadAfter := measureTriad(triadElems, workers, peerTriadReps)
	triad := peerMedian(append(append([]float64(nil), triadBefore...), triadAfter...))
	t.Logf("triad: %.1f GB/s median (before the solves %.1f, after %.1f; %d + %d runs of 3 × %d MB on %d goroutines)",
		triad/1e9, peerMedian(triadBefore)/1e9, peerMedian(triadAfter)/1e9, peerTriadReps, peerTriadReps, 8*triadElems/1_000_000, workers)
	table.add("triad bandwidth", "%.1f GB/s (median; before %.1f, after %.1f)", triad/1e9, peerMedian(triadBefore)/1e9, peerMedian(triadAfter)/1e9)

	for _, size := range peerSizes {
		t.Run("bandwidth/n="+size.label, func(t *testing.T) {
			sz := pipelines[size.label]
			if sz == nil || len(sz.runs) == 0 {
				t.Skip("pipeline did not run")
			}
			var total, psiSetup, phiSetup []time.Duration
			var psiSolve, phiSolve, psiRatio, phiRatio []float64
			for _, r := range sz.runs {
				total = append(total, r.total)
				psiSetup, phiSetup = append(psiSetup, r.psiSetup), append(phiSetup, r.phiSetup)
				psiSolve, phiSolve = append(psiSolve, r.psi.seconds), append(phiSolve, r.phi.seconds)
				psiRatio, phiRatio = append(psiRatio, r.psi.ratio(triad)), append(phiRatio, r.phi.ratio(triad))
			}
			r := sz.runs[0]
			t.Logf("%d cells: solver-level run %.3f s median of %v (build %v, ψ assembly %v, ψ %v, φ assembly %v, φ %v in the first)",
				r.cells, peerSeconds(total), total, r.build, r.asmPsi, r.solvePsi, r.asmPhi, r.solvePhi)
			psiB, phiB := r.psi, r.phi
			t.Logf("ψ: %d BiCGStab iterations over %d solves, %.2f GB by the model, bound %.3f s; solves %.3f s median of %v (setup %.3f s): %.2f × the bound",
				psiB.iters, psiB.solves, psiB.bytes/1e9, psiB.bytes/triad, peerMedian(psiSolve), peerRound(psiSolve), peerSeconds(psiSetup), peerMedian(psiRatio))
			t.Logf("φ: %d CG iterations, %.2f GB by the model, bound %.3f s; solve %.3f s median of %v (setup %.3f s): %.2f × the bound",
				phiB.iters, phiB.bytes/1e9, phiB.bytes/triad, peerMedian(phiSolve), peerRound(phiSolve), peerSeconds(phiSetup), peerMedian(phiRatio))
			table.add("channel "+size.label+", phipsi solver-level run", "%.3f s (median of %d: %v), %d cells", peerSeconds(total), runs, peerRoundD(total), r.cells)
			table.add("channel "+size.label+", ψ solves", "%.3f s (setup %.3f s), %d iterations, %.2f GB, bound %.3f s, %.2f × bound (target <= %g)",
				peerMedian(psiSolve), peerSeconds(psiSetup), psiB.iters, psiB.bytes/1e9, psiB.bytes/triad, peerMedian(psiRatio), peerMaxBoundRatio)
			table.add("channel "+size.label+", φ solve", "%.3f s (setup %.3f s), %d iterations, %.2f GB, bound %.3f s, %.2f × bound (target <= %g)",
				peerMedian(phiSolve), peerSeconds(phiSetup), phiB.iters, phiB.bytes/1e9, phiB.bytes/triad, peerMedian(phiRatio), peerMaxBoundRatio)
		})
	}

	t.Run("speedup", func(t *testing.T) {
		sz := pipelines[peerSizes[0].label]
		lap, ok := scipySeconds["laplacian"]
		switch {
		case sz == nil || len(sz.runs) == 0:
			t.Skip("the 1M pipeline did not run")
		case !ok:
			t.Skip("no SciPy time for the Laplacian: the speed-up is not checked")
		}
		var total []time.Duration
		for _, r := range sz.runs {
			total = append(total, r.total)
		}
		ratio := lap / peerSeconds(total)
		t.Logf("scipy Laplacian %.2f s ÷ phipsi solver-level run %.3f s = %.1f", lap, peerSeconds(total), ratio)
		if psi, ok := scipySeconds["psi"]; ok {
			t.Logf("scipy ψ system %.2f s ÷ phipsi solver-level run %.3f s = %.1f", psi, peerSeconds(total), psi/peerSeconds(total))
			table.add("speed-up (scipy ψ ÷ phipsi 1M run)", "%.1f", psi/peerSeconds(total))
		}
		t.Logf("scipy Laplacian %.2f s ÷ phipsi on the same Laplacian %.3f s = %.1f", lap, phipsiLaplacian, lap/phipsiLaplacian)
		table.add("speed-up (scipy ÷ phipsi, same laplacian)", "%.1f", lap/phipsiLaplacian)
		table.add("speed-up (scipy laplacian ÷ phipsi 1M run)", "%.1f, want >= %d", ratio, peerMinSpeedup)
		if ratio < peerMinSpeedup {
			t.Errorf("scipy ÷ phipsi = %.1f, want >= %d", ratio, peerMinSpeedup)
		}
	})
	t.Logf("summary\n%s", &table)
}

// peerRound returns xs rounded to 0.01 for the table.
func peerRound(xs []float64) []float64 {
	out := make([]float64, len(xs))
	for i, x := range xs {
		out[i] = math.Round(x*100) / 100
	}
	return out
}

// peerRoundD returns ds rounded to milliseconds for the table.
func peerRoundD(ds []time.Duration) []time.Duration {
	out := make([]time.Duration, len(ds))
	for i, d := range ds {
		out[i] = d.Round(time.Millisecond)
	}
	return out
}
