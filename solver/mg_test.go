package solver

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"

	"phipsi/bc"
	"phipsi/mesh"
)

// mgPassage is a channel geometry the multigrid tests and benchmarks solve ψ on.
type mgPassage struct {
	name           string
	length, height float64 // the grid's extent: x in [0, length], y in [0, height]
	geometry       func() (*mesh.Geometry, error)
}

// mgStraight returns straight walls at y = 0 and y = height over [0, length].
func mgStraight(length, height float64) (*mesh.Wall, *mesh.Wall, error) {
	lower, err := mesh.NewWall([]mesh.Point{{X: 0, Y: 0}, {X: length, Y: 0}}, false, false)
	if err != nil {
		return nil, nil, err
	}
	upper, err := mesh.NewWall([]mesh.Point{{X: 0, Y: height}, {X: length, Y: height}}, false, true)
	return lower, upper, err
}

// mgCylinder returns a channel 5 long and 1 high with a cylinder of diameter 0.4 near its middle,
// offset by irrational fractions of a cell so that no grid line is tangent to it.
func mgCylinder(y, radius float64) mgPassage {
	return mgPassage{"cylinder", 5, 1, func() (*mesh.Geometry, error) {
		lower, upper, err := mgStraight(5, 1)
		if err != nil {
			return nil, err
		}
		c := mesh.Point{X: 2.5 + 1/(100*math.Pi), Y: y + math.Sqrt2/1000}
		return &mesh.Geometry{Length: 5, Lower: lower, Upper: upper,
			Bodies: []mesh.Body{{Name: "cylinder", Shape: mesh.NewCircle(c, radius)}}}, nil
	}}
}

var (
	mgPassageCylinder = mgCylinder(0.5, 0.2)
	// mgPassageStep is a forward-facing step: the lower wall rises from 0 to 0.5 halfway along.
	mgPassageStep = mgPassage{"step", 6, 1, func() (*mesh.Geometry, error) {
		lower, err := mesh.NewWall([]mesh.Point{{X: 0, Y: 0}, {X: 3, Y: 0}, {X: 3, Y: 0.5}, {X: 6, Y: 0.5}}, false, false)
		if err != nil {
			return nil, err
		}
		_, upper, err := mgStraight(6, 1)
		return &mesh.Geometry{Length: 6, Lower: lower, Upper: upper}, err
	}}
	// mgPassageFoil is a NACA 2412 section of unit chord at 4° in a channel 2 high.
	mgPassageFoil = mgPassage{"foil", 5, 2, func() (*mesh.Geometry, error) {
		lower, upper, err := mgStraight(5, 2)
		if err != nil {
			return nil, err
		}
		foil, err := mesh.NACA4("2412", 1, mesh.Point{X: 1.5, Y: 1}, 4*math.Pi/180, 120)
		return &mesh.Geometry{Length: 5, Lower: lower, Upper: upper,
			Bodies: []mesh.Body{{Name: "foil", Shape: foil}}}, err
	}}
	mgPassages = []mgPassage{mgPassageCylinder, mgPassageStep, mgPassageFoil}
)

// mesh builds the passage on a grid of about the given number of cells.
func (p mgPassage) mesh(tb testing.TB, cells int) *mesh.Mesh {
	tb.Helper()
	geo, err := p.geometry()
	if err != nil {
		tb.Fatal(err)
	}
	g, err := mesh.PlanGrid(p.length, 0, p.height, math.Sqrt(p.length*p.height/float64(cells)))
	if err != nil {
		tb.Fatal(err)
	}
	m, err := mesh.Build(geo, g)
	if err != nil {
		tb.Fatal(err)
	}
	return m
}

// psi assembles the passage's ψ system on about the given number of cells, with unit inflow
// speed and every body at zero circulation.
func (p mgPassage) psi(tb testing.TB, cells int) *PsiSystem {
	tb.Helper()
	m := p.mesh(tb, cells)
	s, err := bc.New(m, 1, make([]bc.Body, len(m.Geom.Bodies)))
	if err != nil {
		tb.Fatal(err)
	}
	sys, err := AssemblePsi(m, s)
	if err != nil {
		tb.Fatal(err)
	}
	return sys
}

const (
	// mgMaxIterations bounds BiCGStab+multigrid steps to a relative residual of 1e-10 on the ψ
	// systems (measured 5–8 from 4k to 4M cells). Jacobi-preconditioned BiCGStab needs hundreds
	// at these sizes, so a hierarchy that stopped working would fail it.
	mgMaxIterations = 12
	// mgMaxIterationsCG bounds CG+multigrid iterations on the symmetric systems (measured 9–15).
	mgMaxIterationsCG = 18
)

// mgFlat reports whether iteration counts are flat in the sense of the speed target: the finest
// grid needs at most 1.5 times the coarsest grid's count plus 2.
func mgFlat(iters []int) bool {
	return float64(iters[len(iters)-1]) <= 1.5*float64(iters[0])+2
}

// mgSizes returns the grid sizes (cells) of a flatness test: three in -short mode, four otherwise.
func mgSizes() []int {
	if testing.Short() {
		return []int{4000, 16000, 62000}
	}
	return []int{4000, 16000, 62000, 250000}
}

// psiRightHandSides returns the 1 + K right-hand sides of the superposition solves of sys, dense:
// B0, then every BK.
func psiRightHandSides(sys *PsiSystem) [][]float64 {
	rhs := [][]float64{sys.B0}
	for k := range sys.BK {
		b := make([]float64, sys.BK[k].N)
		sys.BK[k].DenseTo(b)
		rhs = append(rhs, b)
	}
	return rhs
}

// TestPsiBodyRightHandSides checks the sparse storage of BK against the geometry: body k's
// right-hand side has an entry, positive, exactly at the unknowns one of whose links ends on the
// body (a cut arm, or a whole link to a node pinned to it), in increasing order.
func TestPsiBodyRightHandSides(t *testing.T) {
	steps := [4][2]int{{1, 0}, {-1, 0}, {0, 1}, {0, -1}}
	for _, p := range []mgPassage{mgPassageCylinder, mgPassageFoil} {
		t.Run(p.name, func(t *testing.T) {
			sys := p.psi(t, 6000)
			m := sys.Mesh
			g := m.Grid
			n := len(sys.Nodes)
			if len(sys.BK) != len(m.Geom.Bodies) {
				t.Fatalf("got %d body right-hand sides, want %d", len(sys.BK), len(m.Geom.Bodies))
			}
			for k, bk := range sys.BK {
				if bk.N != n || len(bk.Index) != len(bk.Val) {
					t.Fatalf("body %d: N %d, %d indices, %d values; want N = %d and as many values as indices", k, bk.N, len(bk.Index), len(bk.Val), n)
				}
				var want []int32
				for u, node := range sys.Nodes {
					i, j := int(node)%g.NX, int(node)/g.NX
					arms, _ := m.Arms(int(node))
					touches := false
					for d, st := range steps {
						if d == mesh.East && i == g.NX-1 {
							continue // the outlet column mirrors its west arm
						}
						if arms[d].Boundary == mesh.BodyID(k) {
							touches = true
						} else if arms[d].Boundary == mesh.NoBoundary {
							nk := g.Index(i+st[0], j+st[1])
							touches = touches || (m.Kind[nk] == mesh.Pinned && int(m.Owner[nk]) == mesh.BodyID(k))
						}
					}
					if touches {
						want = append(want, int32(u))
					}
				}
				if !slices.Equal(bk.Index, want) {
					t.Errorf("body %d: got %d entries, want %d (the unknowns next to the body, in order)", k, len(bk.Index), len(want))
				}
				for q, v := range bk.Val {
					if !(v > 0) || !isFinite(v) {
						t.Errorf("body %d: entry %d (unknown %d) = %g, want positive and finite", k, q, bk.Index[q], v)
					}
				}
				if len(want) == 0 || 20*len(want) > n {
					t.Errorf("body %d: %d entries of %d unknowns, want some, and far fewer than the unknowns", k, len(want), n)
				}
				dense := make([]float64, n)
				for i := range dense {
					dense[i] = math.NaN() // DenseTo must write every entry
				}
				bk.DenseTo(dense)
				nonzero := 0
				for u, v := range dense {
					if v != 0 {
						nonzero++
						if q, ok := slices.BinarySearch(bk.Index, int32(u)); !ok || bk.Val[q] != v {
							t.Fatalf("body %d: dense entry %d = %g is not a stored entry", k, u, v)
						}
					}
				}
				if nonzero != len(bk.Index) {
					t.Errorf("body %d: DenseTo gave %d non-zeros, want %d", k, nonzero, len(bk.Index))
				}
			}
		})
	}
	t.Run("misuse panics", func(t *testing.T) {
		v := SparseVector{N: 4}
		v.add(2, 1)
		expectPanic(t, "index 1 after 2", func() { v.add(1, 1) })
		expectPanic(t, "len(dst) = 3, want 4", func() { v.DenseTo(make([]float64, 3)) })
	})
}

// TestMultigridPsiIterationsFlat checks that the iterations of the ψ solves stay flat as the grid
// is refined: each superposition solve by BiCGStab with the V-cycle, and the bordered solve that
// SolvePsi does.
func TestMultigridPsiIterationsFlat(t *testing.T) {
	passages := append(slices.Clone(mgPassages),
		// A thin gap: the cylinder 0.02 (1 to 5 cells) above the lower wall.
		mgPassage{"cylinder-gap", 5, 1, mgCylinder(0.22, 0.2).geometry})
	for _, p := range passages {
		t.Run(p.name, func(t *testing.T) {
			var iters, bordered []int
			for _, cells := range mgSizes() {
				sys := p.psi(t, cells)
				// The solve SolvePsi does: the system bordered by the bodies' conditions (not for
				// the gap, where the coarser grids leave too few nodes to measure a circulation;
				// that case is there for the V-cycle).
				if p.name != "cylinder-gap" {
					sol, err := SolvePsi(context.Background(), sys, MethodMG, nil)
					if err != nil {
						t.Fatalf("%d cells, bordered: %v", sys.Mesh.Grid.Cells(), err)
					}
					if its := sol.Solves[0].Iterations; len(sol.Solves) != 1 || its > mgMaxIterations {
						t.Errorf("%d cells: %d bordered solves, %d iterations, want 1 and <= %d", sys.Mesh.Grid.Cells(), len(sol.Solves), its, mgMaxIterations)
					}
					bordered = append(bordered, sol.Solves[0].Iterations)
				}
				mg, err := NewMultigrid(sys.A, sys.Mesh.Grid, sys.Nodes, MGOptions{})
				if err != nil {
					t.Fatal(err)
				}
				worst := 0
				for k, b := range psiRightHandSides(sys) {
					x := make([]float64, len(b))
					st, err := BiCGStab(context.Background(), sys.A, b, x, mg, nil)
					if err != nil {
						t.Fatalf("%d cells, right-hand side %d: %v", sys.Mesh.Grid.Cells(), k, err)
					}
					worst = max(worst, st.Iterations)
				}
				if worst > mgMaxIterations {
					t.Errorf("%d cells (levels %v): %d iterations, want <= %d", sys.Mesh.Grid.Cells(), mg.Levels(), worst, mgMaxIterations)
				}
				iters = append(iters, worst)
			}
			if !mgFlat(iters) {
				t.Errorf("iterations %v over %v cells: finest %d, want <= 1.5 × %d + 2", iters, mgSizes(), iters[len(iters)-1], iters[0])
			}
			if len(bordered) > 0 && !mgFlat(bordered) {
				t.Errorf("bordered iterations %v over %v cells: finest %d, want <= 1.5 × %d + 2", bordered, mgSizes(), bordered[len(bordered)-1], bordered[0])
			}
			t.Logf("iterations over %v cells: superposition (most of the 1 + K) %v, bordered %v", mgSizes(), iters, bordered)
		})
	}
}

func TestMultigridPsiMatchesJacobi(t *testing.T) {
	const (
		// solveTol is the residual both solves are asked for; with cond(A) below 1e5 on these
		// grids the two solutions then agree to about 1e-8 relative at worst.
		solveTol = 1e-13
		// agreeTol is the required agreement max|x_mg − x_jacobi| / max|x_jacobi|.
		agreeTol = 1e-8
	)
	for _, p := range mgPassages {
		t.Run(p.name, func(t *testing.T) {
			sys := p.psi(t, 6000)
			mg, err := NewMultigrid(sys.A, sys.Mesh.Grid, sys.Nodes, MGOptions{})
			if err != nil {
				t.Fatal(err)
			}
			set := &Settings{Tolerance: solveTol}
			for k, b := range psiRightHandSides(sys) {
				xm := make([]float64, len(b))
				if _, err := BiCGStab(context.Background(), sys.A, b, xm, mg, set); err != nil {
					t.Fatal(err)
				}
				xj := make([]float64, len(b))
				if _, err := BiCGStab(context.Background(), sys.A, b, xj, NewJacobi(sys.A), set); err != nil {
					t.Fatal(err)
				}
				if d := mgMaxDiff(xm, xj) / mgMaxAbs(xj); d > agreeTol {
					t.Errorf("right-hand side %d: relative difference %.3g, want <= %g", k, d, agreeTol)
				}
			}
		})
	}
}

func TestSolvePsiMultigrid(t *testing.T) {
	// agreeTol is the required agreement of the body constant and the field between the
	// multigrid and the Jacobi method, each solved to the default 1e-10 (cond(A) < 1e5 here).
	const agreeTol = 1e-5
	sys := mgPassageCylinder.psi(t, 8000)
	ref, err := SolvePsi(context.Background(), sys, MethodKrylov, nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, method := range []string{MethodMG, MethodAuto} {
		sol, err := SolvePsi(context.Background(), sys, method, nil)
		if err != nil {
			t.Fatalf("%s: %v", method, err)
		}
		if d := math.Abs(sol.BodyPsi[0] - ref.BodyPsi[0]); d > agreeTol*sys.BC.Q {
			t.Errorf("%s: body ψ %.10g, want %.10g (Jacobi) within %g", method, sol.BodyPsi[0], ref.BodyPsi[0], agreeTol*sys.BC.Q)
		}
		if d := mgMaxDiff(sol.Psi, ref.Psi); d > agreeTol*sys.BC.Q {
			t.Errorf("%s: ψ differs from Jacobi's by %.3g, want <= %g", method, d, agreeTol*sys.BC.Q)
		}
		for _, st := range sol.Solves {
			if st.Iterations > mgMaxIterations {
				t.Errorf("%s: %d iterations, want <= %d", method, st.Iterations, mgMaxIterations)
			}
		}
	}
}

// mgSPD returns a symmetric positive definite matrix on the unknowns of a ψ system: −1 between
// neighbouring unknowns, and a diagonal that adds 1/θ for every arm (θ = 1 for a whole link),
// so rows next to a boundary or a known node are strictly dominant.
func mgSPD(sys *PsiSystem) *CSR {
	m := sys.Mesh
	g := m.Grid
	bld := NewBuilder(len(sys.Nodes), 5*len(sys.Nodes))
	steps := [4][2]int{{1, 0}, {-1, 0}, {0, 1}, {0, -1}}
	for _, node := range sys.Nodes {
		k := int(node)
		i, j := k%g.NX, k/g.NX
		arms, _ := m.Arms(k)
		var diag float64
		for d, arm := range arms {
			diag += 1 / arm.Theta
			ni, nj := i+steps[d][0], j+steps[d][1]
			if arm.Boundary != mesh.NoBoundary || ni < 0 || ni >= g.NX || nj < 0 || nj >= g.NY {
				continue
			}
			if v := sys.Unknown[g.Index(ni, nj)]; v >= 0 {
				bld.Add(int(v), -1)
			}
		}
		bld.Add(int(sys.Unknown[k]), diag)
		bld.EndRow()
	}
	return bld.CSR()
}

// mgSlit returns a symmetric positive definite graph Laplacian on an nx × ny grid cut by a slit
// along row ny/2 from column nx/4 to 3nx/4: each node of the slit carries two unknowns, one
// joined to the nodes above and one to those below (as a thin plate splits a dual cell). The
// last column is held at zero through an extra 1 on its diagonal.
func mgSlit(nx, ny int) (*CSR, mesh.Grid, []int32) {
	g := mesh.Grid{H: 1, NX: nx, NY: ny}
	js, i0, i1 := ny/2, nx/4, 3*nx/4
	slit := func(i, j int) bool { return j == js && i >= i0 && i <= i1 }
	first := make([]int, g.Len()) // first unknown of each node
	var nodes []int32
	for k := range g.Len() {
		first[k] = len(nodes)
		nodes = append(nodes, int32(k))
		if slit(k%nx, k/nx) {
			nodes = append(nodes, int32(k))
		}
	}
	// piece returns the unknown of node (i, j) seen from a neighbour at row jn: the upper
	// piece of a slit node from above, the lower one otherwise.
	piece := func(i, j, jn int) int {
		u := first[g.Index(i, j)]
		if slit(i, j) && jn > j {
			u++
		}
		return u
	}
	type edge struct{ u, v int }
	var edges []edge
	for j := range ny {
		for i := range nx {
			if i+1 < nx {
				edges = append(edges, edge{piece(i, j, j), piece(i+1, j, j)})
				if slit(i, j) && slit(i+1, j) {
					edges = append(edges, edge{piece(i, j, j+1), piece(i+1, j, j+1)})
				}
			}
			if j+1 < ny {
				edges = append(edges, edge{piece(i, j, j+1), piece(i, j+1, j)})
			}
		}
	}
	n := len(nodes)
	rows := make([][]edge, n)
	for _, e := range edges {
		rows[e.u] = append(rows[e.u], e)
		rows[e.v] = append(rows[e.v], edge{e.v, e.u})
	}
	bld := NewBuilder(n, 5*n)
	for u := range n {
		diag := float64(len(rows[u]))
		if int(nodes[u])%nx == nx-1 {
			diag++
		}
		bld.Add(u, diag)
		for _, e := range rows[u] {
			bld.Add(e.v, -1)
		}
		bld.EndRow()
	}
	return bld.CSR(), g, nodes
}

func TestMultigridSymmetricCG(t *testing.T) {
	const (
		// symTol bounds |y·M⁻¹x − x·M⁻¹y| / (‖x‖‖M⁻¹y‖): rounding in the V-cycle only.
		symTol = 1e-12
		// asymMin is the asymmetry the non-symmetric V-cycle must show on the same matrix, so
		// that the symmetry check can fail.
		asymMin = 1e-6
	)
	type problem struct {
		name string
		make func(cells int) (*CSR, mesh.Grid, []int32)
	}
	var problems []problem
	for _, p := range mgPassages {
		problems = append(problems, problem{p.name, func(cells int) (*CSR, mesh.Grid, []int32) {
			sys := p.psi(t, cells)
			return mgSPD(sys), sys.Mesh.Grid, sys.Nodes
		}})
	}
	rng := rand.New(rand.NewPCG(3, 5))
	for _, p := range problems {
		t.Run(p.name, func(t *testing.T) {
			var iters []int
			for s, cells := range mgSizes() {
				a, g, nodes := p.make(cells)
				mg, err := NewMultigrid(a, g, nodes, MGOptions{Symmetric: true})
				if err != nil {
					t.Fatal(err)
				}
				if s == 0 {
					// The stored coarse operators are symmetric bit for bit.
					for l, lv := range mg.levels[:len(mg.levels)-1] {
						for k, st := range lv.st {
							if lv.invD[k] == 0 {
								continue
							}
							for d, v := range st {
								if w := lv.st[k+(d/3-1)*lv.sx+d%3-1][8-d]; v != w {
									t.Fatalf("level %d node %d: A_c entry %d is %v, its transpose %v", l+1, k, d, v, w)
								}
							}
						}
					}
					x, y := randVec(rng, a.N), randVec(rng, a.N)
					if asym := mgAsymmetry(mg, x, y); asym > symTol {
						t.Errorf("symmetric V-cycle: asymmetry %.3g, want <= %g", asym, symTol)
					}
					mx := make([]float64, a.N)
					for range 5 {
						x := randVec(rng, a.N)
						if err := mg.PreconSolve(mx, x); err != nil {
							t.Fatal(err)
						}
						if q := dot(x, mx); !(q > 0) {
							t.Errorf("x·M⁻¹x = %g, want > 0", q)
						}
					}
					plain, err := NewMultigrid(a, g, nodes, MGOptions{})
					if err != nil {
						t.Fatal(err)
					}
					if asym := mgAsymmetry(plain, x, y); asym < asymMin {
						t.Errorf("non-symmetric V-cycle: asymmetry %.3g, want >= %g (the check cannot fail)", asym, asymMin)
					}
				}
				b := randVec(rng, a.N)
				x := make([]float64, a.N)
				st, err := CG(context.Background(), a, b, x, mg, nil)
				if err != nil {
					t.Fatalf("%d unknowns: %v", a.N, err)
				}
				if st.Iterations > mgMaxIterationsCG {
					t.Errorf("%d unknowns (levels %v): %d iterations, want <= %d", a.N, mg.Levels(), st.Iterations, mgMaxIterationsCG)
				}
				iters = append(iters, st.Iterations)
			}
			if !mgFlat(iters) {
				t.Errorf("iterations %v: finest %d, want <= 1.5 × %d + 2", iters, iters[len(iters)-1], iters[0])
			}
		})
	}
}

// TestMultigridSharedNodes solves a slit problem in which the nodes of the slit carry two
// unknowns each. Coarse levels hold one value per node, so they cannot represent the jump across
// the slit, and the iteration count grows slowly with the grid (measured 24, 36, 50 CG
// iterations at 4k, 16k, 62k cells); it must stay far below Jacobi-preconditioned CG's
// (279, 549, 1022), and the V-cycle must stay symmetric.
func TestMultigridSharedNodes(t *testing.T) {
	const (
		// minSpeedup is the least ratio of Jacobi-CG to multigrid-CG iterations (measured 12–20).
		minSpeedup = 8
		// symTol bounds the V-cycle's asymmetry (rounding only).
		symTol = 1e-12
	)
	rng := rand.New(rand.NewPCG(8, 1))
	for _, cells := range mgSizes()[:3] {
		nx := int(math.Sqrt(float64(cells)))
		a, g, nodes := mgSlit(nx+1, nx/2+1)
		mg, err := NewMultigrid(a, g, nodes, MGOptions{Symmetric: true})
		if err != nil {
			t.Fatal(err)
		}
		if asym := mgAsymmetry(mg, randVec(rng, a.N), randVec(rng, a.N)); asym > symTol {
			t.Errorf("%d cells: asymmetry %.3g, want <= %g", cells, asym, symTol)
		}
		b := randVec(rng, a.N)
		x := make([]float64, a.N)
		st, err := CG(context.Background(), a, b, x, mg, nil)
		if err != nil {
			t.Fatalf("%d cells: %v", cells, err)
		}
		clear(x)
		jac, err := CG(context.Background(), a, b, x, NewJacobi(a), nil)
		if err != nil {
			t.Fatalf("%d cells, Jacobi: %v", cells, err)
		}
		if st.Iterations*minSpeedup > jac.Iterations {
			t.Errorf("%d cells: %d iterations against Jacobi's %d, want at most 1/%d of them", cells, st.Iterations, jac.Iterations, minSpeedup)
		}
	}
}

// mgAsymmetry returns |y·M⁻¹x − x·M⁻¹y| / (‖x‖‖M⁻¹y‖).
func mgAsymmetry(mg *Multigrid, x, y []float64) float64 {
	mx := make([]float64, len(x))
	my := make([]float64, len(x))
	if err := mg.PreconSolve(mx, x); err != nil {
		panic(err)
	}
	if err := mg.PreconSolve(my, y); err != nil {
		panic(err)
	}
	return math.Abs(dot(y, mx)-dot(x, my)) / (norm(x) * norm(my))
}

// mgRandomGrid returns a random non-symmetric five-point M-matrix on the nodes of an nx × ny grid
// that are not in a hole, and the nodes of its unknowns.
func mgRandomGrid(rng *rand.Rand, nx, ny int, hole func(i, j int) bool) (*CSR, mesh.Grid, []int32) {
	g := mesh.Grid{H: 1, NX: nx, NY: ny}
	unknown := make([]int, g.Len())
	var nodes []int32
	for k := range unknown {
		unknown[k] = -1
		if !hole(k%nx, k/nx) {
			unknown[k] = len(nodes)
			nodes = append(nodes, int32(k))
		}
	}
	bld := NewBuilder(len(nodes), 5*len(nodes))
	for u, k := range nodes {
		i, j := int(k)%nx, int(k)/nx
		diag := 0.1 + rng.Float64()
		for _, s := range [4][2]int{{1, 0}, {-1, 0}, {0, 1}, {0, -1}} {
			c := 0.5 + rng.Float64()
			diag += c
			ni, nj := i+s[0], j+s[1]
			if ni >= 0 && ni < nx && nj >= 0 && nj < ny && unknown[g.Index(ni, nj)] >= 0 {
				bld.Add(unknown[g.Index(ni, nj)], -c)
			}
		}
		bld.Add(u, diag)
		bld.EndRow()
	}
	return bld.CSR(), g, nodes
}

// TestMultigridGalerkin checks the first two coarse operators against P^T A P formed densely from
// the interpolation: bilinear, written out independently (coarse node (I, J) at fine (2I, 2J),
// P(u, C) = w(i − 2I)·w(j − 2J), w(0) = 1, w(±1) = ½), except at the nodes that take weights of
// their own from the operator (mg_transfer.go, MGOptions.OperatorWeights), which the random
// coefficients give every level; and once with bilinear weights everywhere.
func TestMultigridGalerkin(t *testing.T) {
	const (
		// roundTol is the float32 rounding of the stored coarse entries, 2⁻²⁴ relative.
		roundTol = 0x1p-24
		// sumTol, relative to the largest coarse entry, allows for the two computations adding
		// the same terms in different orders.
		sumTol = 1e-13
	)
	rng := rand.New(rand.NewPCG(1, 2))
	hole := func(i, j int) bool { return (i-6)*(i-6)+(j-5)*(j-5) < 6 || (j == 0 && i < 3) }
	for q, dims := range [][2]int{{17, 11}, {18, 12}, {16, 9}, {17, 11}} {
		a, g, nodes := mgRandomGrid(rng, dims[0], dims[1], hole)
		ownWeights := q < 3 // the last grid with bilinear weights everywhere
		mg, err := NewMultigrid(a, g, nodes, MGOptions{Coarsest: 4, OperatorWeights: ownWeights})
		if err != nil {
			t.Fatal(err)
		}
		if len(mg.levels) < 3 {
			t.Fatalf("%v: %d coarse levels, want >= 3 (two smoothed ones to check)", dims, len(mg.levels))
		}
		// The fine operator on the full grid (zero rows and columns off the unknowns).
		fine := mat.NewDense(g.Len(), g.Len(), nil)
		for u := range a.N {
			for k := a.RowPtr[u]; k < a.RowPtr[u+1]; k++ {
				fine.Set(int(nodes[u]), int(nodes[a.Col[k]]), a.Val[k])
			}
		}
		nx, ny := g.NX, g.NY
		for l, lv := range mg.levels[:2] {
			if lv.nx != nx/2+1 || lv.ny != ny/2+1 {
				t.Fatalf("%v level %d: %d × %d nodes, want %d × %d", dims, l+1, lv.nx, lv.ny, nx/2+1, ny/2+1)
			}
			p := mat.NewDense(nx*ny, lv.nx*lv.ny, nil)
			w := func(d int) float64 { return [3]float64{0.5, 1, 0.5}[d+1] }
			own := 0
			for j := range ny {
				for i := range nx {
					if row := lv.tr.row(j); slices.ContainsFunc(row, func(s special) bool { return int(s.i) == i }) {
						own++
						ow := lv.tr.weights(i, j)
						for b := range 2 {
							for a := range 2 {
								if ow[b][a] != 0 {
									p.Set(j*nx+i, (j>>1+b)*lv.nx+i>>1+a, ow[b][a])
								}
							}
						}
						continue
					}
					for jc := range lv.ny {
						for ic := range lv.nx {
							if di, dj := i-2*ic, j-2*jc; di >= -1 && di <= 1 && dj >= -1 && dj <= 1 {
								p.Set(j*nx+i, jc*lv.nx+ic, w(di)*w(dj))
							}
						}
					}
				}
			}
			if (own > 0) != ownWeights {
				t.Errorf("%v level %d: %d nodes with weights of their own, want them only with OperatorWeights (%v)", dims, l+1, own, ownWeights)
			}
			var ap, want mat.Dense
			ap.Mul(fine, p)
			want.Mul(p.T(), &ap)
			scale := mat.Norm(&want, math.Inf(1))
			got := mat.NewDense(lv.nx*lv.ny, lv.nx*lv.ny, nil)
			active := 0
			for jc := range lv.ny {
				for ic := range lv.nx {
					k := (jc+1)*lv.sx + ic + 1
					if lv.invD[k] != 0 {
						active++
					}
					for e, v := range lv.st[k] {
						di, dj := e%3-1, e/3-1
						if v != 0 {
							got.Set(jc*lv.nx+ic, (jc+dj)*lv.nx+ic+di, float64(v))
						}
					}
				}
			}
			worst := 0.0
			for r := range lv.nx * lv.ny {
				for c := range lv.nx * lv.ny {
					w := want.At(r, c)
					excess := math.Abs(got.At(r, c)-w) - (roundTol*math.Abs(w) + sumTol*scale)
					worst = math.Max(worst, excess)
				}
			}
			if worst > 0 {
				t.Errorf("%v level %d: an entry of A_c differs from PᵀAP by %.3g more than float32 rounding allows", dims, l+1, worst)
			}
			// Active nodes are those with a non-zero column in P restricted to the unknowns.
			wantActive := 0
			for c := range lv.nx * lv.ny {
				for f := range nx * ny {
					if p.At(f, c) != 0 && fine.At(f, f) != 0 {
						wantActive++
						break
					}
				}
			}
			if active != wantActive || lv.active != wantActive {
				t.Errorf("%v level %d: %d active nodes (counted %d), want %d", dims, l+1, active, lv.active, wantActive)
			}
			fine, nx, ny = &want, lv.nx, lv.ny
		}
	}
}

func TestMultigridExactOnSmallSystems(t *testing.T) {
	// exactTol bounds ‖r − A M⁻¹ r‖/‖r‖ for a dense solve of a well-conditioned matrix.
	const exactTol = 1e-12
	rng := rand.New(rand.NewPCG(9, 9))
	nonsym, g, nodes := mgRandomGrid(rng, 12, 10, func(i, j int) bool { return i == 5 && j > 2 && j < 7 })
	spd, gs, nodesS := mgSlit(12, 9)
	for _, c := range []struct {
		name      string
		a         *CSR
		g         mesh.Grid
		nodes     []int32
		symmetric bool
	}{
		{"non-symmetric", nonsym, g, nodes, false},
		{"symmetric", spd, gs, nodesS, true},
	} {
		mg, err := NewMultigrid(c.a, c.g, c.nodes, MGOptions{Coarsest: c.a.N, Symmetric: c.symmetric})
		if err != nil {
			t.Fatal(err)
		}
		if got := mg.Levels(); len(got) != 1 {
			t.Fatalf("%s: levels %v, want the fine level alone", c.name, got)
		}
		r := randVec(rng, c.a.N)
		x := make([]float64, c.a.N)
		if err := mg.PreconSolve(x, r); err != nil {
			t.Fatal(err)
		}
		if res := trueRelResidual(c.a, r, x); res > exactTol {
			t.Errorf("%s: residual of the direct solve %.3g, want <= %g", c.name, res, exactTol)
		}
	}
}

func TestDenseInverseSingular(t *testing.T) {
	// pinvTol bounds ‖b − A x‖/‖b‖ for a consistent singular system solved by the pseudo-inverse.
	const pinvTol = 1e-12
	// A path-graph Laplacian (singular: constants are its null space) with one row duplicated
	// as a dependent unknown.
	const m = 6
	a := mat.NewDense(m, m, nil)
	for i := range m - 1 {
		a.Set(i, i, a.At(i, i)+1)
		a.Set(i+1, i+1, a.At(i+1, i+1)+1)
		a.Set(i, i+1, -1)
		a.Set(i+1, i, -1)
	}
	idx := []int32{0, 1, 2, 3, 4, 5}
	d, err := newDenseInverse(a, idx, true)
	if err != nil {
		t.Fatal(err)
	}
	b := []float64{1, -2, 0.5, 0.25, 0.75, -0.5} // sums to zero: in the range of A
	x := make([]float64, m)
	d.solveTo(x, b)
	ax := mat.NewVecDense(m, nil)
	ax.MulVec(a, mat.NewVecDense(m, x))
	var num, den float64
	for i := range m {
		num += (b[i] - ax.AtVec(i)) * (b[i] - ax.AtVec(i))
		den += b[i] * b[i]
	}
	if res := math.Sqrt(num / den); !(res <= pinvTol) {
		t.Errorf("residual %.3g, want <= %g", res, pinvTol)
	}
}

// TestMultigridSingularCoarseLevels solves the 1D Laplacian on one-node-wide strips along odd
// grid rows: the two coarse rows beside a strip interpolate to the same fine unknowns only, so
// the coarse operators are singular. With two strips on 7 rows the coarsest level is regular
// again; with one strip on 3 rows every level, the coarsest included, is singular and the
// coarsest is solved by its pseudo-inverse.
func TestMultigridSingularCoarseLevels(t *testing.T) {
	// maxIters bounds the iterations to 1e-10 (measured 4–7 for these 1D problems).
	const maxIters = 12
	rng := rand.New(rand.NewPCG(4, 4))
	for _, c := range []struct {
		ny   int
		rows []int
	}{{7, []int{1, 5}}, {3, []int{1}}} {
		nx := 301
		g := mesh.Grid{H: 1, NX: nx, NY: c.ny}
		var nodes []int32
		for _, j := range c.rows {
			for i := range nx {
				nodes = append(nodes, int32(j*nx+i))
			}
		}
		bld := NewBuilder(len(nodes), 3*len(nodes))
		for u, k := range nodes {
			i := int(k) % nx
			if i > 0 {
				bld.Add(u-1, -1)
			}
			bld.Add(u, 2)
			if i < nx-1 {
				bld.Add(u+1, -1)
			}
			bld.EndRow()
		}
		a := bld.CSR()
		for _, symmetric := range []bool{false, true} {
			mg, err := NewMultigrid(a, g, nodes, MGOptions{Symmetric: symmetric, Coarsest: 40})
			if err != nil {
				t.Fatal(err)
			}
			b := randVec(rng, a.N)
			x := make([]float64, a.N)
			var st Stats
			if symmetric {
				st, err = CG(context.Background(), a, b, x, mg, nil)
			} else {
				st, err = BiCGStab(context.Background(), a, b, x, mg, nil)
			}
			if err != nil {
				t.Fatalf("%d rows, symmetric %v, levels %v: %v", c.ny, symmetric, mg.Levels(), err)
			}
			if st.Iterations > maxIters {
				t.Errorf("%d rows, symmetric %v, levels %v: %d iterations, want <= %d", c.ny, symmetric, mg.Levels(), st.Iterations, maxIters)
			}
		}
	}
}

func TestMultigridNoAllocation(t *testing.T) {
	sys := mgPassageCylinder.psi(t, 16000)
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(2))
	for _, symmetric := range []bool{false, true} {
		mg, err := NewMultigrid(sys.A, sys.Mesh.Grid, sys.Nodes, MGOptions{Symmetric: symmetric})
		if err != nil {
			t.Fatal(err)
		}
		mg.minParallel = 0 // every level on two goroutines
		dst := make([]float64, sys.A.N)
		if allocs := testing.AllocsPerRun(10, func() { _ = mg.PreconSolve(dst, sys.B0) }); allocs != 0 {
			t.Errorf("symmetric %v: %v allocations per PreconSolve, want 0", symmetric, allocs)
		}
	}
}

// TestMultigridSharesHelpers checks that hierarchies share the package's worker team: making and
// using many of them starts no more than GOMAXPROCS − 1 helper goroutines in all.
func TestMultigridSharesHelpers(t *testing.T) {
	sys := mgPassageStep.psi(t, 4000)
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(4))
	before := runtime.NumGoroutine() - len(workTeam.helpers)
	live := make([]*Multigrid, 5)
	for k := range live {
		mg, err := NewMultigrid(sys.A, sys.Mesh.Grid, sys.Nodes, MGOptions{})
		if err != nil {
			t.Fatal(err)
		}
		mg.minParallel = 0
		if err := mg.PreconSolve(make([]float64, sys.A.N), sys.B0); err != nil {
			t.Fatal(err)
		}
		live[k] = mg
	}
	runtime.KeepAlive(live)
	if n := runtime.NumGoroutine(); n > before+3 {
		t.Errorf("%d goroutines with 5 hierarchies used on 4 threads, want at most %d", n, before+3)
	}
}

// recordTask marks the blocks it runs.
type recordTask struct{ hits []atomic.Int32 }

func (r *recordTask) runBlock(b int) { r.hits[b].Add(1) }

// TestTeamRunsEveryBlockOnce runs many tasks of varied sizes on a team, with pauses long enough
// for the helpers to park between some of them, from two goroutines at once, and checks that
// every block of every run ran exactly once before its run returned.
func TestTeamRunsEveryBlockOnce(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(3))
	tm := newTeam()
	defer tm.stop()
	var wg sync.WaitGroup
	for g := range 2 {
		wg.Go(func() {
			for r := range 300 {
				nb := 1 + (r*7+g)%9
				task := &recordTask{hits: make([]atomic.Int32, nb)}
				tm.run(task, nb, false)
				for b := range task.hits {
					if n := task.hits[b].Load(); n != 1 {
						t.Errorf("goroutine %d, run %d: block %d of %d ran %d times", g, r, b, nb, n)
						return
					}
				}
				if r%50 == 0 {
					time.Sleep(2 * teamSpin) // let the helpers park
				}
			}
		})
	}
	wg.Wait()
}

// TestTeamLateWake makes the runner late in waking the parked helpers (as when its thread is
// descheduled between starting a run and waking them), so that a helper that saw the run while
// spinning has done it and parked again before its flag is reached: the token it then gets
// must not count as a new run. (It did once: a helper ran a finished run's blocks, and a solve
// hung waiting for a count that had gone negative.)
func TestTeamLateWake(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(3))
	tm := newTeam()
	defer tm.stop()
	tm.spin = 5 * time.Microsecond
	tm.beforeWake = func() { time.Sleep(200 * time.Microsecond) }
	for r := range 2000 {
		task := &recordTask{hits: make([]atomic.Int32, 3)}
		tm.run(task, 3, false)
		for b := range task.hits {
			if n := task.hits[b].Load(); n != 1 {
				t.Fatalf("run %d: block %d ran %d times", r, b, n)
			}
		}
	}
}

func TestMultigridSameBitsAnyThreads(t *testing.T) {
	for _, ow := range []bool{false, true} {
		multigridSameBitsAnyThreads(t, ow)
	}
}

func multigridSameBitsAnyThreads(t *testing.T, ownWeights bool) {
	sys := mgPassageFoil.psi(t, 16000)
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	var ref []float64
	for _, procs := range []int{1, 2, 3} {
		runtime.GOMAXPROCS(procs)
		mg, err := NewMultigrid(sys.A, sys.Mesh.Grid, sys.Nodes, MGOptions{OperatorWeights: ownWeights})
		if err != nil {
			t.Fatal(err)
		}
		mg.minParallel = 0
		x := make([]float64, sys.A.N)
		if _, err := BiCGStab(context.Background(), sys.A, sys.B0, x, mg, nil); err != nil {
			t.Fatal(err)
		}
		if ref == nil {
			ref = x
			continue
		}
		for q := range x {
			if math.Float64bits(x[q]) != math.Float64bits(ref[q]) {
				t.Fatalf("operator weights %v, GOMAXPROCS %d: x[%d] = %v, want %v (GOMAXPROCS 1), bit for bit", ownWeights, procs, q, x[q], ref[q])
			}
		}
	}
}

// TestMultigridGuess checks the full-multigrid pass on an initial guess: on the φ system and on
// the ψ system of each passage it must cut the error of the system's own initial guess (root mean
// square, against a converged solve), leave a converged solution where it is, solve a system
// small enough for the direct solve outright, and allocate nothing once it has run.
func TestMultigridGuess(t *testing.T) {
	// minGain is the error reduction asked for. Measured at 40k cells: 650 to 1200 on the
	// channel with a cylinder, 68 (φ) and 5.5 (ψ) on the step, 5.6 (φ) and 68 (ψ) on the foil,
	// where the error left sits at the re-entrant corner and the trailing edge, which no
	// coarse grid resolves. A pass costs about half a V-cycle; a broken one gains about 1.
	const minGain = 4
	residual := func(a *GridMatrix, x, b []float64) float64 {
		r := make([]float64, len(b))
		a.MulVecTo(r, x)
		for i := range r {
			r[i] = b[i] - r[i]
		}
		return floats.Norm(r, 2)
	}
	// diff is the root-mean-square difference: the max norm would judge the pass by the few
	// nodes at a re-entrant corner or a trailing edge, which no interpolation resolves.
	diff := func(x, y []float64) float64 {
		return floats.Distance(x, y, 2) / math.Sqrt(float64(len(x)))
	}
	for _, p := range mgPassages {
		psi := p.psi(t, 40000)
		phi, err := AssemblePhi(psi.Mesh, psi.BC, nil, nil)
		if err != nil {
			t.Fatal(err)
		}
		for _, c := range []struct {
			name      string
			a         *GridMatrix
			b         []float64
			nodes     []int32
			guess     func([]float64)
			symmetric bool
		}{
			{"phi", phi.A, phi.B, phi.Nodes, phi.InitialGuess, true},
			{"psi", psi.A, psi.B0, psi.Nodes, psi.initialGuess, false},
		} {
			mg, err := NewMultigrid(c.a, psi.Mesh.Grid, c.nodes, MGOptions{Symmetric: c.symmetric})
			if err != nil {
				t.Fatal(err)
			}
			exact := make([]float64, c.a.N)
			solve := BiCGStab
			if c.symmetric {
				solve = CG
			}
			if _, err := solve(context.Background(), c.a, c.b, exact, mg, &Settings{Tolerance: 1e-11}); err != nil {
				t.Fatal(err)
			}
			x := make([]float64, c.a.N)
			c.guess(x)
			before := diff(x, exact)
			mg.Guess(x, c.b)
			after := diff(x, exact)
			if !(after*minGain <= before) {
				t.Errorf("%s %s: error %.3g after the pass, from %.3g: got a gain of %.3g, want at least %d", p.name, c.name, after, before, before/after, minGain)
			}
			// A converged solution stays where it is: its residual is 1e-11 of ‖b‖.
			x = slices.Clone(exact)
			mg.Guess(x, c.b)
			if d, norm := diff(x, exact), floats.Norm(exact, math.Inf(1)); d > 1e-9*norm {
				t.Errorf("%s %s: the pass moved a converged solution by %.3g (rms; max norm of the solution %.3g), want at most 1e-9 of it", p.name, c.name, d, norm)
			}
			if got := testing.AllocsPerRun(3, func() { mg.Guess(x, c.b) }); got != 0 {
				t.Errorf("%s %s: got %v allocations per pass, want 0", p.name, c.name, got)
			}
		}
	}
	t.Run("direct", func(t *testing.T) {
		sys := mgPassageCylinder.psi(t, 300)
		mg, err := NewMultigrid(sys.A, sys.Mesh.Grid, sys.Nodes, MGOptions{Coarsest: 1 << 20})
		if err != nil {
			t.Fatal(err)
		}
		x := make([]float64, sys.A.N)
		mg.Guess(x, sys.B0)
		// residualTol allows for the rounding of the dense solve.
		const residualTol = 1e-12
		if r := residual(sys.A, x, sys.B0); r > residualTol*floats.Norm(sys.B0, 2) {
			t.Errorf("residual %.3g after the direct solve, want at most %g of ‖b‖", r, residualTol)
		}
	})
	t.Run("lengths", func(t *testing.T) {
		sys := mgPassageCylinder.psi(t, 2000)
		mg, err := NewMultigrid(sys.A, sys.Mesh.Grid, sys.Nodes, MGOptions{})
		if err != nil {
			t.Fatal(err)
		}
		expectPanic(t, "len(x) = 3", func() { mg.Guess(make([]float64, 3), sys.B0) })
	})
}

// TestMultigridScratch checks that a hierarchy formed in set-up scratch gives the same V-cycle,
// bit for bit, as one that allocates, with scratch large enough for every level, for the first
// level alone and for none, and that it keeps no hold on the scratch: the caller's overwriting it
// afterwards changes nothing.
func TestMultigridScratch(t *testing.T) {
	sys := mgPassageStep.psi(t, 16000)
	spd := mgSPD(sys)
	for _, c := range psiAndSPD(sys.A.CSR(), spd) {
		vcycle := func(scratch []float64) []float64 {
			mg, err := NewMultigrid(c.a, sys.Mesh.Grid, sys.Nodes, MGOptions{Symmetric: c.symmetric, Scratch: scratch})
			if err != nil {
				t.Fatal(err)
			}
			for i := range scratch {
				scratch[i] = math.NaN()
			}
			x := make([]float64, c.a.N)
			if err := mg.PreconSolve(x, sys.B0); err != nil {
				t.Fatal(err)
			}
			return x
		}
		want := vcycle(nil)
		g := sys.Mesh.Grid
		first := 9 * (g.NX/2 + 4) * (g.NY/2 + 4) // the first coarse level's padded nodes
		for _, size := range []int{7 * c.a.N, first, first - 1, 10} {
			scratch := make([]float64, size)
			for i := range scratch {
				scratch[i] = math.Inf(1) // set-up must clear what it takes
			}
			got := vcycle(scratch)
			for q := range got {
				if math.Float64bits(got[q]) != math.Float64bits(want[q]) {
					t.Fatalf("%s, scratch of %d values: V-cycle gives %v at %d, want %v (no scratch), bit for bit", c.name, size, got[q], q, want[q])
				}
			}
		}
	}
}

// TestMultigridUniformSameBits checks that copying the template row into the uniform coarse
// nodes gives every coarse operator, bit for bit, that the general Galerkin sums give, on the ψ
// system and a symmetric one of each passage, and that there are uniform nodes to copy into.
func TestMultigridUniformSameBits(t *testing.T) {
	defer func() { galerkinUniform = true }()
	for _, p := range mgPassages {
		sys := p.psi(t, 40000)
		for _, c := range psiAndSPD(sys.A.CSR(), mgSPD(sys)) {
			for _, ow := range []bool{false, true} {
				build := func(uniform bool) (*Multigrid, int) {
					galerkinUniform = uniform
					mg, err := NewMultigrid(c.a, sys.Mesh.Grid, sys.Nodes, MGOptions{Symmetric: c.symmetric, OperatorWeights: ow})
					if err != nil {
						t.Fatal(err)
					}
					return mg, mg.levels[0].uniformNodes
				}
				want, _ := build(false)
				got, copied := build(true)
				if copied < c.a.N/8 {
					t.Errorf("%s %s: %d uniform coarse nodes, want at least %d (most of the first level)", p.name, c.name, copied, c.a.N/8)
				}
				for l, lv := range got.levels[:len(got.levels)-1] {
					for k := range lv.st {
						if lv.st[k] != want.levels[l].st[k] || math.Float64bits(lv.invD[k]) != math.Float64bits(want.levels[l].invD[k]) {
							t.Fatalf("%s %s (operator weights %v), level %d, node %d: got %v, want %v (general sums), bit for bit", p.name, c.name, ow, l, k, lv.st[k], want.levels[l].st[k])
						}
					}
				}
			}
		}
	}
}

// TestMultigridFusedSameBits checks that the fused passes of the finest level, serial or split
// into chunks, compute exactly what the separate steps compute, with one, two and three sweeps.
func TestMultigridFusedSameBits(t *testing.T) {
	sys := mgPassageStep.psi(t, 16000)
	spd := mgSPD(sys)
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, c := range psiAndSPD(sys.A.CSR(), spd) {
		for smooth := 1; smooth <= 3; smooth++ {
			for _, ow := range []bool{false, true} {
				mg, err := NewMultigrid(c.a, sys.Mesh.Grid, sys.Nodes, MGOptions{Symmetric: c.symmetric, Smooth: smooth, OperatorWeights: ow})
				if err != nil {
					t.Fatal(err)
				}
				fusedSameBits(t, fmt.Sprintf("%s, %d sweeps, operator weights %v", c.name, smooth, ow), mg, sys.B0)
			}
		}
	}
}

// fusedSameBits checks that mg's fused V-cycle, on 1, 2 and 5 goroutines, gives the bits of its
// separate steps on one.
func fusedSameBits(t *testing.T, name string, mg *Multigrid, b []float64) {
	t.Helper()
	mg.minParallel = 0
	want := make([]float64, len(b))
	runtime.GOMAXPROCS(1)
	mg.unfused = true
	if err := mg.PreconSolve(want, b); err != nil {
		t.Fatal(err)
	}
	mg.unfused = false
	got := make([]float64, len(b))
	for _, procs := range []int{1, 2, 5} {
		runtime.GOMAXPROCS(procs)
		if err := mg.PreconSolve(got, b); err != nil {
			t.Fatal(err)
		}
		for q := range got {
			if math.Float64bits(got[q]) != math.Float64bits(want[q]) {
				t.Fatalf("%s, GOMAXPROCS %d: fused V-cycle gives %v at %d, want %v (separate steps), bit for bit", name, procs, got[q], q, want[q])
			}
		}
	}
}

// mgNinePoint returns the bilinear finite-element Laplacian (8/3 on the diagonal, −1/3 to all
// eight neighbours) on the nodes of an nx × ny grid outside a hole, with the nodes beyond the
// grid and in the hole held at zero: a symmetric positive definite nine-point matrix.
func mgNinePoint(nx, ny int, hole func(i, j int) bool) (*CSR, mesh.Grid, []int32) {
	g := mesh.Grid{H: 1, NX: nx, NY: ny}
	unknown := make([]int, g.Len())
	var nodes []int32
	for k := range unknown {
		unknown[k] = -1
		if !hole(k%nx, k/nx) {
			unknown[k] = len(nodes)
			nodes = append(nodes, int32(k))
		}
	}
	bld := NewBuilder(len(nodes), 9*len(nodes))
	for u, k := range nodes {
		i, j := int(k)%nx, int(k)/nx
		bld.Add(u, 8.0/3)
		for dj := -1; dj <= 1; dj++ {
			for di := -1; di <= 1; di++ {
				ni, nj := i+di, j+dj
				if (di != 0 || dj != 0) && ni >= 0 && ni < nx && nj >= 0 && nj < ny && unknown[g.Index(ni, nj)] >= 0 {
					bld.Add(unknown[g.Index(ni, nj)], -1.0/3)
				}
			}
		}
		bld.EndRow()
	}
	return bld.CSR(), g, nodes
}

// TestMultigridSmootherVariants runs the paths the ψ and φ systems do not take by default: two
// sweeps per side, and nine-point rows on the finest level (four colours there).
func TestMultigridSmootherVariants(t *testing.T) {
	rng := rand.New(rand.NewPCG(2, 7))
	hole := func(i, j int) bool { return (i-60)*(i-60)+(j-25)*(j-25) < 100 }
	nine, g9, nodes9 := mgNinePoint(161, 51, hole)
	sys := mgPassageCylinder.psi(t, 16000)
	for _, c := range []struct {
		name      string
		a         *CSR
		g         mesh.Grid
		nodes     []int32
		o         MGOptions
		colours   int
		symmetric bool
	}{
		{"psi two sweeps", sys.A.CSR(), sys.Mesh.Grid, sys.Nodes, MGOptions{Smooth: 2}, 2, false},
		{"nine-point", nine, g9, nodes9, MGOptions{Symmetric: true}, 4, true},
		{"nine-point two sweeps", nine, g9, nodes9, MGOptions{Symmetric: true, Smooth: 2}, 4, true},
	} {
		mg, err := NewMultigrid(c.a, c.g, c.nodes, c.o)
		if err != nil {
			t.Fatal(err)
		}
		if mg.fine.ncolour != c.colours {
			t.Errorf("%s: %d colours on the finest level, want %d", c.name, mg.fine.ncolour, c.colours)
		}
		b := randVec(rng, c.a.N)
		x := make([]float64, c.a.N)
		var st Stats
		if c.symmetric {
			if asym := mgAsymmetry(mg, randVec(rng, c.a.N), randVec(rng, c.a.N)); asym > 1e-12 {
				t.Errorf("%s: asymmetry %.3g, want <= 1e-12 (rounding)", c.name, asym)
			}
			st, err = CG(context.Background(), c.a, b, x, mg, nil)
		} else {
			st, err = BiCGStab(context.Background(), c.a, b, x, mg, nil)
		}
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if st.Iterations > mgMaxIterations {
			t.Errorf("%s: %d iterations, want <= %d", c.name, st.Iterations, mgMaxIterations)
		}
	}
}

func TestMultigridRejects(t *testing.T) {
	rng := rand.New(rand.NewPCG(6, 6))
	none := func(i, j int) bool { return false }
	t.Run("far coupling", func(t *testing.T) {
		a, g, nodes := mgRandomGrid(rng, 30, 30, none)
		a.Col[a.RowPtr[100]] = int32(100 + 2*30) // two rows up
		slices.Sort(a.Col[a.RowPtr[100]:a.RowPtr[101]])
		if _, err := NewMultigrid(a, g, nodes, MGOptions{Coarsest: 10}); err == nil {
			t.Error("no error for a coupling two grid steps away")
		}
	})
	t.Run("wrapped coupling", func(t *testing.T) {
		// Node (29, 3) coupled to node (0, 4): one index apart, across the grid's edge.
		a, g, nodes := mgRandomGrid(rng, 30, 30, none)
		u := 3*30 + 29
		lo, hi := a.RowPtr[u], a.RowPtr[u+1]
		a.Col[hi-1] = int32(u + 1)
		slices.Sort(a.Col[lo:hi])
		if _, err := NewMultigrid(a, g, nodes, MGOptions{Coarsest: 10}); err == nil {
			t.Error("no error for a coupling across the grid's edge")
		}
	})
	t.Run("diagonal", func(t *testing.T) {
		a, g, nodes := mgRandomGrid(rng, 30, 30, none)
		for k := a.RowPtr[7]; k < a.RowPtr[8]; k++ {
			if a.Col[k] == 7 {
				a.Val[k] = -1
			}
		}
		if _, err := NewMultigrid(a, g, nodes, MGOptions{Coarsest: 10}); err == nil {
			t.Error("no error for a negative diagonal entry")
		}
	})
	a, g, nodes := mgRandomGrid(rng, 10, 10, none)
	expectPanic(t, "len(nodes)", func() { _, _ = NewMultigrid(a, g, nodes[1:], MGOptions{}) })
	swapped := slices.Clone(nodes)
	swapped[3], swapped[4] = swapped[4], swapped[3]
	expectPanic(t, "non-decreasing", func() { _, _ = NewMultigrid(a, g, swapped, MGOptions{}) })
	expectPanic(t, "outside", func() { _, _ = NewMultigrid(a, mesh.Grid{NX: 5, NY: 5}, nodes, MGOptions{}) })
	expectPanic(t, "must be >= 0", func() { _, _ = NewMultigrid(a, g, nodes, MGOptions{Smooth: -1}) })
	mg, err := NewMultigrid(a, g, nodes, MGOptions{Coarsest: 10})
	if err != nil {
		t.Fatal(err)
	}
	x := make([]float64, a.N)
	expectPanic(t, "len(dst)", func() { _ = mg.PreconSolve(x[1:], x) })
	expectPanic(t, "same slice", func() { _ = mg.PreconSolve(x, x) })
}

// mgMaxDiff returns max_i |x_i − y_i|.
func mgMaxDiff(x, y []float64) float64 {
	var d float64
	for i := range x {
		d = math.Max(d, math.Abs(x[i]-y[i]))
	}
	return d
}

// mgMaxAbs returns max_i |x_i|.
func mgMaxAbs(x []float64) float64 {
	var d float64
	for _, v := range x {
		d = math.Max(d, math.Abs(v))
	}
	return d
}

// TestMultigridOperatorWeights checks the interpolation weights taken from the operator
// (MGOptions.OperatorWeights): every level has nodes with weights of their own, all of them within
// two nodes of a row that is not the level's template; restriction is the transpose of
// interpolation, ⟨r, P x_c⟩ = ⟨Pᵀ r, x_c⟩, between the finest level and the first coarse one and
// between the first two coarse ones; and the symmetric V-cycle stays symmetric.
func TestMultigridOperatorWeights(t *testing.T) {
	// adjTol bounds |⟨r, P x_c⟩ − ⟨Pᵀ r, x_c⟩| relative to ‖r‖‖P x_c‖: the two sums add the
	// same products in different orders.
	const adjTol = 1e-13
	// symTol bounds |y·M⁻¹x − x·M⁻¹y| / (‖x‖‖M⁻¹y‖), as in TestMultigridSymmetricCG.
	const symTol = 1e-12
	rng := rand.New(rand.NewPCG(8, 1))
	for _, p := range mgPassages {
		sys := p.psi(t, 40000)
		for _, c := range psiAndSPD(sys.A.CSR(), mgSPD(sys)) {
			name := p.name + " " + c.name
			mg, err := NewMultigrid(c.a, sys.Mesh.Grid, sys.Nodes, MGOptions{Symmetric: c.symmetric, OperatorWeights: true})
			if err != nil {
				t.Fatal(err)
			}
			f := mg.fine
			l0, l1 := mg.levels[0], mg.levels[1]
			if l0.tr == nil || l1.tr == nil {
				t.Fatalf("%s: the first two coarse levels have no nodes with weights of their own", name)
			}
			// Locality on the finest level: a special node lies within two nodes of a row that is
			// not plain.
			irregular := map[int]bool{}
			for u := range f.a.N {
				if f.a.plain[u>>6]&(1<<(u&63)) == 0 {
					irregular[int(f.nodes[u])] = true
				}
			}
			for j := range f.ny {
				for _, sp := range l0.tr.row(j) {
					near := false
					for y := j - 2; y <= j+2 && !near; y++ {
						for x := int(sp.i) - 2; x <= int(sp.i)+2 && !near; x++ {
							near = irregular[y*f.nx+x]
						}
					}
					if !near {
						t.Fatalf("%s: node (%d, %d) has weights %v of its own, far from any irregular row", name, sp.i, j, sp.w)
					}
				}
			}
			// Finest ↔ first coarse level.
			xc := randCoarse(rng, l0)
			f.x = make([]float64, f.a.N)
			for j := range f.ny {
				f.prolongRow(j)
			}
			r := randVec(rng, f.a.N)
			clear(f.r)
			for u, k := range f.nodes {
				kk := int(k)
				f.r[(kk/f.nx+1)*f.stride+kk%f.nx+1] += r[u]
			}
			for j := range l0.ny {
				l0.restrictRow(j)
			}
			checkAdjoint(t, name+", finest to first coarse", r, f.x, l0.b, xc, adjTol)
			f.x = nil
			// First ↔ second coarse level.
			r0 := slices.Clone(randCoarse(rng, l0)) // a residual on the first coarse level
			xc = randCoarse(rng, l1)
			clear(l0.x)
			for j := range l0.ny {
				l0.prolongRow(j)
			}
			copy(l1.src, r0)
			for j := range l1.ny {
				l1.restrictRow(j)
			}
			checkAdjoint(t, name+", first to second coarse", r0, l0.x, l1.b, xc, adjTol)
			if !c.symmetric {
				continue
			}
			x, y := randVec(rng, f.a.N), randVec(rng, f.a.N)
			mx, my := make([]float64, f.a.N), make([]float64, f.a.N)
			mg.PreconSolve(mx, x)
			mg.PreconSolve(my, y)
			if d := math.Abs(dot(y, mx) - dot(x, my)); d > symTol*math.Sqrt(dot(x, x)*dot(my, my)) {
				t.Errorf("%s: |y·M⁻¹x − x·M⁻¹y| = %.3g, want a symmetric V-cycle", name, d)
			}
		}
	}
}

// randCoarse fills the active nodes of coarse level lv's x with random values (zero elsewhere)
// and returns lv.x.
func randCoarse(rng *rand.Rand, lv *gridLevel) []float64 {
	clear(lv.x)
	for k, inv := range lv.invD {
		if inv != 0 || lv.dense != nil {
			lv.x[k] = 2*rng.Float64() - 1
		}
	}
	return lv.x
}

// checkAdjoint checks ⟨r, px⟩ = ⟨b, xc⟩ to tol relative to ‖r‖‖px‖.
func checkAdjoint(t *testing.T, name string, r, px, b, xc []float64, tol float64) {
	t.Helper()
	lhs, rhs := dot(r, px), dot(b, xc)
	if d := math.Abs(lhs - rhs); !(d <= tol*math.Sqrt(dot(r, r)*dot(px, px))) {
		t.Errorf("%s: ⟨r, P x_c⟩ = %.15g, ⟨Pᵀ r, x_c⟩ = %.15g: restriction is not the transpose of interpolation", name, lhs, rhs)
	}
}

// mgCase is a system to test the multigrid method on: its matrix and whether it is symmetric.
type mgCase struct {
	name      string
	a         *CSR
	symmetric bool
}

// psiAndSPD returns a passage's ψ matrix and its symmetric counterpart (mgSPD) as test cases.
func psiAndSPD(psi, spd *CSR) []mgCase {
	return []mgCase{{"psi", psi, false}, {"spd", spd, true}}
}
