package solver

import (
	"fmt"

	"phipsi/internal/pages"
	"phipsi/internal/par"
)

// Kernels of a coarse level, run block by block by gridLevel.runBlock.
const (
	gridInit     = iota // the first half-sweep of a V-cycle, from x = 0 (see gridLevel.runBlock)
	gridSmooth          // a half-sweep: Gauss–Seidel on the rows of one parity (see runBlock)
	gridResidual        // r = b − A x on every node and zeros on the padding
	gridRestrict        // b = Pᵀ r_fine from the level above
	gridProlong         // x += P x_coarse from the level below
)

// stencil holds the nine coefficients of a node's row on a coarse level: entry (dj+1)·3 + di+1
// couples node (i, j) to node (i+di, j+dj); entry 4 is the diagonal. The Galerkin products are
// formed in float64 (stencil64) and stored rounded to float32, which halves the memory and the
// traffic of the coarse levels; the smoother and the residual both use the rounded operator, so
// each level is consistent in itself (and exactly symmetric when A is, see finish). Rounding
// changes the coarse operators by a relative 6e-8, far below anything the V-cycle resolves.
type stencil [9]float32

// stencil64 is a stencil during setup.
type stencil64 [9]float64

// gridLevel is a coarse level of a Multigrid: a Galerkin nine-point operator on every node of
// an nx × ny grid, stored with padding (one node left and below, two right and above, all zero)
// so that no kernel tests for the grid's edge. Node (i, j) has index (j+1)·sx + i + 1. A node
// that no unknown of the level above interpolates from is inactive: its row and its
// coefficients in other rows are zero, invD is 0 and its x stays 0 after smoothing.
type gridLevel struct {
	nx, ny, sx int
	st         []stencil
	st64       []stencil64 // the Galerkin operator in float64, during setup only
	invD       []float64   // 1/A_kk at active nodes, 0 elsewhere
	x, b       []float64
	r          []float64 // residual, in this level's layout (shared with the other levels)
	src        []float64 // residual of the level above, padded, rows of srcStride
	srcStride  int
	coarser    *gridLevel    // the level below, nil on the coarsest
	dense      *denseInverse // the exact solve of the coarsest level, nil on the others
	active     int           // number of active nodes
	// std is the level's most common stencil, and stdRuns[stdRow[j]:stdRow[j+1]] the runs
	// [i0, i1) of row j's nodes that have it (see standardRuns).
	std       standardStencil
	stdRow    []int32
	stdRuns   [][2]int32
	blockRows int
	nblocks   int
	// uniform marks, during set-up, the nodes whose float64 row is tmpl, the level's template:
	// every node of the level above that such a node interpolates to has that level's template
	// row (on the finest level, the plain five-point row), so the Galerkin product of the row is
	// formed once (see galerkinTask). Nil when the level has no template.
	uniform      []bool
	tmpl         stencil64
	uniformNodes int // the number of uniform nodes, kept after set-up
	// tr holds the own interpolation weights of the nodes of the level above that interpolate
	// from this one (nil: all bilinear).
	tr *transfer

	op, c int // the current run's kernel and colour
}

// newGridLevel allocates coarse level l (0 the first) of mg, of nx × ny nodes.
func (mg *Multigrid) newGridLevel(l, nx, ny int) *gridLevel {
	sx := nx + 3
	size := sx * (ny + 3)
	lv := &gridLevel{
		nx: nx, ny: ny, sx: sx,
		st64: mg.setupStencils(l, size),
		invD: pages.Make[float64](size),
		x:    pages.Make[float64](size),
		b:    pages.Make[float64](size),
	}
	lv.blockRows = blockRowsFor(nx)
	lv.nblocks = ceilDiv(ny, lv.blockRows)
	return lv
}

// rows returns the grid rows of block blk.
func (lv *gridLevel) rows(blk int) (j0, j1 int) {
	j0 = blk * lv.blockRows
	return j0, min(lv.ny, j0+lv.blockRows)
}

// runBlock runs the current kernel on block blk.
func (lv *gridLevel) runBlock(blk int) {
	j0, j1 := lv.rows(blk)
	switch lv.op {
	// Colour c holds the nodes with i ≡ c mod 2 and j ≡ c/2 mod 2. A nine-point row couples a
	// node only to rows j − 1, j, j + 1, so the two colours of one row parity depend on each other
	// but on none of the same parity's other rows: a Gauss–Seidel sweep in the colour order
	// 0, 1, 2, 3 is the even rows (nodes of even i, then odd i) followed by the odd rows, each
	// half-sweep a pass over its rows in any row order and the same bits as four colour passes.
	// Reversed (3, 2, 1, 0) it is the odd rows (odd i, then even i), then the even rows. Each
	// row's stencils are read once per sweep while they are in cache, instead of once per colour.
	case gridInit:
		// Colours 0 and 1 from x = 0: every odd row is 0, and the even rows' odd nodes see only
		// their own row's even nodes.
		for j := j0; j < j1; j++ {
			lv.initRow(j)
		}
	case gridSmooth:
		// Rows j ≡ c mod 2, nodes i ≡ c/2 mod 2 first, then the others.
		for j := j0 + (j0^lv.c)&1; j < j1; j += 2 {
			lv.smoothRow(j, lv.c>>1)
			lv.smoothRow(j, 1-lv.c>>1)
		}
	case gridResidual:
		if blk == 0 {
			clear(lv.r[:lv.sx])
		}
		for j := j0; j < j1; j++ {
			lv.residualRow(j)
		}
		if j1 == lv.ny {
			clear(lv.r[(lv.ny+1)*lv.sx : (lv.ny+3)*lv.sx])
		}
	case gridRestrict:
		for j := j0; j < j1; j++ {
			lv.restrictRow(j)
		}
	case gridProlong:
		for j := j0; j < j1; j++ {
			lv.prolongRow(j)
		}
	}
}

// initRow runs the first half-sweep of a V-cycle on row j, from x = 0: colour 0 (even i, even j)
// takes x = b/A_kk, colour 1 (odd i, even j) its Gauss–Seidel update from the row's colour-0
// values, and the odd rows 0. The update omits the terms of rows j ± 1, which are zero; their
// sums are ±0, which leave the sum of the row's own terms unchanged, so the bits are those of
// the full stencil.
func (lv *gridLevel) initRow(j int) {
	row := (j+1)*lv.sx + 1
	x := lv.x[row : row+lv.nx]
	if j&1 != 0 {
		clear(x)
		return
	}
	// An even row's nodes are all written below: the even ones first, then the odd ones from
	// them.
	b := lv.b[row : row+lv.nx]
	inv := lv.invD[row : row+lv.nx]
	b, inv = b[:len(x)], inv[:len(x)]
	for i := 0; i < len(x); i += 2 {
		x[i] = b[i] * inv[i]
	}
	v := lv.view(j)
	lv.spans(j, func(lo, hi int, std bool) {
		if std {
			initSpanStd(&v, &lv.std, lo, hi)
		} else {
			initSpan(&v, lo, hi)
		}
	})
}

// initSpan does initRow's update of the odd nodes of [lo, hi).
func initSpan(v *rowView, lo, hi int) {
	st, x, b, inv := v.st[lo:hi], v.x[lo:hi], v.b[lo:hi], v.inv[lo:hi]
	w, e := v.c0[lo:hi], v.c2[lo:hi] // x at i − 1 and i + 1
	x, b, inv, w, e = x[:len(st)], b[:len(st)], inv[:len(st)], w[:len(st)], e[:len(st)]
	for i := uint(1-lo&1) & 1; i < uint(len(st)); i += 2 {
		s := &st[i]
		t := float64(s[3])*w[i] + float64(s[5])*e[i]
		x[i] = (b[i] - t) * inv[i]
	}
}

// initSpanStd is initSpan on nodes with the level's standard stencil.
func initSpanStd(v *rowView, c *standardStencil, lo, hi int) {
	x, b := v.x[lo:hi], v.b[lo:hi]
	w, e := v.c0[lo:hi], v.c2[lo:hi]
	b, w, e = b[:len(x)], w[:len(x)], e[:len(x)]
	c3, c5, inv := c.a[3], c.a[5], c.inv
	for i := uint(1-lo&1) & 1; i < uint(len(x)); i += 2 {
		t := c3*w[i] + c5*e[i]
		x[i] = (b[i] - t) * inv
	}
}

// rowView holds, for one grid row, the slices that a nine-point kernel reads, all of length nx:
// entry i of m0, m1, m2 (c0, c1, c2; p0, p1, p2) is the x of node (i−1, j−1), (i, j−1),
// (i+1, j−1) (the same in row j; in row j+1).
type rowView struct {
	st                                 []stencil
	x, b, inv                          []float64
	m0, m1, m2, c0, c1, c2, p0, p1, p2 []float64
}

// view returns the row slices of row j.
func (lv *gridLevel) view(j int) rowView {
	sx, n := lv.sx, lv.nx
	row := (j+1)*sx + 1
	at := func(off int) []float64 { return lv.x[row+off : row+off+n] }
	return rowView{
		st: lv.st[row : row+n], x: at(0), b: lv.b[row : row+n], inv: lv.invD[row : row+n],
		m0: at(-sx - 1), m1: at(-sx), m2: at(-sx + 1),
		c0: at(-1), c1: at(0), c2: at(1),
		p0: at(sx - 1), p1: at(sx), p2: at(sx + 1),
	}
}

// smoothRow updates the nodes i0, i0+2, … (i0 = 0 or 1) of row j by Gauss–Seidel,
// x_k = (b_k − Σ_{d≠k} A_kd x_d)/A_kk; the neighbours all have other colours.
func (lv *gridLevel) smoothRow(j, i0 int) {
	v := lv.view(j)
	lv.spans(j, func(lo, hi int, std bool) {
		if std {
			smoothSpanStd(&v, &lv.std, lo, hi, i0)
		} else {
			smoothSpan(&v, lo, hi, i0)
		}
	})
}

// smoothSpan does smoothRow on the nodes of [lo, hi).
func smoothSpan(v *rowView, lo, hi, i0 int) {
	st, x, b, inv := v.st[lo:hi], v.x[lo:hi], v.b[lo:hi], v.inv[lo:hi]
	m0, m1, m2 := v.m0[lo:hi], v.m1[lo:hi], v.m2[lo:hi]
	c0, c2 := v.c0[lo:hi], v.c2[lo:hi]
	p0, p1, p2 := v.p0[lo:hi], v.p1[lo:hi], v.p2[lo:hi]
	x, b, inv = x[:len(st)], b[:len(st)], inv[:len(st)]
	m0, m1, m2, c0, c2 = m0[:len(st)], m1[:len(st)], m2[:len(st)], c0[:len(st)], c2[:len(st)]
	p0, p1, p2 = p0[:len(st)], p1[:len(st)], p2[:len(st)]
	for i := uint(i0^lo) & 1; i < uint(len(st)); i += 2 {
		s := &st[i]
		t := (float64(s[0])*m0[i] + float64(s[1])*m1[i] + float64(s[2])*m2[i]) +
			(float64(s[3])*c0[i] + float64(s[5])*c2[i]) +
			(float64(s[6])*p0[i] + float64(s[7])*p1[i] + float64(s[8])*p2[i])
		x[i] = (b[i] - t) * inv[i]
	}
}

// smoothSpanStd is smoothSpan on nodes with the level's standard stencil: the same sums with
// the coefficients held in registers (on amd64 with AVX2, four nodes to a step, two updated).
func smoothSpanStd(v *rowView, c *standardStencil, lo, hi, i0 int) {
	q := (i0 ^ lo) & 1
	if useAVX2 {
		if steps := (hi - lo - q) / 4; steps > 0 {
			k := lo + q
			smoothStdStepsAVX2(&v.x[k], &v.b[k], &v.m1[k], &v.p1[k], c, steps)
			q += 4 * steps
		}
	}
	smoothSpanStdGo(v, c, lo, hi, q)
}

// smoothSpanStdGo is smoothSpanStd in scalar code, from node lo + q on.
func smoothSpanStdGo(v *rowView, c *standardStencil, lo, hi, q int) {
	x, b := v.x[lo:hi], v.b[lo:hi]
	m0, m1, m2 := v.m0[lo:hi], v.m1[lo:hi], v.m2[lo:hi]
	c0, c2 := v.c0[lo:hi], v.c2[lo:hi]
	p0, p1, p2 := v.p0[lo:hi], v.p1[lo:hi], v.p2[lo:hi]
	b = b[:len(x)]
	m0, m1, m2, c0, c2 = m0[:len(x)], m1[:len(x)], m2[:len(x)], c0[:len(x)], c2[:len(x)]
	p0, p1, p2 = p0[:len(x)], p1[:len(x)], p2[:len(x)]
	a0, a1, a2, a3, a5, a6, a7, a8, inv := c.a[0], c.a[1], c.a[2], c.a[3], c.a[5], c.a[6], c.a[7], c.a[8], c.inv
	for i := uint(q); i < uint(len(x)); i += 2 {
		t := (a0*m0[i] + a1*m1[i] + a2*m2[i]) +
			(a3*c0[i] + a5*c2[i]) +
			(a6*p0[i] + a7*p1[i] + a8*p2[i])
		x[i] = (b[i] - t) * inv
	}
}

// residualRow writes r = b − A x for row j and zeros on the row's padding.
func (lv *gridLevel) residualRow(j int) {
	n := lv.nx
	row := (j+1)*lv.sx + 1
	rp := lv.r[row-1 : row+n+2]
	rp[0], rp[n+1], rp[n+2] = 0, 0, 0
	r := rp[1 : n+1]
	v := lv.view(j)
	lv.spans(j, func(lo, hi int, std bool) {
		if std {
			residualSpanStd(&v, &lv.std, r, lo, hi)
		} else {
			residualSpan(&v, r, lo, hi)
		}
	})
}

// residualSpan does residualRow on the nodes of [lo, hi), into r (the row's residual).
func residualSpan(v *rowView, r []float64, lo, hi int) {
	st, b, rr := v.st[lo:hi], v.b[lo:hi], r[lo:hi]
	m0, m1, m2 := v.m0[lo:hi], v.m1[lo:hi], v.m2[lo:hi]
	c0, c1, c2 := v.c0[lo:hi], v.c1[lo:hi], v.c2[lo:hi]
	p0, p1, p2 := v.p0[lo:hi], v.p1[lo:hi], v.p2[lo:hi]
	b, rr = b[:len(st)], rr[:len(st)]
	m0, m1, m2, c0, c1, c2 = m0[:len(st)], m1[:len(st)], m2[:len(st)], c0[:len(st)], c1[:len(st)], c2[:len(st)]
	p0, p1, p2 = p0[:len(st)], p1[:len(st)], p2[:len(st)]
	for i := range st {
		s := &st[i]
		t := (float64(s[0])*m0[i] + float64(s[1])*m1[i] + float64(s[2])*m2[i]) +
			(float64(s[3])*c0[i] + float64(s[4])*c1[i] + float64(s[5])*c2[i]) +
			(float64(s[6])*p0[i] + float64(s[7])*p1[i] + float64(s[8])*p2[i])
		rr[i] = b[i] - t
	}
}

// residualSpanStd is residualSpan on nodes with the level's standard stencil (on amd64 with
// AVX2, four nodes to a step).
func residualSpanStd(v *rowView, c *standardStencil, r []float64, lo, hi int) {
	if useAVX2 {
		if steps := (hi - lo) / 4; steps > 0 {
			residualStdStepsAVX2(&r[lo], &v.c1[lo], &v.b[lo], &v.m1[lo], &v.p1[lo], c, steps)
			lo += 4 * steps
		}
	}
	residualSpanStdGo(v, c, r, lo, hi)
}

// residualSpanStdGo is residualSpanStd in scalar code.
func residualSpanStdGo(v *rowView, c *standardStencil, r []float64, lo, hi int) {
	b, rr := v.b[lo:hi], r[lo:hi]
	m0, m1, m2 := v.m0[lo:hi], v.m1[lo:hi], v.m2[lo:hi]
	c0, c1, c2 := v.c0[lo:hi], v.c1[lo:hi], v.c2[lo:hi]
	p0, p1, p2 := v.p0[lo:hi], v.p1[lo:hi], v.p2[lo:hi]
	rr = rr[:len(b)]
	m0, m1, m2, c0, c1, c2 = m0[:len(b)], m1[:len(b)], m2[:len(b)], c0[:len(b)], c1[:len(b)], c2[:len(b)]
	p0, p1, p2 = p0[:len(b)], p1[:len(b)], p2[:len(b)]
	a := c.a
	for i := range b {
		t := (a[0]*m0[i] + a[1]*m1[i] + a[2]*m2[i]) +
			(a[3]*c0[i] + a[4]*c1[i] + a[5]*c2[i]) +
			(a[6]*p0[i] + a[7]*p1[i] + a[8]*p2[i])
		rr[i] = b[i] - t
	}
}

// restrictRow computes b = Pᵀ r for row j from the residual of the level above: full weighting
// of the nine fine nodes around fine node (2i, 2j), weights 1 at the centre, ½ on the edges and
// ¼ at the corners. Fine rows 2j−1, 2j, 2j+1 are padded rows 2j, 2j+1, 2j+2, fine column 2i+a is
// padded column 2i+a+1, so coarse node i reads padded columns k = 2i, 2i+1, 2i+2.
func (lv *gridLevel) restrictRow(j int) {
	sf := lv.srcStride
	row := (j+1)*lv.sx + 1
	b := lv.b[row : row+lv.nx]
	// Column k+a of fine row r as f[r][a][k], every slice of the same length.
	var f [3][3][]float64
	for r := range 3 {
		base := (2*j + r) * sf
		for a := range 3 {
			f[r][a] = lv.src[base+a : base+sf]
		}
	}
	n := len(f[0][2])
	i0 := 0
	if useAVX2 {
		// A step reads fine columns 2i to 2i+9 of its first node i.
		if steps := min(len(b)/4, (sf-2)/8); steps > 0 {
			restrictStepsAVX2(&b[0], &f[0][0][0], &f[1][0][0], &f[2][0][0], steps)
			i0 = 4 * steps
		}
	}
	m0, m1, m2 := f[0][0][:n], f[0][1][:n], f[0][2][:n]
	c0, c1, c2 := f[1][0][:n], f[1][1][:n], f[1][2][:n]
	p0, p1, p2 := f[2][0][:n], f[2][1][:n], f[2][2][:n]
	// The weights are those of two passes of ½, 1, ½: down each fine column, then along the row.
	for i := i0; i < len(b); i++ {
		k := 2 * i
		if k >= n {
			break
		}
		v0, v1, v2 := c0[k]+0.5*(m0[k]+p0[k]), c1[k]+0.5*(m1[k]+p1[k]), c2[k]+0.5*(m2[k]+p2[k])
		b[i] = v1 + 0.5*(v0+v2)
	}
	// The fine nodes with their own weights add what those weights differ by.
	for jf := 2*j - 1; jf <= 2*j+1; jf++ {
		for _, sp := range lv.tr.row(jf) {
			i := int(sp.i)
			r := lv.src[(jf+1)*sf+i+1]
			bw := bilinear(i, jf)
			cb := j - jf>>1
			if cb < 0 || cb > 1 {
				continue
			}
			for ca := range 2 {
				if d := sp.w[cb][ca] - bw[cb][ca]; d != 0 {
					b[i>>1+ca] += d * r
				}
			}
		}
	}
}

// prolongRow adds the bilinear interpolation of the level below to row j: node i of the row
// lies between coarse columns i>>1 and (i+1)>>1 (the same one when i is even), and likewise
// for rows (see fineLevel.prolongRow). Inactive nodes receive values too; no active row couples
// to them and the smoothing that follows resets them to 0.
func (lv *gridLevel) prolongRow(j int) {
	co := lv.coarser
	cs := co.sx
	row := (j+1)*lv.sx + 1
	x := lv.x[row : row+lv.nx]
	j0, j1 := j>>1, (j+1)>>1
	r0 := co.x[(j0+1)*cs+1 : (j0+2)*cs]
	r1 := co.x[(j1+1)*cs+1 : (j1+2)*cs]
	r1 = r1[:len(r0)]
	prolongPairs(x, r0, r1)
	addOwnWeights(x, co.tr.row(j), j, r0, r1)
}

// addOwnWeights adds to the unknowns x of fine row j (x[i] at column i) what the special nodes'
// weights differ from the bilinear ones by, times the coarse values of rows ⌊j/2⌋ (r0) and
// ⌊j/2⌋ + 1 (r1; only read where a weight asks for it).
func addOwnWeights(x []float64, row []special, j int, r0, r1 []float64) {
	for _, sp := range row {
		i := int(sp.i)
		bw := bilinear(i, j)
		for cb, r := range [2][]float64{r0, r1} {
			for ca := range 2 {
				if d := sp.w[cb][ca] - bw[cb][ca]; d != 0 {
					x[i] += d * r[i>>1+ca]
				}
			}
		}
	}
}

// prolongPairs adds to the fine row x the bilinear interpolation between the coarse rows r0 and
// r1 (the same row for an even fine row): fine node 2m takes the mean of r0[m] and r1[m], fine
// node 2m+1 the mean of the four values at m and m+1.
func prolongPairs(x, r0, r1 []float64) {
	xo := x[min(1, len(x)):] // odd nodes: xo[2m] is node 2m+1
	xe := x[:len(xo)]        // even nodes with an odd node after them
	ra := r0[min(1, len(r0)):]
	rb := r1[min(1, len(r1)):]
	r0, r1 = r0[:len(ra)], r1[:len(ra)]
	rb = rb[:len(ra)]
	m0 := 0
	if useAVX2 {
		if steps := min(len(ra), len(xo)/2) / 4; steps > 0 {
			prolongStepsAVX2(&x[0], &r0[0], &r1[0], steps)
			m0 = 4 * steps
		}
	}
	for m := m0; m < len(ra); m++ {
		i := 2 * m
		if i >= len(xo) {
			break
		}
		xe[i] += 0.5 * (r0[m] + r1[m])
		xo[i] += 0.25 * ((r0[m] + ra[m]) + (r1[m] + rb[m]))
	}
	if n := len(x); n%2 == 1 {
		// The last node is even: x[n−1] from coarse column (n−1)/2 alone.
		m := (n - 1) / 2
		x[n-1] += 0.5 * (r0[m] + r1[m])
	}
}

// coarsen builds the level below lv, A_c = Pᵀ A P.
func (lv *gridLevel) coarsen(mg *Multigrid) (*gridLevel, error) {
	co := mg.newGridLevel(len(mg.levels), lv.nx/2+1, lv.ny/2+1)
	task := &galerkinTask{coarse: co, fineNX: lv.nx, fineNY: lv.ny, errs: make([]error, co.nblocks), active: make([]int, co.nblocks)}
	var buf [9]stepEntry
	if lv.uniform != nil {
		// The template row's product with P, once for each parity of its node.
		ent := stencilEntries(&lv.tmpl, buf[:0])
		for q := range task.tmplAP {
			task.tmplAP[q] = rowAP(q&1, q>>1, ent)
		}
		task.uniformRow = func(j int, row []bool) {
			k := (j+1)*lv.sx + 1
			copy(row, lv.uniform[k:k+lv.nx])
		}
	}
	if mg.ownWeights {
		co.tr = newTransfer(lv.nx, lv.ny, func(visit func(i, j int)) {
			for j := range lv.ny {
				for i := range lv.nx {
					if k := (j+1)*lv.sx + i + 1; lv.invD[k] != 0 && (lv.uniform == nil || !lv.uniform[k]) {
						visit(i, j)
					}
				}
			}
		}, func(i, j int, buf []stepEntry) ([]stepEntry, bool) {
			k := (j+1)*lv.sx + i + 1
			if lv.invD[k] == 0 {
				return nil, false
			}
			return stencilEntries(&lv.st64[k], buf), true
		})
	}
	task.tr = co.tr
	task.entries = func(j int, visit func(i int, ent []stepEntry, ap *[3][3]float64)) {
		var buf [9]stepEntry
		for i := range lv.nx {
			k := (j+1)*lv.sx + i + 1
			switch {
			case lv.invD[k] == 0:
			case lv.uniform != nil && lv.uniform[k] && !task.tr.touches(i, j):
				visit(i, nil, &task.tmplAP[i&1|(j&1)<<1])
			default:
				visit(i, stencilEntries(&lv.st64[k], buf[:0]), nil)
			}
		}
	}
	if err := task.run(mg); err != nil {
		return nil, err
	}
	co.tr.dropSetUp()
	return co, nil
}

// stencilEntries appends the non-zero coefficients of s to ent, in stencil order.
func stencilEntries(s *stencil64, ent []stepEntry) []stepEntry {
	for d, a := range s {
		if a != 0 {
			ent = append(ent, stepEntry{int8(d%3 - 1), int8(d/3 - 1), a})
		}
	}
	return ent
}

// finishRowsMin is the number of padded rows from which finish shares its rows out.
const finishRowsMin = 64

// finish stores the level's operator for the V-cycle: symmetrised when symmetric is set
// (A_c(C, D) and A_c(D, C) are equal in exact arithmetic and are made equal bit for bit, so that
// the level's Gauss–Seidel sweeps are exact adjoints of each other), rounded to float32, with
// invD the inverse of the rounded diagonal. The float64 operator is dropped.
func (lv *gridLevel) finish(symmetric bool) error {
	lv.st = pages.Make[stencil](len(lv.st64))
	// Rows of the padded grid are shared out: each node's entries are formed from the float64
	// operator alone, which no range writes, so the result does not depend on the ranges. An
	// entry and its mirror are averaged in the same order of operands' sum (commutative), which
	// gives them the same bits.
	errs := make([]error, par.Ranges(lv.ny+3, finishRowsMin))
	par.Rows(lv.ny+3, finishRowsMin, func(r, lo, hi int) {
		for k := lo * lv.sx; k < hi*lv.sx; k++ {
			if lv.invD[k] == 0 {
				continue
			}
			s := &lv.st64[k]
			var diag float64
			for d, v := range s {
				if symmetric {
					kn := k + (d/3-1)*lv.sx + d%3 - 1
					v = 0.5 * (v + lv.st64[kn][8-d])
				}
				if d == 4 {
					diag = v
				}
				lv.st[k][d] = float32(v)
			}
			d := float64(lv.st[k][4])
			if !(d > 0) || !isFinite(d) {
				errs[r] = fmt.Errorf("solver: multigrid: coarse level of %d × %d nodes: diagonal at node %d must be a positive float32, got %g", lv.nx, lv.ny, k, diag)
				return
			}
			lv.invD[k] = 1 / d
		}
	})
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	lv.st64, lv.uniform = nil, nil
	lv.standardRuns()
	return nil
}

// stepEntry is one coefficient a of a fine row, coupling its node to the node (di, dj) away.
type stepEntry struct {
	di, dj int8
	a      float64
}

// galerkinTask computes a coarse level's operator A_c = Pᵀ A P from the rows of the level above,
// block by block of coarse rows. Each block walks the fine rows that interpolate from its
// coarse rows (neighbouring blocks share one fine row) and adds every contribution to a coarse
// entry in the order of the fine nodes, so the result does not depend on the blocks.
//
// Most coarse nodes lie where every fine row they interpolate to is the same template row (the
// plain five-point row on the finest level): such a node's row is the Galerkin product of that
// template alone, formed once on a 3 × 3 patch by the same additions in the same order, and
// copied; the fine nodes that interpolate only to such nodes are not visited.
type galerkinTask struct {
	coarse         *gridLevel
	fineNX, fineNY int
	// uniformRow, if not nil, sets row[i] for the fine nodes (i, j) that carry the fine level's
	// template row (one unknown, with that row), and tmplAP holds the template's row of A P
	// (rowAP) for each parity i&1 | (j&1)<<1 of its node.
	uniformRow func(j int, row []bool)
	tmplAP     [4][3][3]float64
	// entries calls visit for every active node of fine row j, in increasing i, with its
	// row's coefficients, or instead with its row of A P when that is known beforehand (the same
	// bits rowAP would compute).
	entries func(j int, visit func(i int, ent []stepEntry, ap *[3][3]float64))
	// tr holds the fine nodes' own interpolation weights (nil: all bilinear); entries gives no
	// precomputed row of A P for a node that tr.touches.
	tr           *transfer
	errs         []error
	active       []int
	uniformNodes []int // per block
}

// galerkinUniform lets the Galerkin products copy the template row of uniform nodes (tests turn
// it off to compare the bits with those of the general sums).
var galerkinUniform = true

// run computes the coarse operator and checks its diagonal.
func (t *galerkinTask) run(mg *Multigrid) error {
	co := t.coarse
	if t.uniformRow != nil && galerkinUniform {
		// The row of coarse node (1, 1) of a 3 × 3 level from the nine template rows around it.
		patch := &gridLevel{nx: 3, ny: 3, sx: 6, st64: make([]stencil64, 36)}
		for j := 1; j <= 3; j++ {
			for i := 1; i <= 3; i++ {
				patch.addRowAP(i, j, &t.tmplAP[i&1|(j&1)<<1], 0, 3)
			}
		}
		co.tmpl = patch.st64[2*patch.sx+2]
		co.uniform = make([]bool, len(co.st64))
		t.uniformNodes = make([]int, co.nblocks)
	}
	mg.team.run(t, co.nblocks, co.nx*co.ny < mg.minParallel)
	for b, err := range t.errs {
		if err != nil {
			return err
		}
		co.active += t.active[b]
		if t.uniformNodes != nil {
			co.uniformNodes += t.uniformNodes[b]
		}
	}
	return nil
}

// runBlock computes the rows of block blk of the coarse operator.
func (t *galerkinTask) runBlock(blk int) {
	co := t.coarse
	j0, j1 := co.rows(blk)
	if co.uniform != nil {
		t.markUniform(blk, j0, j1)
	}
	for j := max(0, 2*j0-1); j < min(t.fineNY, 2*j1); j++ {
		t.entries(j, func(i int, ent []stepEntry, ap *[3][3]float64) {
			if co.uniform != nil && co.parentsUniform(i, j, j0, j1) {
				return
			}
			if ap != nil {
				co.addRowAP(i, j, ap, j0, j1)
				return
			}
			co.addGalerkin(i, j, ent, j0, j1, t.tr)
		})
	}
	for j := j0; j < j1; j++ {
		for i := range co.nx {
			k := (j+1)*co.sx + i + 1
			s := &co.st64[k]
			if co.uniform != nil && co.uniform[k] {
				*s = co.tmpl
			}
			if *s == (stencil64{}) {
				continue
			}
			if d := s[4]; !(d > 0) || !isFinite(d) {
				t.errs[blk] = fmt.Errorf("solver: multigrid: coarse level of %d × %d nodes: diagonal at node (%d, %d) must be positive, got %g", co.nx, co.ny, i, j, d)
				return
			}
			co.invD[k] = 1 / s[4]
			t.active[blk]++
		}
	}
}

// markUniform sets co.uniform for the coarse nodes of rows j0 ≤ J < j1 whose nine fine
// nodes (2I + a, 2J + b), −1 ≤ a, b ≤ 1, are all inside the fine grid and carry its template row.
func (t *galerkinTask) markUniform(blk, j0, j1 int) {
	co, nx := t.coarse, t.fineNX
	lo := max(0, 2*j0-1)
	hi := min(t.fineNY, 2*j1)
	rows := make([]bool, (hi-lo)*nx)
	for j := lo; j < hi; j++ {
		row := rows[(j-lo)*nx : (j-lo+1)*nx]
		t.uniformRow(j, row)
		if t.tr != nil {
			for i := range row {
				row[i] = row[i] && !t.tr.touches(i, j)
			}
		}
	}
	for J := j0; J < j1; J++ {
		if 2*J-1 < 0 || 2*J+1 >= t.fineNY {
			continue
		}
		for I := 1; 2*I+1 < nx; I++ {
			all := true
			for b := -1; b <= 1 && all; b++ {
				r := rows[(2*J+b-lo)*nx:]
				all = r[2*I-1] && r[2*I] && r[2*I+1]
			}
			co.uniform[(J+1)*co.sx+I+1] = all
			if all {
				t.uniformNodes[blk]++
			}
		}
	}
}

// parentsUniform reports whether every coarse node in rows j0 ≤ J < j1 that fine node (i, j)
// interpolates from is uniform (the others are not this block's to form).
func (co *gridLevel) parentsUniform(i, j, j0, j1 int) bool {
	for J := j >> 1; J <= (j+1)>>1; J++ {
		if J < j0 || J >= j1 {
			continue
		}
		for I := i >> 1; I <= (i+1)>>1; I++ {
			if !co.uniform[(J+1)*co.sx+I+1] {
				return false
			}
		}
	}
	return true
}

// addGalerkin adds the contributions of fine node (i, j), whose row has coefficients ent, to the
// coarse rows j0 ≤ J < j1: A_c(C, D) += P(u, C) · (A P)(u, D), with the weights of tr.
func (co *gridLevel) addGalerkin(i, j int, ent []stepEntry, j0, j1 int, tr *transfer) {
	if (j+1)>>1 < j0 || j>>1 >= j1 {
		return
	}
	ap := rowAPw(i, j, ent, tr)
	w := tr.weights(i, j)
	co.addRowAPw(i, j, &ap, &w, j0, j1)
}

// rowAP returns row u of A P for fine node u = (i, j) with row coefficients ent, on the coarse
// nodes (bx+a, by+b), 0 ≤ a, b ≤ 2, bx = ⌊i/2⌋ − 1, by = ⌊j/2⌋ − 1, with bilinear weights: every
// neighbour v of u interpolates from coarse column iv/2 (weight 1) when iv is even, from columns
// ⌊iv/2⌋ and ⌈iv/2⌉ (½ each) when it is odd, and from rows likewise. It depends on i and j only
// through their parities.
func rowAP(i, j int, ent []stepEntry) [3][3]float64 { return rowAPw(i, j, ent, nil) }

// rowAPw is rowAP with the neighbours' weights from tr (the same bits as rowAP where they are
// bilinear).
func rowAPw(i, j int, ent []stepEntry, tr *transfer) [3][3]float64 {
	bx, by := i>>1-1, j>>1-1
	var ap [3][3]float64
	for _, e := range ent {
		iv, jv := i+int(e.di), j+int(e.dj)
		x, y := iv>>1-bx, jv>>1-by
		w := tr.weights(iv, jv)
		for b := range 2 {
			for a := range 2 {
				switch w[b][a] {
				case 0:
				case 1:
					ap[y+b][x+a] += e.a
				default:
					ap[y+b][x+a] += w[b][a] * e.a
				}
			}
		}
	}
	return ap
}

// addRowAP adds row u = (i, j) of A P, ap (see rowAP), times P(u, C) to the coarse rows
// j0 ≤ J < j1 with node u's bilinear weights: A_c(C, D) += P(u, C) · (A P)(u, D).
func (co *gridLevel) addRowAP(i, j int, ap *[3][3]float64, j0, j1 int) {
	w := bilinear(i, j)
	co.addRowAPw(i, j, ap, &w, j0, j1)
}

// addRowAPw is addRowAP with node u's weights w (special's layout).
func (co *gridLevel) addRowAPw(i, j int, ap *[3][3]float64, w *[2][2]float64, j0, j1 int) {
	if (j+1)>>1 < j0 || j>>1 >= j1 {
		return
	}
	bx, by := i>>1-1, j>>1-1
	// A parent at column bx + d (d = 1 or 2) takes the entries of ap with a − d in [−1, 1], at
	// stencil column a − d + 1; likewise for rows.
	for cb := range 2 {
		dy := 1 + cb
		if r := by + dy; r < j0 || r >= j1 {
			continue
		}
		for ca := range 2 {
			wt := w[cb][ca]
			if wt == 0 {
				continue
			}
			dx := 1 + ca
			s := &co.st64[(by+dy+1)*co.sx+bx+dx+1]
			for b := dy - 1; b <= min(2, dy+1); b++ {
				for a := dx - 1; a <= min(2, dx+1); a++ {
					s[(b-dy+1)*3+a-dx+1] += wt * ap[b][a]
				}
			}
		}
	}
}
