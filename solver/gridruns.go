package solver

import (
	"math"
	"slices"
)

// A gridRun is a stretch of consecutive unknowns u0 ≤ u < u0+n in one grid row. In a plain run
// every row is plain and the south and north neighbours of every u are the unknowns u + south and
// u + north: the run's rows then need no look-up in the node-to-unknown map and no test of the
// plain flags, and their sums are a fixed stencil on five slices. Other runs (south = mixedRun)
// hold the rows that are not plain, or plain rows whose offsets differ from their neighbours'.
//
// On a channel with bodies nearly every grid row is one or a few plain runs (the offsets change
// only where a row's count of unknowns does, at bodies and at a sloping wall), so the runs cost
// a few words per grid row.
type gridRun struct {
	u0, n        int32
	south, north int32
}

// mixedRun marks a run of rows that are not all plain with fixed offsets.
const mixedRun = math.MinInt32

// findRuns cuts the unknowns into runs (see gridRun): a run ends at the end of a grid row, where
// a plain row follows another kind of row or the other way round, and where a plain row's
// offsets differ from those of the plain row before it.
func (s *GridMatrix) findRuns() {
	nx := s.grid.NX
	var runs []gridRun
	row := -1
	for u := range s.N {
		k := int(s.nodes[u])
		south, north := int32(mixedRun), int32(mixedRun)
		if s.plain[u>>6]&(1<<(u&63)) != 0 {
			south, north = s.unknown[k-nx]-int32(u), s.unknown[k+nx]-int32(u)
		}
		if j := k / nx; j != row || len(runs) == 0 || runs[len(runs)-1].south != south || runs[len(runs)-1].north != north {
			runs = append(runs, gridRun{u0: int32(u), south: south, north: north})
			row = j
		}
		runs[len(runs)-1].n++
	}
	s.runs = slices.Clip(runs)
}

// runAt returns the index of the run that holds unknown u.
func (s *GridMatrix) runAt(u int) int {
	r, found := slices.BinarySearchFunc(s.runs, int32(u), func(run gridRun, u int32) int {
		switch {
		case run.u0+run.n <= u:
			return -1
		case run.u0 > u:
			return 1
		}
		return 0
	})
	if !found {
		panic("solver: GridMatrix.runAt: unknown outside every run")
	}
	return r
}

// stencilSlices returns, for plain run rows u0 ≤ u < u0+n, the slices of x at u + south, u − 1,
// u, u + 1 and u + north, each of length n.
func stencilSlices(x []float64, u0, n, south, north int) (xs, xw, xm, xe, xn []float64) {
	xm = x[u0 : u0+n]
	xw = x[u0-1 : u0-1+n]
	xe = x[u0+1 : u0+1+n]
	xs = x[u0+south : u0+south+n]
	xn = x[u0+north : u0+north+n]
	return xs, xw, xm, xe, xn
}

// plainProduct writes (A x)_u for the plain run rows u0 ≤ u < u0+len(out) into out, summed in
// column order as productTo sums a plain row (so bit for bit the same).
// On amd64 with AVX2 it takes four rows a step, with the same operations.
func plainProduct(out, x []float64, u0, south, north int) {
	xs, xw, xm, xe, xn := stencilSlices(x, u0, len(out), south, north)
	xs, xw, xm, xe, xn = xs[:len(out)], xw[:len(out)], xm[:len(out)], xe[:len(out)], xn[:len(out)]
	q0 := 0
	if useAVX2 {
		if steps := len(out) / 4; steps > 0 {
			productStepsAVX2(&out[0], &xm[0], &xs[0], &xn[0], steps)
			q0 = 4 * steps
		}
	}
	for q := q0; q < len(out); q++ {
		out[q] = 0 - xs[q] - xw[q] + 4*xm[q] - xe[q] - xn[q]
	}
}
