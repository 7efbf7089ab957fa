package solver

import (
	"fmt"
	"math"
	"slices"
	"sort"

	"phipsi/internal/pages"
)

// CSR is a square sparse matrix in compressed sparse row form. Row i holds the entries
// Val[RowPtr[i]:RowPtr[i+1]] in the columns Col[RowPtr[i]:RowPtr[i+1]], sorted ascending with no
// column repeated. A CSR is usually made by a Builder; Validate checks one made by hand.
type CSR struct {
	N      int
	RowPtr []int   // len N+1
	Col    []int32 // column indices, sorted ascending within each row
	Val    []float64
}

// Len returns the number of rows (and columns) of a.
func (a *CSR) Len() int { return a.N }

// NNZ returns the number of stored entries of a, explicit zeros included.
func (a *CSR) NNZ() int { return len(a.Val) }

// Validate reports whether a is a well-formed CSR matrix: RowPtr of length N+1 starting at 0 and
// non-decreasing, Col and Val of length RowPtr[N], column indices in [0, N) strictly ascending
// within each row, and every value finite.
func (a *CSR) Validate() error {
	if a.N < 0 || a.N > math.MaxInt32 {
		return fmt.Errorf("solver: csr: N must be in [0, %d], got %d", math.MaxInt32, a.N)
	}
	if len(a.RowPtr) != a.N+1 {
		return fmt.Errorf("solver: csr: len(RowPtr) must be N+1 = %d, got %d", a.N+1, len(a.RowPtr))
	}
	if a.RowPtr[0] != 0 {
		return fmt.Errorf("solver: csr: RowPtr[0] must be 0, got %d", a.RowPtr[0])
	}
	nnz := a.RowPtr[a.N]
	if len(a.Col) != nnz || len(a.Val) != nnz {
		return fmt.Errorf("solver: csr: len(Col) and len(Val) must be RowPtr[N] = %d, got %d and %d", nnz, len(a.Col), len(a.Val))
	}
	for i := range a.N {
		lo, hi := a.RowPtr[i], a.RowPtr[i+1]
		if hi < lo || hi > nnz {
			return fmt.Errorf("solver: csr: row %d: RowPtr must be non-decreasing and <= %d, got %d then %d", i, nnz, lo, hi)
		}
		for k := lo; k < hi; k++ {
			c := a.Col[k]
			if c < 0 || int(c) >= a.N {
				return fmt.Errorf("solver: csr: row %d: column must be in [0, %d), got %d", i, a.N, c)
			}
			if k > lo && c <= a.Col[k-1] {
				return fmt.Errorf("solver: csr: row %d: columns must be strictly ascending, got %d after %d", i, c, a.Col[k-1])
			}
			if v := a.Val[k]; math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("solver: csr: row %d, column %d: value must be finite, got %g", i, c, v)
			}
		}
	}
	return nil
}

// At returns the entry of a in row i, column j (zero when it is not stored). It searches the row
// and is meant for tests and debugging, not for loops over the matrix.
func (a *CSR) At(i, j int) float64 {
	if i < 0 || i >= a.N || j < 0 || j >= a.N {
		panic(fmt.Sprintf("solver: CSR.At: index (%d, %d) out of range for a %d×%d matrix", i, j, a.N, a.N))
	}
	lo, hi := a.RowPtr[i], a.RowPtr[i+1]
	if k, ok := slices.BinarySearch(a.Col[lo:hi], int32(j)); ok {
		return a.Val[lo+k]
	}
	return 0
}

// DiagonalTo writes the diagonal of a into dst (zero where no diagonal entry is stored).
func (a *CSR) DiagonalTo(dst []float64) {
	if len(dst) != a.N {
		panic(fmt.Sprintf("solver: CSR.DiagonalTo: len(dst) = %d, want %d", len(dst), a.N))
	}
	forBlocks(a.N, func(lo, hi int) { a.diagonalRange(dst, lo, hi) })
}

// diagonalRange writes A_ii into dst[i] for rows lo ≤ i < hi.
func (a *CSR) diagonalRange(dst []float64, lo, hi int) {
	for i := lo; i < hi; i++ {
		start, end := a.RowPtr[i], a.RowPtr[i+1]
		dst[i] = 0
		if k, ok := slices.BinarySearch(a.Col[start:end], int32(i)); ok {
			dst[i] = a.Val[start+k]
		}
	}
}

// MulVecTo computes dst = A x. dst and x must have length a.Len() and must not be the same slice.
func (a *CSR) MulVecTo(dst, x []float64) {
	a.checkMul("MulVecTo", dst, x)
	forBlocks(a.N, func(lo, hi int) { a.mulVecRange(dst, x, lo, hi) })
}

// ResidualTo computes dst = b − A x. dst may be the same slice as b but not as x.
func (a *CSR) ResidualTo(dst, b, x []float64) {
	a.checkMul("ResidualTo", dst, x)
	if len(b) != a.N {
		panic(fmt.Sprintf("solver: CSR.ResidualTo: len(b) = %d, want %d", len(b), a.N))
	}
	forBlocks(a.N, func(lo, hi int) { a.residualRange(dst, b, x, lo, hi) })
}

// checkMul panics unless dst and x fit a and are distinct.
func (a *CSR) checkMul(name string, dst, x []float64) {
	if len(dst) != a.N || len(x) != a.N {
		panic(fmt.Sprintf("solver: CSR.%s: len(dst) = %d and len(x) = %d, want %d", name, len(dst), len(x), a.N))
	}
	if a.N > 0 && &dst[0] == &x[0] {
		panic(fmt.Sprintf("solver: CSR.%s: dst and x must not be the same slice", name))
	}
}

// rowDot returns Σ_k vals_k x_{cols_k}, summed in k order: one row of A times x. vals must be at
// least as long as cols; slicing it to len(cols) lets the compiler drop its bounds checks.
func rowDot(cols []int32, vals, x []float64) float64 {
	vals = vals[:len(cols)]
	var s float64
	for k, c := range cols {
		s += vals[k] * x[c]
	}
	return s
}

// The row-range kernels below walk rows lo ≤ i < hi. Each takes the row ends RowPtr[lo+1:hi+1]
// once and carries the row start along, so that the only bounds checks left in the loops are the
// gathers x[c].

// mulVecRange computes dst_i = (A x)_i for rows lo ≤ i < hi.
func (a *CSR) mulVecRange(dst, x []float64, lo, hi int) {
	ends := a.RowPtr[lo+1 : hi+1]
	dst = dst[lo:hi]
	dst = dst[:len(ends)]
	start := a.RowPtr[lo]
	for i, end := range ends {
		dst[i] = rowDot(a.Col[start:end], a.Val[start:end], x)
		start = end
	}
}

// mulVecDots2Range computes dst = A x on rows [lo, hi) and returns Σ y_i dst_i and Σ dst_i², both
// summed in row order.
func (a *CSR) mulVecDots2Range(dst, x, y []float64, lo, hi int) (float64, float64) {
	ends := a.RowPtr[lo+1 : hi+1]
	dst = dst[lo:hi]
	dst = dst[:len(ends)]
	y = y[lo:hi]
	y = y[:len(ends)]
	start := a.RowPtr[lo]
	var dy, dd float64
	for i, end := range ends {
		s := rowDot(a.Col[start:end], a.Val[start:end], x)
		start = end
		dst[i] = s
		dy += y[i] * s
		dd += s * s
	}
	return dy, dd
}

// residualRange computes dst_i = b_i − (A x)_i for rows lo ≤ i < hi and returns Σ dst_i². The
// product is summed first and then subtracted from b_i, so the result equals b − (A x) computed by
// MulVecTo, bit for bit. dst may be b.
func (a *CSR) residualRange(dst, b, x []float64, lo, hi int) float64 {
	ends := a.RowPtr[lo+1 : hi+1]
	dst = dst[lo:hi]
	dst = dst[:len(ends)]
	b = b[lo:hi]
	b = b[:len(ends)]
	start := a.RowPtr[lo]
	var sq float64
	for i, end := range ends {
		ri := b[i] - rowDot(a.Col[start:end], a.Val[start:end], x)
		start = end
		dst[i] = ri
		sq += ri * ri
	}
	return sq
}

// residualSqRange returns Σ_{lo≤i<hi} (b_i − (A x)_i)², computed as residualRange does but without
// storing the residual.
func (a *CSR) residualSqRange(b, x []float64, lo, hi int) float64 {
	ends := a.RowPtr[lo+1 : hi+1]
	b = b[lo:hi]
	b = b[:len(ends)]
	start := a.RowPtr[lo]
	var sq float64
	for i, end := range ends {
		ri := b[i] - rowDot(a.Col[start:end], a.Val[start:end], x)
		start = end
		sq += ri * ri
	}
	return sq
}

// Builder assembles a CSR matrix row by row. Rows are finished in increasing order with EndRow;
// within a row, entries may be added in any order and entries in the same column are summed.
// Entries are kept even when their value is zero, so the sparsity pattern is what was added.
type Builder struct {
	n      int
	rowPtr []int
	col    []int32
	val    []float64
	done   bool
}

// NewBuilder returns a Builder for an n×n matrix, with room for nnzHint entries before it grows.
func NewBuilder(n, nnzHint int) *Builder {
	if n < 0 || n > math.MaxInt32 {
		panic(fmt.Sprintf("solver: NewBuilder: n must be in [0, %d], got %d", math.MaxInt32, n))
	}
	nnzHint = max(nnzHint, 0)
	rowPtr := make([]int, 1, n+1)
	b := &Builder{
		n:      n,
		rowPtr: rowPtr,
		col:    make([]int32, 0, nnzHint),
		val:    make([]float64, 0, nnzHint),
	}
	pages.Touch(b.rowPtr)
	pages.Touch(b.col)
	pages.Touch(b.val)
	return b
}

// Row returns the index of the row that Add currently adds to: the number of rows ended so far.
func (b *Builder) Row() int { return len(b.rowPtr) - 1 }

// Add adds v to the entry in column col of the current row.
func (b *Builder) Add(col int, v float64) {
	if b.done {
		panic("solver: Builder.Add: called after CSR")
	}
	if b.Row() >= b.n {
		panic(fmt.Sprintf("solver: Builder.Add: all %d rows already ended", b.n))
	}
	if col < 0 || col >= b.n {
		panic(fmt.Sprintf("solver: Builder.Add: row %d: column must be in [0, %d), got %d", b.Row(), b.n, col))
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		panic(fmt.Sprintf("solver: Builder.Add: row %d, column %d: value must be finite, got %g", b.Row(), col, v))
	}
	b.col = append(b.col, int32(col))
	b.val = append(b.val, v)
}

// EndRow finishes the current row: it sorts the row's entries by column and sums duplicates.
func (b *Builder) EndRow() {
	if b.done {
		panic("solver: Builder.EndRow: called after CSR")
	}
	if b.Row() >= b.n {
		panic(fmt.Sprintf("solver: Builder.EndRow: all %d rows already ended", b.n))
	}
	start := b.rowPtr[len(b.rowPtr)-1]
	w := mergeRow(b.col[start:], b.val[start:])
	b.col = b.col[:start+w]
	b.val = b.val[:start+w]
	b.rowPtr = append(b.rowPtr, start+w)
}

// CSR returns the assembled matrix. It panics unless exactly n rows have been ended. The Builder
// hands its storage to the matrix and cannot be used afterwards.
func (b *Builder) CSR() *CSR {
	if b.done {
		panic("solver: Builder.CSR: called twice")
	}
	if b.Row() != b.n {
		panic(fmt.Sprintf("solver: Builder.CSR: %d of %d rows ended", b.Row(), b.n))
	}
	b.done = true
	a := &CSR{N: b.n, RowPtr: b.rowPtr, Col: b.col, Val: b.val}
	b.rowPtr, b.col, b.val = nil, nil, nil
	return a
}

// mergeRow sorts one row's entries by column, sums the entries of each column in the order they
// were added, and returns how many distinct columns remain at the front of cols and vals.
func mergeRow(cols []int32, vals []float64) int {
	sortRow(cols, vals)
	w := 0
	for k, c := range cols {
		if w > 0 && cols[w-1] == c {
			vals[w-1] += vals[k]
			continue
		}
		cols[w], vals[w] = c, vals[k]
		w++
	}
	return w
}

// sortRow sorts one row's entries by column, stably, so that duplicates are later summed in the
// order they were added: insertion sort for the short rows of stencils, sort.Stable for long ones.
func sortRow(cols []int32, vals []float64) {
	if len(cols) > 32 {
		sort.Stable(rowSorter{cols, vals})
		return
	}
	for i := 1; i < len(cols); i++ {
		c, v := cols[i], vals[i]
		j := i
		for ; j > 0 && cols[j-1] > c; j-- {
			cols[j], vals[j] = cols[j-1], vals[j-1]
		}
		cols[j], vals[j] = c, v
	}
}

// rowSorter sorts parallel column and value slices by column.
type rowSorter struct {
	col []int32
	val []float64
}

func (r rowSorter) Len() int           { return len(r.col) }
func (r rowSorter) Less(i, j int) bool { return r.col[i] < r.col[j] }
func (r rowSorter) Swap(i, j int) {
	r.col[i], r.col[j] = r.col[j], r.col[i]
	r.val[i], r.val[j] = r.val[j], r.val[i]
}
