package solver

import (
	"context"
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/mat"

	"phipsi/internal/pages"
)

// The bordered ψ system. With K bodies whose constants C_b are unknown, ψ = ψ₀ + Σ C_b ψ_b
// satisfies A ψ = B0 + Σ C_b BK_b, and body b's condition (its circulation, or the Kutta
// condition at its trailing edge) is a linear form in the node values of ψ and in C. Appending C
// to the unknowns and the K conditions to the rows gives one system of N + K unknowns,
//
//	[ A   −BK ] [ x ]   [ B0 ]
//	[ L    E  ] [ C ] = [ g  ],
//
// with L the conditions' coefficients on the unknowns, E those on the constants (the known
// nodes' values in each body's field) and g the targets less the known nodes' values in the base
// field. One Krylov solve of it replaces the 1 + K superposition solves. The preconditioner is
// the block factorisation with A⁻¹ replaced by the multigrid V-cycle M⁻¹ (a fixed linear
// operator), and Z = M⁻¹ BK formed once:
//
//	y = M⁻¹ r,  c = S⁻¹ (s − L y),  x = y + Z c,  S = E + L Z,
//
// which is the exact inverse when M⁻¹ = A⁻¹: the block LU factorisation with an approximate Schur
// complement (M. Benzi, G. H. Golub, J. Liesen, Numerical solution of saddle point problems, Acta
// Numerica 14, 2005, on block triangular preconditioners; cited from memory). Each condition row
// is scaled by the largest of its coefficients, so that it is measured on the scale of the PDE
// rows.

// closureForm is one body's condition as a row of the bordered system: Σ w·x[unk] + Σ_j e_j·C_j
// = rhs, already scaled.
type closureForm struct {
	unk []int32
	w   []float64
	e   []float64
	rhs float64
}

// borderRow returns body b's condition as a bordered row, from the linear form Σ coef·ψ(node)
// + self·C_b = target over the nodes of its staircase, surface samples or Kutta fit.
func (sys *PsiSystem) borderRow(b int, c contour) (closureForm, error) {
	nb := len(sys.BK)
	var nodes []int32
	var coef []float64
	var self, target float64
	if cond := sys.BC.Bodies[b]; cond.Kutta {
		f, err := newKuttaFit(sys, b)
		if err != nil {
			return closureForm{}, err
		}
		nodes = f.nodes
		coef = make([]float64, len(nodes))
		for q := range nodes {
			if coef[q], err = f.a1(func(k int) float64 {
				if k == int(nodes[q]) {
					return 1
				}
				return 0
			}); err != nil {
				return closureForm{}, err
			}
		}
		one, err := f.a1(func(int) float64 { return 1 })
		if err != nil {
			return closureForm{}, err
		}
		self = -one
	} else {
		nodes, coef, self, target = c.Nodes, c.W, c.Self, cond.Circulation
	}
	row := closureForm{e: make([]float64, nb)}
	row.e[b] = self
	base := 0.0
	for q, k := range nodes {
		if u := sys.Unknown[k]; u >= 0 {
			row.unk = append(row.unk, u)
			row.w = append(row.w, coef[q])
			continue
		}
		base += coef[q] * sys.fieldValue(nil, -1, int(k))
		for j := range nb {
			row.e[j] += coef[q] * sys.fieldValue(nil, j, int(k))
		}
	}
	row.rhs = target - base
	scale := 0.0
	for _, v := range slices.Concat(row.w, row.e) {
		scale = math.Max(scale, math.Abs(v))
	}
	if !(scale > 0) || !isFinite(scale) {
		return closureForm{}, fmt.Errorf("solver: body %q: its condition has no finite non-zero coefficient", sys.Mesh.Geom.Bodies[b].Name)
	}
	for q := range row.w {
		row.w[q] /= scale
	}
	for j := range row.e {
		row.e[j] /= scale
	}
	row.rhs /= scale
	return row, nil
}

// value returns the row's left-hand side at y = (x, C).
func (r *closureForm) value(y []float64, n int) float64 {
	s := 0.0
	for q, u := range r.unk {
		s += r.w[q] * y[u]
	}
	for j, e := range r.e {
		s += e * y[n+j]
	}
	return s
}

// borderedMatrix is the operator of the bordered ψ system on y = (x, C).
type borderedMatrix struct {
	a    *GridMatrix
	n    int
	bk   []SparseVector
	rows []closureForm
}

// Len returns N + K.
func (m *borderedMatrix) Len() int { return m.n + len(m.rows) }

// MulVecTo computes dst = M y.
func (m *borderedMatrix) MulVecTo(dst, y []float64) {
	forBlocks(m.Len(), func(lo, hi int) { m.productRange(dst, y, lo, hi) })
}

// productRange writes rows [lo, hi) of M y into dst.
func (m *borderedMatrix) productRange(dst, y []float64, lo, hi int) {
	m.productRangeInto(dst[lo:hi], y, lo, hi)
}

func (m *borderedMatrix) mulVecDots2Range(dst, x, y []float64, lo, hi int) (float64, float64) {
	m.productRange(dst, x, lo, hi)
	return dots2(dst, y, lo, hi)
}

func (m *borderedMatrix) residualRange(dst, b, x []float64, lo, hi int) float64 {
	var buf [blockRows]float64
	ax := buf[:hi-lo]
	m.productRangeInto(ax, x, lo, hi)
	return subtractRange(dst, b, ax, lo)
}

// productRangeInto writes rows [lo, hi) of M y into out (out[q] is row lo + q).
func (m *borderedMatrix) productRangeInto(out, y []float64, lo, hi int) {
	if top := min(hi, m.n); lo < top {
		m.a.productTo(out[:top-lo], y, lo, top)
		for b, v := range m.bk {
			c := y[m.n+b]
			q, _ := slices.BinarySearch(v.Index, int32(lo))
			for ; q < len(v.Index) && int(v.Index[q]) < top; q++ {
				out[int(v.Index[q])-lo] -= c * v.Val[q]
			}
		}
	}
	for r := max(lo, m.n); r < hi; r++ {
		out[r-lo] = m.rows[r-m.n].value(y, m.n)
	}
}

// borderedPrecon is the block preconditioner of the bordered system (see the top of the file).
type borderedPrecon struct {
	mg *Multigrid
	m  *borderedMatrix
	// z holds M⁻¹ BK_b rounded to float32, and S is formed from the rounded columns: the
	// preconditioner stays a fixed linear operator, and the columns cost half the memory (a
	// 16M-cell channel's body 64 MB less to map) and half the reading in every application.
	z    [][]float32
	sInv *mat.Dense // S⁻¹
	t, c []float64
	add  addTask
}

// addTask adds Σ_b c_b z_b to x, block by block on the worker team.
type addTask struct {
	x []float64
	z [][]float32
	c []float64
}

func (t *addTask) runBlock(blk int) {
	lo := blk * blockRows
	x := t.x[lo:min(lo+blockRows, len(t.x))]
	for b, c := range t.c {
		if c == 0 {
			continue
		}
		z := t.z[b][lo : lo+len(x)]
		for u := range x {
			x[u] += c * float64(z[u])
		}
	}
}

// newBorderedPrecon forms Z and S⁻¹. It overwrites bk and tmp, each of length m.n, with each
// column of B K and its preconditioned value in turn.
func newBorderedPrecon(mg *Multigrid, m *borderedMatrix, bk, tmp []float64) (*borderedPrecon, error) {
	nb := len(m.rows)
	p := &borderedPrecon{mg: mg, m: m, z: make([][]float32, nb), t: make([]float64, nb), c: make([]float64, nb)}
	s := mat.NewDense(nb, nb, nil)
	for b := range nb {
		p.z[b] = pages.Make[float32](m.n)
		m.bk[b].DenseTo(bk)
		if err := mg.PreconSolve(tmp, bk); err != nil {
			return nil, err
		}
		for u, v := range tmp {
			p.z[b][u] = float32(v)
		}
	}
	for r := range nb {
		row := &m.rows[r]
		for b := range nb {
			v := row.e[b]
			for q, u := range row.unk {
				v += row.w[q] * float64(p.z[b][u])
			}
			s.Set(r, b, v)
		}
	}
	var inv mat.Dense
	if err := inv.Inverse(s); err != nil {
		return nil, fmt.Errorf("solver: the bodies' conditions do not fix their constants: %w", err)
	}
	p.sInv = &inv
	return p, nil
}

// PreconSolve writes the preconditioned y = (x, c) for the residual (r, s) into dst.
func (p *borderedPrecon) PreconSolve(dst, res []float64) error {
	n := p.m.n
	if err := p.mg.PreconSolve(dst[:n], res[:n]); err != nil {
		return err
	}
	for r := range p.m.rows {
		row := &p.m.rows[r]
		s := res[n+r]
		for q, u := range row.unk {
			s -= row.w[q] * dst[u]
		}
		p.t[r] = s
	}
	for b := range p.c {
		v := 0.0
		for r, t := range p.t {
			v += p.sInv.At(b, r) * t
		}
		p.c[b] = v
	}
	p.add = addTask{x: dst[:n], z: p.z, c: p.c}
	workTeam.run(&p.add, ceilDiv(n, blockRows), n < krylovMinParallel)
	p.add = addTask{}
	copy(dst[n:], p.c)
	return nil
}

// solveBordered solves the bordered system by BiCGStab with the block preconditioner, for
// y = (x, C) from the values y holds.
func (sys *PsiSystem) solveBordered(ctx context.Context, mg *Multigrid, ws *Workspace, contours []contour, y []float64, set *Settings) (Stats, error) {
	n := len(sys.Nodes)
	nb := len(sys.BK)
	m := &borderedMatrix{a: sys.A, n: n, bk: sys.BK, rows: make([]closureForm, nb)}
	for b := range nb {
		var err error
		if m.rows[b], err = sys.borderRow(b, contours[b]); err != nil {
			return Stats{}, err
		}
	}
	// The columns of B K and their preconditioned values pass through two work vectors of the
	// solve, which writes them before reading.
	ws.ReserveBiCGStab(n + nb)
	p, err := newBorderedPrecon(mg, m, ws.vector(0, n), ws.vector(1, n))
	if err != nil {
		return Stats{}, err
	}
	var rhs []float64
	if cap(sys.B0) >= n+nb {
		rhs = sys.B0[:n+nb] // AssemblePsi leaves room for the conditions' rows
	} else {
		rhs = append(slices.Clip(sys.B0), make([]float64, nb)...)
	}
	for b := range nb {
		rhs[n+b] = m.rows[b].rhs
	}
	return ws.BiCGStab(ctx, m, rhs, y, p, set)
}
