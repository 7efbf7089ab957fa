package solver

import (
	"fmt"
	"slices"

	"phipsi/internal/pages"
	"phipsi/internal/par"
	"phipsi/mesh"
)

// Kernels of the finest level, run block by block by fineLevel.runBlock.
const (
	fineInit     = iota // first step of a V-cycle from x = 0: x = b/A_uu on colour c, 0 elsewhere
	fineSmooth          // Gauss–Seidel update of the rows of colour c
	fineResidual        // r = b − A x on the padded grid, 0 on the rows of colour c (c ≥ 0)
	fineProlong         // x += P x_c from the first coarse level
	finePre             // fused, before the correction: init colour 0, smooth colours 1, 0, 1, …, residual
	finePost            // fused, after it: prolong, smooth colours c, 1 − c, c, …
)

// fineLevel is the finest level of a Multigrid: the caller's matrix on the caller's unknowns.
type fineLevel struct {
	a        *GridMatrix
	nx, ny   int
	nodes    []int32
	rowStart []int32 // the unknowns of grid row j are rowStart[j] ≤ u < rowStart[j+1]
	rowRun   []int32 // the runs of grid row j are a.runs[rowRun[j]:rowRun[j+1]]
	// meta holds each unknown's smoothing colour.
	meta    []uint8
	ncolour int // 2 (red–black) or 4
	// r is the residual on the grid, padded by one node left and below and two right and above
	// (node (i, j) at (j+1)·stride + i + 1), zero at every node that is not an unknown, so that
	// restriction needs no test.
	r         []float64
	stride    int
	blockRows int // grid rows per block
	nblocks   int
	nchunk    int // chunks of the current fused run
	nstage    int // stages of the fused kernels: 2 per smoothing sweep, and 1
	coarse    *gridLevel

	// The current run: kernel, its colour, the caller's vectors.
	op, c int
	x, b  []float64
}

// gridStep decodes the grid step from node k to node k + delta on rows of nx ≥ 3 nodes: the
// (di, dj) with |di|, |dj| ≤ 1 and di + dj·nx = delta, if there is one.
func gridStep(delta, nx int) (di, dj int, ok bool) {
	for dj = -1; dj <= 1; dj++ {
		if di = delta - dj*nx; di >= -1 && di <= 1 {
			return di, dj, true
		}
	}
	return 0, 0, false
}

// newFineLevel checks a's couplings against the grid and prepares the finest level.
func newFineLevel(a *GridMatrix, g mesh.Grid, nodes []int32) (*fineLevel, error) {
	nx, ny := g.NX, g.NY
	f := &fineLevel{
		a: a, nx: nx, ny: ny, nodes: nodes,
		rowStart: make([]int32, ny+1),
		meta:     make([]uint8, a.N),
		stride:   nx + 3,
	}
	// The unknowns are in node order: row j's start is the first unknown at or after its first node.
	for j := range ny + 1 {
		start, _ := slices.BinarySearch(nodes, int32(min(j*nx, g.Len())))
		f.rowStart[j] = int32(start)
	}
	// Plain rows couple only to their four neighbours with a positive diagonal; the others are
	// checked entry by entry (64 plain rows at a time are skipped by their word of flags).
	nine := false
	for u := 0; u < a.N; u++ {
		if w := a.plain[u>>6]; w == ^uint64(0) && u&63 == 0 && u+64 <= a.N {
			u += 63
			continue
		}
		r := a.other(u)
		if r < 0 {
			continue
		}
		k := int(nodes[u])
		i, j := k%nx, k/nx
		cols, vals := a.Row(u, nil, nil)
		for q, v := range cols {
			di, dj, ok := gridStep(int(nodes[v])-k, nx)
			if !ok || i+di < 0 || i+di >= nx {
				return nil, fmt.Errorf("solver: multigrid: row %d at node (%d, %d) couples to node (%d, %d), more than one grid step away",
					u, i, j, int(nodes[v])%nx, int(nodes[v])/nx)
			}
			if int(v) != u && di == 0 && dj == 0 && vals[q] != 0 {
				return nil, fmt.Errorf("solver: multigrid: rows %d and %d share node (%d, %d) and must not couple", u, v, i, j)
			}
			if di != 0 && dj != 0 && vals[q] != 0 {
				nine = true
			}
		}
		if d := a.restDiag[r]; !(d > 0) || !isFinite(d) {
			return nil, fmt.Errorf("solver: multigrid: diagonal entry of row %d at node (%d, %d) must be positive, got %g", u, i, j, d)
		}
	}
	f.ncolour = 2
	if nine {
		f.ncolour = 4
	}
	par.Rows(ny, max(1, nodeLoopMin/nx), func(_, j0, j1 int) {
		for j := j0; j < j1; j++ {
			for u := int(f.rowStart[j]); u < int(f.rowStart[j+1]); u++ {
				i := int(nodes[u]) - j*nx
				if nine {
					f.meta[u] = uint8(i&1 | (j&1)<<1)
				} else {
					f.meta[u] = uint8((i + j) & 1)
				}
			}
		}
	})
	f.rowRun = make([]int32, ny+1)
	r := 0
	for j := range ny + 1 {
		for r < len(a.runs) && int(nodes[a.runs[r].u0])/nx < j {
			r++
		}
		f.rowRun[j] = int32(r)
	}
	f.r = pages.Make[float64](f.stride * (ny + 3))
	f.blockRows = blockRowsFor(nx)
	f.nblocks = ceilDiv(ny, f.blockRows)
	return f, nil
}

// lastColour returns the colour the smoothing before the correction updates last. Its rows have
// a zero residual afterwards: no row of the same colour couples to them.
func (f *fineLevel) lastColour() int { return f.ncolour - 1 }

// rows returns the grid rows of block blk.
func (f *fineLevel) rows(blk int) (j0, j1 int) {
	j0 = blk * f.blockRows
	return j0, min(f.ny, j0+f.blockRows)
}

// runBlock runs the current kernel on block blk (for the fused kernels: on chunk blk).
func (f *fineLevel) runBlock(blk int) {
	if f.op == finePre || f.op == finePost {
		j0, j1 := f.chunk(blk)
		f.pipeline(j0, j1)
		return
	}
	j0, j1 := f.rows(blk)
	switch f.op {
	case fineInit:
		f.initRows(j0, j1, f.c)
	case fineSmooth:
		f.smoothRows(j0, j1, f.c)
	case fineResidual:
		for j := j0; j < j1; j++ {
			f.residualRow(j, f.c)
		}
	case fineProlong:
		for j := j0; j < j1; j++ {
			f.prolongRow(j)
		}
	}
}

// The fused kernels run their stages in one pass over the rows, so that each row's matrix
// entries are read once while they are in cache: stage k on row t − k, where stage k+1 on row j
// needs stage k done on rows j−1, j, j+1. Before the coarse-grid correction the stages are the
// first red step from x = 0, the smoothing's further colour steps and the residual; after it,
// the interpolation of the correction and the colour steps (2 + 1 stages per sweep each side).
// Each step computes exactly what the separate kernels compute, from the same values.
//
// In parallel, the rows are cut into one contiguous chunk per goroutine, of about equal numbers
// of unknowns. A chunk's pipeline leaves out the rows that would need a neighbour chunk's rows:
// stage k on its first k and last k rows. finishPipeline does those afterwards, stage by stage.
// Results are the same for any number of chunks.

// chunk returns the grid rows of chunk b of nchunk: from the first row whose unknowns start at
// or after b·n/nchunk.
func (f *fineLevel) chunk(b int) (j0, j1 int) {
	return f.chunkStart(b), f.chunkStart(b + 1)
}

// chunkStart returns the first row of chunk b.
func (f *fineLevel) chunkStart(b int) int {
	if b >= f.nchunk {
		return f.ny
	}
	target := int32(int64(b) * int64(f.a.N) / int64(f.nchunk))
	j, _ := slices.BinarySearch(f.rowStart[:f.ny], target)
	return j
}

// pipeline runs the stages of the current fused kernel on rows [j0, j1) as far as the chunk
// alone allows.
func (f *fineLevel) pipeline(j0, j1 int) {
	for t := j0; t < j1+f.nstage-1; t++ {
		if t < j1 {
			f.stage(0, t)
		}
		for k := 1; k < f.nstage; k++ {
			if s := t - k; s >= j0+k && s <= j1-1-k {
				f.stage(k, s)
			}
		}
	}
}

// finishPipeline runs the stages that the chunks' pipelines left out, in stage order.
func (f *fineLevel) finishPipeline() {
	for k := 1; k < f.nstage; k++ {
		for b := range f.nchunk {
			j0, j1 := f.chunk(b)
			for j := j0; j < j1; j++ {
				if j < j0+k || j > j1-1-k {
					f.stage(k, j)
				}
			}
		}
	}
}

// stage runs stage k of the current fused kernel on row j. Before the correction: stage 0 the
// first step (colour 0 from x = 0), then colours 1, 0, 1, … and last the residual, which skips
// colour 1, updated last; after it: stage 0 the interpolation, then colours c, 1 − c, c, ….
func (f *fineLevel) stage(k, j int) {
	switch {
	case f.op == finePre && k == 0:
		f.initRows(j, j+1, 0)
	case f.op == finePre && k == f.nstage-1:
		f.residualRow(j, 1)
	case f.op == finePre:
		f.smoothRows(j, j+1, k&1)
	case k == 0:
		f.prolongRow(j)
	case k&1 == 1:
		f.smoothRows(j, j+1, f.c)
	default:
		f.smoothRows(j, j+1, 1-f.c)
	}
}

// initRows sets x_u = b_u / A_uu on the unknowns of colour c in grid rows [j0, j1) and x_u = 0
// on the others (initRange on rows that are not in plain runs).
func (f *fineLevel) initRows(j0, j1, c int) {
	for _, run := range f.a.runs[f.rowRun[j0]:f.rowRun[j1]] {
		u0, n := int(run.u0), int(run.n)
		if run.south == mixedRun || f.ncolour != 2 {
			f.initRange(u0, u0+n, c)
			continue
		}
		initPlain(f.x[u0:u0+n], f.b[u0:u0+n], (int(f.meta[u0])^c)&1)
	}
}

// initRange sets x_u = b_u / A_uu on the unknowns of colour c in [lo, hi) and x_u = 0 on the
// others: the first Gauss–Seidel step from x = 0.
func (f *fineLevel) initRange(lo, hi, c int) {
	a := f.a
	x := f.x[lo:hi]
	b := f.b[lo:hi]
	meta := f.meta[lo:hi]
	b, meta = b[:len(x)], meta[:len(x)]
	for q := range x {
		if int(meta[q]) != c {
			x[q] = 0
			continue
		}
		x[q] = b[q] / a.Diag(lo+q)
	}
}

// smoothRows updates the unknowns of colour c in grid rows [j0, j1): the plain runs' by the
// fixed stencil, the others by smoothRange.
func (f *fineLevel) smoothRows(j0, j1, c int) {
	for _, run := range f.a.runs[f.rowRun[j0]:f.rowRun[j1]] {
		u0, n := int(run.u0), int(run.n)
		if run.south == mixedRun || f.ncolour != 2 {
			f.smoothRange(u0, u0+n, c)
			continue
		}
		xs, xw, xm, xe, xn := stencilSlices(f.x, u0, n, int(run.south), int(run.north))
		// Colours alternate along the run.
		smoothPlain(xm, xs, xw, xe, xn, f.b[u0:u0+n], (int(f.meta[u0])^c)&1)
	}
}

// smoothRange updates the unknowns of colour c in [lo, hi) by x_u += (b_u − Σ_v A_uv x_v)/A_uu.
// No two unknowns of one colour couple, so the order of the updates does not matter. Plain rows
// take smoothPlain's update, written out here.
func (f *fineLevel) smoothRange(lo, hi, c int) {
	a := f.a
	nx := f.nx
	xAll, unknown := f.x, a.unknown
	x := f.x[lo:hi]
	b := f.b[lo:hi]
	meta := f.meta[lo:hi]
	nodes := f.nodes[lo:hi]
	b, meta, nodes = b[:len(x)], meta[:len(x)], nodes[:len(x)]
	plain := a.plain
	for q, m := range meta {
		if int(m) != c {
			continue
		}
		u := lo + q
		if plain[u>>6]&(1<<(u&63)) == 0 {
			r := a.other(u)
			x[q] += (b[q] - a.restDot(r, xAll)) / a.restDiag[r]
			continue
		}
		k := int(nodes[q])
		x[q] = (((b[q] + xAll[unknown[k-nx]]) + (xAll[u-1] + xAll[u+1])) + xAll[unknown[k+nx]]) * 0.25
	}
}

// residualRow writes r = b − A x for the unknowns of grid row j into the padded residual grid,
// and 0 for the unknowns of the colour the smoothing updated last (their residual vanishes in
// exact arithmetic): the plain runs by the fixed stencil, the others by residualRange.
func (f *fineLevel) residualRow(j, skip int) {
	off := (j+1)*f.stride + 1 - j*f.nx // padded index of node k is k + off
	for _, run := range f.a.runs[f.rowRun[j]:f.rowRun[j+1]] {
		u0, n := int(run.u0), int(run.n)
		if run.south == mixedRun || f.ncolour != 2 {
			f.residualRange(u0, u0+n, off, skip)
			continue
		}
		k0 := int(f.nodes[u0]) + off // a plain run's nodes are consecutive
		r := f.r[k0 : k0+n]
		xs, xw, xm, xe, xn := stencilSlices(f.x, u0, n, int(run.south), int(run.north))
		zero := -1
		if skip >= 0 {
			zero = (int(f.meta[u0]) ^ skip) & 1
		}
		residualPlain(r, xs, xw, xm, xe, xn, f.b[u0:u0+n], zero)
	}
}

// residualRange writes the residual of unknowns [lo, hi) of one grid row, whose nodes have
// padded index k + off, as residualRow does. Unknowns that share a node share their P row, so
// the node holds the sum of their residuals, which is what restriction needs; such unknowns are
// never in a plain run, so they all lie in one range.
func (f *fineLevel) residualRange(lo, hi, off, skip int) {
	a := f.a
	var buf [blockRows]float64
	nodes := f.nodes[lo:hi]
	b := f.b[lo:hi]
	meta := f.meta[lo:hi]
	b, meta = b[:len(nodes)], meta[:len(nodes)]
	r := f.r
	prev := int32(-1)
	for start := 0; start < len(nodes); start += blockRows {
		end := min(start+blockRows, len(nodes))
		ax := buf[:end-start]
		a.productTo(ax, f.x, lo+start, lo+end)
		for q := start; q < end; q++ {
			k := int(nodes[q]) + off
			if int(meta[q]) == skip {
				if nodes[q] != prev {
					r[k] = 0
				}
				prev = nodes[q]
				continue
			}
			v := b[q] - ax[q-start]
			if nodes[q] == prev {
				r[k] += v
			} else {
				r[k] = v
			}
			prev = nodes[q]
		}
	}
}

// prolongRow adds the bilinear interpolation of the first coarse level's x to the unknowns of
// grid row j. Node i of the row lies between coarse columns i>>1 and (i+1)>>1 (the same column
// when i is even), and likewise for rows, so x_u += ¼ Σ of the four (possibly repeated) values.
func (f *fineLevel) prolongRow(j int) {
	cs := f.coarse.sx
	cx := f.coarse.x
	j0, j1 := j>>1, (j+1)>>1
	r0 := cx[(j0+1)*cs+1 : (j0+2)*cs]
	r1 := cx[(j1+1)*cs+1 : (j1+2)*cs]
	r1 = r1[:len(r0)]
	base := j * f.nx
	for _, run := range f.a.runs[f.rowRun[j]:f.rowRun[j+1]] {
		u0, n := int(run.u0), int(run.n)
		x := f.x[u0 : u0+n]
		if run.south != mixedRun {
			// A plain run's nodes are consecutive: columns i0, i0+1, …
			prolongStretch(x, int(f.nodes[u0])-base, r0, r1)
			continue
		}
		nodes := f.nodes[u0 : u0+n]
		x = x[:len(nodes)]
		for q, k := range nodes {
			i := int(k) - base
			m := i >> 1
			if i&1 == 0 {
				x[q] += 0.5 * (r0[m] + r1[m])
			} else {
				x[q] += 0.25 * ((r0[m] + r0[m+1]) + (r1[m] + r1[m+1]))
			}
		}
	}
	// The nodes with their own weights (one unknown each) add what those differ by.
	for _, sp := range f.coarse.tr.row(j) {
		i := int(sp.i)
		u := int(f.a.unknown[base+i])
		bw := bilinear(i, j)
		for cb, r := range [2][]float64{r0, r1} {
			for ca := range 2 {
				if d := sp.w[cb][ca] - bw[cb][ca]; d != 0 {
					f.x[u] += d * r[i>>1+ca]
				}
			}
		}
	}
}

// prolongStretch adds the interpolation to x, the unknowns of consecutive columns from i0 on: the
// sums prolongRow forms for each node, taken in pairs of columns (2m, 2m+1).
func prolongStretch(x []float64, i0 int, r0, r1 []float64) {
	q := 0
	if i0&1 == 1 && len(x) > 0 {
		m := i0 >> 1
		x[0] += 0.25 * ((r0[m] + r0[m+1]) + (r1[m] + r1[m+1]))
		q = 1
	}
	// x[q] is at the even column 2m, m = (i0+q)/2.
	m0 := (i0 + q) >> 1
	pairs := (len(x) - q) / 2
	a0, b0 := r0[m0:m0+pairs+1], r1[m0:m0+pairs+1]
	xs := x[q : q+2*pairs]
	b0 = b0[:len(a0)]
	p0 := 0
	if useAVX2 {
		if steps := pairs / 4; steps > 0 {
			prolongStepsAVX2(&xs[0], &a0[0], &b0[0], steps)
			p0 = 4 * steps
		}
	}
	for p := p0; p < pairs; p++ {
		xs[2*p] += 0.5 * (a0[p] + b0[p])
		xs[2*p+1] += 0.25 * ((a0[p] + a0[p+1]) + (b0[p] + b0[p+1]))
	}
	if rest := q + 2*pairs; rest < len(x) {
		m := (i0 + rest) >> 1
		x[rest] += 0.5 * (r0[m] + r1[m])
	}
}

// plainEntries are a plain row's entries in column order (GridMatrix.Row).
var plainEntries = [5]stepEntry{{0, -1, -1}, {-1, 0, -1}, {0, 0, 4}, {1, 0, -1}, {0, 1, -1}}

// coarsen builds the first coarse level, A_c = Pᵀ A P, from the rows of the matrix.
func (f *fineLevel) coarsen(mg *Multigrid) (*gridLevel, error) {
	co := mg.newGridLevel(0, f.nx/2+1, f.ny/2+1)
	task := &galerkinTask{coarse: co, fineNX: f.nx, fineNY: f.ny, errs: make([]error, co.nblocks), active: make([]int, co.nblocks)}
	// A plain row's product with P depends only on its node's parities: formed once for each.
	// The plain row is the level's template.
	plainAP := &task.tmplAP
	for q := range plainAP {
		plainAP[q] = rowAP(q&1, q>>1, plainEntries[:])
	}
	task.uniformRow = func(j int, row []bool) {
		clear(row)
		u0, u1 := int(f.rowStart[j]), int(f.rowStart[j+1])
		for u := u0; u < u1; u++ {
			i := int(f.nodes[u]) - j*f.nx
			// A node with two unknowns (the split pieces of a cell) has no template row.
			row[i] = f.a.plain[u>>6]&(1<<(u&63)) != 0 && (u == u0 || f.nodes[u-1] != f.nodes[u])
		}
	}
	// rowEntries returns the entries of unknown u's row, the plain ones shared.
	rowEntries := func(u int, buf []stepEntry) []stepEntry {
		a := f.a
		if a.plain[u>>6]&(1<<(u&63)) != 0 {
			return plainEntries[:]
		}
		var cbuf [5]int32
		var vbuf [5]float64
		cols, vals := a.Row(u, cbuf[:], vbuf[:])
		for q, v := range cols {
			di, dj, _ := gridStep(int(f.nodes[v])-int(f.nodes[u]), f.nx) // checked by newFineLevel
			buf = append(buf, stepEntry{int8(di), int8(dj), vals[q]})
		}
		return buf
	}
	if mg.ownWeights {
		co.tr = newTransfer(f.nx, f.ny, func(visit func(i, j int)) {
			for u := range f.a.N {
				if f.a.plain[u>>6]&(1<<(u&63)) == 0 {
					k := int(f.nodes[u])
					visit(k%f.nx, k/f.nx)
				}
			}
		}, func(i, j int, buf []stepEntry) ([]stepEntry, bool) {
			k := j*f.nx + i
			u := int(f.a.unknown[k])
			if u < 0 || u+1 < f.a.N && int(f.nodes[u+1]) == k {
				return nil, false // no unknown, or the split pieces of a cell: bilinear
			}
			return rowEntries(u, buf), true
		})
	}
	task.tr = co.tr
	task.entries = func(j int, visit func(i int, ent []stepEntry, ap *[3][3]float64)) {
		a := f.a
		var buf [9]stepEntry
		for u := int(f.rowStart[j]); u < int(f.rowStart[j+1]); u++ {
			i := int(f.nodes[u]) - j*f.nx
			if a.plain[u>>6]&(1<<(u&63)) != 0 && !task.tr.touches(i, j) {
				visit(i, nil, &plainAP[i&1|(j&1)<<1])
				continue
			}
			visit(i, rowEntries(u, buf[:0]), nil)
		}
	}
	if err := task.run(mg); err != nil {
		return nil, err
	}
	co.tr.dropSetUp()
	return co, nil
}
