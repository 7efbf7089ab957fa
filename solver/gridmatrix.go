package solver

import (
	"fmt"
	"math"
	"math/bits"
	"runtime"
	"sync"

	"phipsi/internal/pages"
	"phipsi/internal/par"
	"phipsi/mesh"
)

// GridMatrix is a sparse matrix on the unknowns of a grid that stores its plain rows by a flag and
// only the others entry by entry. A plain row is the five-point Laplacian stencil of a node whose
// four neighbours all carry unknowns: 4 on the diagonal and −1 in the columns of the unknowns at
// the nodes west, east, south and north. Away from walls and bodies nearly every row of the ψ
// and φ systems is plain (all but about 1 % on the scenarios' grids), so a GridMatrix takes about
// 0.2 bytes a row against the 68 of a CSR, and a product with it reads a fifth of the memory.
//
// Unknowns are numbered in node order (nodes non-decreasing), so the west and east unknowns of a
// plain row u are u − 1 and u + 1; the south and north ones are looked up in the node-to-unknown
// map. A plain row's product is summed in the order of its columns, as a CSR row is, so both
// forms of a matrix give the same results bit for bit.
type GridMatrix struct {
	N       int // rows (and columns)
	grid    mesh.Grid
	nodes   []int32 // the node of each unknown
	unknown []int32 // the unknown of each node (the first, where a node has several), −1 for none
	// plain has bit u%64 of word u/64 set for a plain row. Another row is the r-th of the other
	// rows, r = before[u/64] + the other rows before u in its word, with entries
	// restCol/restVal[restPtr[r]:restPtr[r+1]] (columns ascending) and diagonal restDiag[r].
	plain    []uint64
	before   []int32
	restPtr  []int
	restCol  []int32
	restVal  []float64
	restDiag []float64
	// runs cuts the unknowns into stretches of one grid row (see gridRun), in order.
	runs []gridRun
}

// NewGridMatrix stores a, a matrix on the unknowns of grid g, as a GridMatrix. nodes maps each
// unknown to its node (non-decreasing) and unknown each node to its first unknown (−1 for none);
// the GridMatrix keeps both slices, which must not change afterwards. A row is stored as plain only
// when it is exactly the plain stencil, so any a is represented exactly. NewGridMatrix panics if
// the lengths do not fit.
func NewGridMatrix(a *CSR, g mesh.Grid, nodes, unknown []int32) *GridMatrix {
	if len(nodes) != a.N || len(unknown) != g.Len() {
		panic(fmt.Sprintf("solver: NewGridMatrix: len(nodes) = %d and len(unknown) = %d, want %d and %d", len(nodes), len(unknown), a.N, g.Len()))
	}
	s := newGridMatrix(g, nodes, unknown)
	for u := range a.N {
		lo, hi := a.RowPtr[u], a.RowPtr[u+1]
		s.setRow(u, a.Col[lo:hi], a.Val[lo:hi])
	}
	s.findRuns()
	return s
}

// GridBuilder assembles a GridMatrix row by row, as Builder assembles a CSR: rows are finished
// in increasing order with EndRow; within a row, entries may be added in any order and entries
// in the same column are summed in the order they were added. It never holds a plain row's
// entries beyond its EndRow.
type GridBuilder struct {
	m    *GridMatrix
	row  int
	col  []int32
	val  []float64
	done bool
}

// NewGridBuilder returns a GridBuilder for the matrix on the unknowns nodes of grid g, with
// unknown the node-to-unknown map (see NewGridMatrix). It panics if the lengths do not fit.
func NewGridBuilder(g mesh.Grid, nodes, unknown []int32) *GridBuilder {
	if len(unknown) != g.Len() {
		panic(fmt.Sprintf("solver: NewGridBuilder: len(unknown) = %d, want %d", len(unknown), g.Len()))
	}
	return &GridBuilder{m: newGridMatrix(g, nodes, unknown)}
}

// Add adds v to the entry in column col of the current row.
func (b *GridBuilder) Add(col int, v float64) {
	if b.done || b.row >= b.m.N {
		panic("solver: GridBuilder.Add: every row has been ended")
	}
	if col < 0 || col >= b.m.N {
		panic(fmt.Sprintf("solver: GridBuilder.Add: row %d: column must be in [0, %d), got %d", b.row, b.m.N, col))
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		panic(fmt.Sprintf("solver: GridBuilder.Add: row %d, column %d: value must be finite, got %g", b.row, col, v))
	}
	b.col = append(b.col, int32(col))
	b.val = append(b.val, v)
}

// EndRow finishes the current row.
func (b *GridBuilder) EndRow() {
	if b.done || b.row >= b.m.N {
		panic("solver: GridBuilder.EndRow: every row has been ended")
	}
	w := mergeRow(b.col, b.val)
	b.m.setRow(b.row, b.col[:w], b.val[:w])
	b.col, b.val = b.col[:0], b.val[:0]
	b.row++
}

// EndPlainRow ends the current row, to which nothing has been added, as the plain stencil (4 on
// the diagonal, −1 to the unknowns of the node's four grid neighbours: the row that adding those
// entries and EndRow would store) and reports true. When the node does not admit the plain
// stencil (a neighbour without an unknown, or with two) it changes nothing and reports false.
func (b *GridBuilder) EndPlainRow() bool {
	if b.done || b.row >= b.m.N {
		panic("solver: GridBuilder.EndPlainRow: every row has been ended")
	}
	if len(b.col) > 0 {
		panic(fmt.Sprintf("solver: GridBuilder.EndPlainRow: row %d already has entries", b.row))
	}
	u := b.row
	// plainColumns takes the unknown before u as the west neighbour's; the row's west entry is
	// that node's first unknown, so it must have only one.
	if _, ok := b.m.plainColumns(u); !ok || b.m.unknown[b.m.nodes[u]-1] != int32(u-1) {
		return false
	}
	if u&63 == 0 {
		b.m.before[u>>6] = int32(len(b.m.restPtr) - 1)
	}
	b.m.plain[u>>6] |= 1 << (u & 63)
	b.row++
	return true
}

// Matrix returns the assembled matrix. It panics unless every row has been ended; the builder
// cannot be used afterwards.
func (b *GridBuilder) Matrix() *GridMatrix {
	if b.done || b.row != b.m.N {
		panic(fmt.Sprintf("solver: GridBuilder.Matrix: %d of %d rows ended", b.row, b.m.N))
	}
	b.done = true
	b.m.findRuns()
	return b.m
}

// newGridMatrix returns an empty GridMatrix (every row still to be set) on the unknowns nodes.
func newGridMatrix(g mesh.Grid, nodes, unknown []int32) *GridMatrix {
	words := (len(nodes) + 63) / 64
	return &GridMatrix{N: len(nodes), grid: g, nodes: nodes, unknown: unknown,
		plain: make([]uint64, words), before: make([]int32, words), restPtr: []int{0}}
}

// other returns the index of row u among the other rows, or −1 for a plain row.
func (s *GridMatrix) other(u int) int {
	w := s.plain[u>>6]
	bit := uint64(1) << (u & 63)
	if w&bit != 0 {
		return -1
	}
	return int(s.before[u>>6]) + bits.OnesCount64(^w&(bit-1))
}

// numberRowsMin is the number of grid rows from which numberUnknowns shares them out.
const numberRowsMin = 64

// numberUnknowns numbers the unknowns of grid g in node order, pieces(k) of them at node k (0 for
// none): it sets unknown[k] to the first of node k's (−1 for none) and returns each unknown's
// node. The rows are counted, then numbered, in ranges on several goroutines, each from the
// count of the ranges before it.
func numberUnknowns(g mesh.Grid, unknown []int32, pieces func(k int) int) []int32 {
	nr := par.Ranges(g.NY, numberRowsMin)
	start := make([]int, nr+1)
	par.Rows(g.NY, numberRowsMin, func(r, lo, hi int) {
		c := 0
		for k := lo * g.NX; k < hi*g.NX; k++ {
			c += pieces(k)
		}
		start[r+1] = c
	})
	for r := range nr {
		start[r+1] += start[r]
	}
	nodes := pages.Make[int32](start[nr])
	par.Rows(g.NY, numberRowsMin, func(r, lo, hi int) {
		u := start[r]
		for k := lo * g.NX; k < hi*g.NX; k++ {
			p := pieces(k)
			if p == 0 {
				unknown[k] = -1
				continue
			}
			unknown[k] = int32(u)
			for range p {
				nodes[u] = int32(k)
				u++
			}
		}
	})
	return nodes
}

// buildRowsMin is the number of rows from which assembly shares them among goroutines.
const buildRowsMin = 1 << 16

// rowRanges returns the number of ranges buildRows should use for n rows.
func rowRanges(n int) int {
	if n < buildRowsMin {
		return 1
	}
	return runtime.GOMAXPROCS(0)
}

// buildRows assembles the GridMatrix on the unknowns nodes by calling row(b, r, u) for every
// unknown u, in order within each of nr ranges of rows, the ranges on goroutines of their own; r
// is u's range. row adds row u's entries with b.Add (buildRows ends the row), or ends it as the
// plain stencil with b.EndPlainRow, and may write state of row u or of range r alone. The ranges start at multiples of 64 rows, so each owns its words
// of the plain bitset, and their other rows are joined in range order: the matrix is a
// GridBuilder's, whatever the number of ranges. The first error in range order is returned.
func buildRows(g mesh.Grid, nodes, unknown []int32, nr int, row func(b *GridBuilder, r, u int) error) (*GridMatrix, error) {
	if len(unknown) != g.Len() || nr < 1 {
		panic(fmt.Sprintf("solver: buildRows: len(unknown) = %d and %d ranges, want %d and at least 1", len(unknown), nr, g.Len()))
	}
	m := newGridMatrix(g, nodes, unknown)
	n := m.N
	words := len(m.plain)
	parts := make([]*GridMatrix, nr)
	errs := make([]error, nr)
	var wg sync.WaitGroup
	for r := range nr {
		lo, hi := 64*(r*words/nr), min(n, 64*((r+1)*words/nr))
		part := &GridMatrix{N: n, grid: g, nodes: nodes, unknown: unknown, plain: m.plain, before: m.before, restPtr: []int{0}}
		parts[r] = part
		wg.Go(func() {
			b := &GridBuilder{m: part, row: lo}
			for u := lo; u < hi; u++ {
				if err := row(b, r, u); err != nil {
					errs[r] = err
					return
				}
				if b.row == u { // not ended by EndPlainRow
					b.EndRow()
				}
			}
		})
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return nil, err
		}
	}
	// Join the parts: each counted its other rows from 0.
	for r, part := range parts {
		w0, w1 := r*words/nr, (r+1)*words/nr
		off := int32(len(m.restPtr) - 1)
		for w := w0; w < w1; w++ {
			m.before[w] += off
		}
		base := len(m.restCol)
		for _, p := range part.restPtr[1:] {
			m.restPtr = append(m.restPtr, base+p)
		}
		m.restCol = append(m.restCol, part.restCol...)
		m.restVal = append(m.restVal, part.restVal...)
		m.restDiag = append(m.restDiag, part.restDiag...)
	}
	m.findRuns()
	return m, nil
}

// setRow stores row u (columns ascending): as plain when it is the plain stencil, else among
// the other rows. Rows must be set in increasing order.
func (s *GridMatrix) setRow(u int, cols []int32, vals []float64) {
	if u&63 == 0 {
		s.before[u>>6] = int32(len(s.restPtr) - 1)
	}
	if s.isPlain(u, cols, vals) {
		s.plain[u>>6] |= 1 << (u & 63)
		return
	}
	diag := 0.0
	for q, c := range cols {
		if int(c) == u {
			diag = vals[q]
		}
	}
	s.restCol = append(s.restCol, cols...)
	s.restVal = append(s.restVal, vals...)
	s.restPtr = append(s.restPtr, len(s.restCol))
	s.restDiag = append(s.restDiag, diag)
}

// isPlain reports whether row u, with entries cols and vals, is the plain stencil.
func (s *GridMatrix) isPlain(u int, cols []int32, vals []float64) bool {
	if len(cols) != 5 || len(vals) != 5 {
		return false
	}
	want, ok := s.plainColumns(u)
	if !ok {
		return false
	}
	for q, c := range cols {
		v := -1.0
		if q == 2 {
			v = 4
		}
		if c != want[q] || vals[q] != v {
			return false
		}
	}
	return true
}

// plainColumns returns the columns of the plain stencil of row u, in ascending order (south,
// west, the node, east, north), and whether the row's node admits it: the unknowns next to u
// lie at the west and east nodes, and the south and north nodes carry unknowns (their first).
func (s *GridMatrix) plainColumns(u int) ([5]int32, bool) {
	nx := s.grid.NX
	k := int(s.nodes[u])
	i := k % nx
	if i == 0 || i == nx-1 || k < nx || k+nx >= len(s.unknown) || u == 0 || u == s.N-1 {
		return [5]int32{}, false
	}
	if s.nodes[u-1] != int32(k-1) || s.nodes[u+1] != int32(k+1) {
		return [5]int32{}, false
	}
	want := [5]int32{s.unknown[k-nx], int32(u - 1), int32(u), int32(u + 1), s.unknown[k+nx]}
	if want[0] < 0 || want[4] < 0 || s.nodes[want[0]] != int32(k-nx) || s.nodes[want[4]] != int32(k+nx) {
		return [5]int32{}, false
	}
	return want, true
}

// Len returns the number of rows (and columns).
func (s *GridMatrix) Len() int { return s.N }

// Plain returns the number of plain rows.
func (s *GridMatrix) Plain() int { return s.N - (len(s.restPtr) - 1) }

// Bytes returns the memory the GridMatrix holds itself, without the node maps it shares.
func (s *GridMatrix) Bytes() int {
	return 12*len(s.plain) + 8*len(s.restPtr) + 12*len(s.restCol) + 8*len(s.restDiag) + 16*len(s.runs)
}

// Row returns the columns and values of row u, ascending by column. A plain row is written into
// cols and vals, which must hold 5 entries; another row's slices are the GridMatrix's own and must
// not be changed.
func (s *GridMatrix) Row(u int, cols []int32, vals []float64) ([]int32, []float64) {
	if r := s.other(u); r >= 0 {
		lo, hi := s.restPtr[r], s.restPtr[r+1]
		return s.restCol[lo:hi], s.restVal[lo:hi]
	}
	k := int(s.nodes[u])
	nx := s.grid.NX
	cols, vals = cols[:5], vals[:5]
	cols[0], cols[1], cols[2], cols[3], cols[4] = s.unknown[k-nx], int32(u-1), int32(u), int32(u+1), s.unknown[k+nx]
	vals[0], vals[1], vals[2], vals[3], vals[4] = -1, -1, 4, -1, -1
	return cols, vals
}

// Diag returns the diagonal entry of row u.
func (s *GridMatrix) Diag(u int) float64 {
	if r := s.other(u); r >= 0 {
		return s.restDiag[r]
	}
	return 4
}

// CSR returns the matrix in compressed sparse rows (for tests, direct solves and SOR).
func (s *GridMatrix) CSR() *CSR {
	b := NewBuilder(s.N, 5*s.N)
	var cbuf [5]int32
	var vbuf [5]float64
	for u := range s.N {
		cols, vals := s.Row(u, cbuf[:], vbuf[:])
		for q, c := range cols {
			b.Add(int(c), vals[q])
		}
		b.EndRow()
	}
	return b.CSR()
}

// DiagonalTo writes the diagonal of s into dst.
func (s *GridMatrix) DiagonalTo(dst []float64) {
	if len(dst) != s.N {
		panic(fmt.Sprintf("solver: GridMatrix.DiagonalTo: len(dst) = %d, want %d", len(dst), s.N))
	}
	for u := range dst {
		dst[u] = s.Diag(u)
	}
}

// MulVecTo computes dst = A x. dst and x must have length s.Len() and must not be the same slice.
func (s *GridMatrix) MulVecTo(dst, x []float64) {
	if len(dst) != s.N || len(x) != s.N {
		panic(fmt.Sprintf("solver: GridMatrix.MulVecTo: len(dst) = %d and len(x) = %d, want %d", len(dst), len(x), s.N))
	}
	if s.N > 0 && &dst[0] == &x[0] {
		panic("solver: GridMatrix.MulVecTo: dst and x must not be the same slice")
	}
	forBlocks(s.N, func(lo, hi int) { s.mulVecRange(dst, x, lo, hi) })
}

// ResidualTo computes dst = b − A x. dst may be the same slice as b but not as x.
func (s *GridMatrix) ResidualTo(dst, b, x []float64) {
	if len(dst) != s.N || len(x) != s.N || len(b) != s.N {
		panic(fmt.Sprintf("solver: GridMatrix.ResidualTo: len(dst) = %d, len(b) = %d and len(x) = %d, want %d", len(dst), len(b), len(x), s.N))
	}
	if s.N > 0 && &dst[0] == &x[0] {
		panic("solver: GridMatrix.ResidualTo: dst and x must not be the same slice")
	}
	forBlocks(s.N, func(lo, hi int) { s.residualRange(dst, b, x, lo, hi) })
}

// productTo writes (A x)_u into out[u − lo] for rows lo ≤ u < hi (len(out) ≥ hi − lo), run by
// run: plain runs by plainProduct, the others row by row. The plain stencil is summed in column
// order from zero, as rowDot sums a CSR row, so both forms of a matrix give the same products
// bit for bit (the products by ±1 and 4 are exact). Every kernel forms its products here (kernels
// in blocks of at most blockRows rows) and then uses them while they are in cache.
func (s *GridMatrix) productTo(out, x []float64, lo, hi int) {
	out = out[:hi-lo]
	for r, u := s.runAt(lo), lo; u < hi; r++ {
		run := s.runs[r]
		end := min(hi, int(run.u0+run.n))
		if run.south == mixedRun {
			s.mixedProduct(out[u-lo:end-lo], x, u)
		} else {
			plainProduct(out[u-lo:end-lo], x, u, int(run.south), int(run.north))
		}
		u = end
	}
}

// mixedProduct writes (A x)_u for rows u0 ≤ u < u0+len(out), of any kind, into out.
func (s *GridMatrix) mixedProduct(out, x []float64, u0 int) {
	nx := s.grid.NX
	nodes := s.nodes[u0 : u0+len(out)]
	out = out[:len(nodes)]
	unknown := s.unknown
	for q := range out {
		u := u0 + q
		if s.plain[u>>6]&(1<<(u&63)) == 0 {
			out[q] = s.restDot(s.other(u), x)
			continue
		}
		k := int(nodes[q])
		out[q] = 0 - x[unknown[k-nx]] - x[u-1] + 4*x[u] - x[u+1] - x[unknown[k+nx]]
	}
}

// restDot returns the product of other row r with x. It is kept out of line: the plain rows'
// loop in productTo runs faster without it.
//
//go:noinline
func (s *GridMatrix) restDot(r int, x []float64) float64 {
	lo, hi := s.restPtr[r], s.restPtr[r+1]
	return rowDot(s.restCol[lo:hi], s.restVal[lo:hi], x)
}

// mulVecRange computes dst_u = (A x)_u for rows lo ≤ u < hi.
func (s *GridMatrix) mulVecRange(dst, x []float64, lo, hi int) {
	s.productTo(dst[lo:hi], x, lo, hi)
}

// mulVecDots2Range computes dst = A x on rows [lo, hi) and returns Σ y_u dst_u and Σ dst_u².
func (s *GridMatrix) mulVecDots2Range(dst, x, y []float64, lo, hi int) (float64, float64) {
	s.productTo(dst[lo:hi], x, lo, hi)
	return dots2(dst, y, lo, hi)
}

// dots2 returns Σ y_u d_u and Σ d_u² over rows [lo, hi), summed in row order.
func dots2(d, y []float64, lo, hi int) (float64, float64) {
	var dy, dd float64
	for u := lo; u < hi; u++ {
		v := d[u]
		dy += y[u] * v
		dd += v * v
	}
	return dy, dd
}

// residualRange computes dst_u = b_u − (A x)_u for rows [lo, hi) (at most blockRows of them)
// and returns Σ dst_u². dst may be b.
func (s *GridMatrix) residualRange(dst, b, x []float64, lo, hi int) float64 {
	var buf [blockRows]float64
	ax := buf[:hi-lo]
	s.productTo(ax, x, lo, hi)
	return subtractRange(dst, b, ax, lo)
}

// subtractRange writes dst_u = b_u − ax[u − lo] for rows lo ≤ u < lo + len(ax) and returns
// Σ dst_u², summed in row order. dst may be b.
func subtractRange(dst, b, ax []float64, lo int) float64 {
	var sq float64
	for q, v := range ax {
		r := b[lo+q] - v
		dst[lo+q] = r
		sq += r * r
	}
	return sq
}

// absRange writes g·(|b_u| + Σ_v |A_uv x_v|) into dst for rows [lo, hi) and returns Σ dst_u².
func (s *GridMatrix) absRange(dst, b, x []float64, g float64, lo, hi int) float64 {
	var cbuf [5]int32
	var vbuf [5]float64
	var sq float64
	for u := lo; u < hi; u++ {
		cols, vals := s.Row(u, cbuf[:], vbuf[:])
		t := math.Abs(b[u])
		for q, c := range cols {
			t += math.Abs(vals[q] * x[c])
		}
		dst[u] = g * t
		sq += dst[u] * dst[u]
	}
	return sq
}

// maxRowLen returns the most entries in a row.
func (s *GridMatrix) maxRowLen() int {
	k := 0
	if s.Plain() > 0 {
		k = 5
	}
	for r := range len(s.restPtr) - 1 {
		k = max(k, s.restPtr[r+1]-s.restPtr[r])
	}
	return k
}
