package solver

import (
	"cmp"
	"math"
	"math/bits"
	"slices"
)

// Interpolation near walls and bodies.
//
// Bilinear interpolation gives a fine node the mean of the coarse corrections around it, whatever
// lies between them. Across a thin body, whose two sides the fine operator does not couple, it
// mixes the corrections of the two sides, and the coarse levels see the body as leaky: φ around a
// thin cambered vane took 20–22 CG iterations on every grid, against 8 around a cylinder. Near
// the rows that are not the level's template, the weights come from the operator instead, as in
// black-box multigrid (Dendy 1982, J. Comput. Phys. 48, 366–386), with restriction its transpose
// and the coarse operators its Galerkin products, as before:
//
//   - a fine node on a coarse node takes that node's value;
//   - a node between two coarse nodes along x takes w_W = −ΣA(−1, ·)/ΣA(0, ·) and
//     w_E = −ΣA(+1, ·)/ΣA(0, ·), its row's coefficients summed over each column of the stencil
//     (along y likewise, over rows): no weight across a link the operator does not couple, less
//     than ½ next to a prescribed value;
//   - a node at the centre of a coarse cell takes −(1/A(0, 0)) Σ A(d)·P(node + d) over its
//     neighbours, the interpolation its own row makes of theirs.
//
// On the template rows away from walls and bodies these are exactly the bilinear weights, so only
// the nodes where they differ are stored (transfer), and the kernels add the difference to the
// bilinear sums they form as before.

// transfer holds the interpolation weights of the nodes of a level (the level above a coarse
// level) whose weights differ from the bilinear ones.
type transfer struct {
	nx, ny   int
	rowStart []int32   // the special nodes of row j are list[rowStart[j]:rowStart[j+1]]
	list     []special // by row, then column
	near     []uint64  // bit k: node k or one of its eight neighbours is special (set-up only)
	// bit k of self: node k is special, list[rank[k>>6] + (the bits below k in its word)] (set-up
	// only: weights searches row j once they are dropped).
	self []uint64
	rank []int32
}

// special is a node with its own weights: w[b][a] on coarse node (i>>1 + a, j>>1 + b).
type special struct {
	i int32
	w [2][2]float64
}

// bilinear returns the bilinear weights of node (i, j) in special's layout.
func bilinear(i, j int) (w [2][2]float64) {
	switch i&1 | (j&1)<<1 {
	case 0:
		w[0][0] = 1
	case 1:
		w[0][0], w[0][1] = 0.5, 0.5
	case 2:
		w[0][0], w[1][0] = 0.5, 0.5
	default:
		w = [2][2]float64{{0.25, 0.25}, {0.25, 0.25}}
	}
	return w
}

// row returns the special nodes of row j (none for a nil transfer).
func (t *transfer) row(j int) []special {
	if t == nil || j < 0 || j >= t.ny {
		return nil
	}
	return t.list[t.rowStart[j]:t.rowStart[j+1]]
}

// weights returns the weights of node (i, j).
func (t *transfer) weights(i, j int) [2][2]float64 {
	if t != nil && t.self != nil {
		k := j*t.nx + i
		w, bit := t.self[k>>6], uint64(1)<<(k&63)
		if w&bit == 0 {
			return bilinear(i, j)
		}
		return t.list[int(t.rank[k>>6])+bits.OnesCount64(w&(bit-1))].w
	}
	if row := t.row(j); len(row) > 0 {
		if q, ok := slices.BinarySearchFunc(row, int32(i), func(s special, i int32) int { return cmp.Compare(s.i, i) }); ok {
			return row[q].w
		}
	}
	return bilinear(i, j)
}

// touches reports whether node (i, j) or one of its eight neighbours has its own weights.
func (t *transfer) touches(i, j int) bool {
	if t == nil {
		return false
	}
	k := j*t.nx + i
	return t.near[k>>6]&(1<<(k&63)) != 0
}

// newTransfer finds the weights of the nodes of an nx × ny level near its irregular nodes (those
// whose rows are not the level's template; irregular calls visit on each, in any order), where
// they differ from the bilinear ones. row returns the entries of node (i, j)'s row, or false for
// a node with no single row (no unknown, or two), which keeps its bilinear weights. It returns
// nil when no node needs weights of its own.
func newTransfer(nx, ny int, irregular func(visit func(i, j int)), row func(i, j int, buf []stepEntry) ([]stepEntry, bool)) *transfer {
	// Candidates: the 5 × 5 nodes around every irregular node (a cell centre's weights follow
	// those of its neighbours, which follow their own rows).
	words := (nx*ny + 63) / 64
	cand := make([]uint64, words)
	found := false
	irregular(func(i, j int) {
		found = true
		for y := max(0, j-2); y <= min(ny-1, j+2); y++ {
			for x := max(0, i-2); x <= min(nx-1, i+2); x++ {
				k := y*nx + x
				cand[k>>6] |= 1 << (k & 63)
			}
		}
	})
	if !found {
		return nil
	}
	own := map[int][2][2]float64{}
	var buf [9]stepEntry
	// The nodes between two coarse nodes first, then the cell centres, which use them.
	for pass := range 2 {
		for w, word := range cand {
			for word != 0 {
				b := bits.TrailingZeros64(word)
				word &= word - 1
				k := w*64 + b
				i, j := k%nx, k/nx
				centre := i&1 == 1 && j&1 == 1
				if i&1 == 0 && j&1 == 0 || centre != (pass == 1) {
					continue
				}
				ent, ok := row(i, j, buf[:0])
				if !ok {
					continue
				}
				var wt [2][2]float64
				if centre {
					wt, ok = centreWeights(i, j, ent, func(x, y int) [2][2]float64 {
						if v, ok := own[y*nx+x]; ok {
							return v
						}
						return bilinear(x, y)
					})
				} else {
					wt, ok = edgeWeights(i, j, ent)
				}
				if ok && !nearlyBilinear(wt, i, j) {
					own[k] = wt
				}
			}
		}
	}
	if len(own) == 0 {
		return nil
	}
	t := &transfer{nx: nx, ny: ny, rowStart: make([]int32, ny+1), near: make([]uint64, words),
		self: make([]uint64, words), rank: make([]int32, words)}
	keys := make([]int, 0, len(own))
	for k := range own {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	t.list = make([]special, len(keys))
	for q, k := range keys {
		i, j := k%nx, k/nx
		t.list[q] = special{int32(i), own[k]}
		t.rowStart[j+1]++
		t.self[k>>6] |= 1 << (k & 63)
		for y := max(0, j-1); y <= min(ny-1, j+1); y++ {
			for x := max(0, i-1); x <= min(nx-1, i+1); x++ {
				n := y*nx + x
				t.near[n>>6] |= 1 << (n & 63)
			}
		}
	}
	for j := range ny {
		t.rowStart[j+1] += t.rowStart[j]
	}
	for w := 1; w < words; w++ {
		t.rank[w] = t.rank[w-1] + int32(bits.OnesCount64(t.self[w-1]))
	}
	return t
}

// dropSetUp drops what only the set-up uses.
func (t *transfer) dropSetUp() {
	if t != nil {
		t.near, t.self, t.rank = nil, nil, nil
	}
}

// nearlyBilinear reports whether w is node (i, j)'s bilinear weights up to rounding (on a coarse
// template row a centre's weights are sums of twelfths).
func nearlyBilinear(w [2][2]float64, i, j int) bool {
	b := bilinear(i, j)
	for y := range 2 {
		for x := range 2 {
			if math.Abs(w[y][x]-b[y][x]) > 1e-12 {
				return false
			}
		}
	}
	return true
}

// edgeWeights returns the weights of node (i, j), between two coarse nodes along x (i odd) or y
// (j odd), from its row's entries collapsed across the line, and false where they are unusable
// (a collapsed diagonal that is not positive, a negative or non-finite weight).
func edgeWeights(i, j int, ent []stepEntry) ([2][2]float64, bool) {
	var lo, mid, hi float64
	for _, e := range ent {
		d := e.di
		if j&1 == 1 {
			d = e.dj
		}
		switch d {
		case -1:
			lo += e.a
		case 0:
			mid += e.a
		default:
			hi += e.a
		}
	}
	wl, wh := -lo/mid, -hi/mid
	if !(mid > 0) || !(wl >= 0) || !(wh >= 0) || math.IsInf(wl, 0) || math.IsInf(wh, 0) {
		return [2][2]float64{}, false
	}
	var w [2][2]float64
	if j&1 == 1 {
		w[0][0], w[1][0] = wl, wh
	} else {
		w[0][0], w[0][1] = wl, wh
	}
	return w, true
}

// centreWeights returns the weights of node (i, j) at the centre of a coarse cell (i, j odd):
// −(1/A(0, 0)) Σ A(d)·P(node + d) over its row's off-diagonal entries, with P of a neighbour from
// weights; false where the diagonal is not positive or a weight is negative or non-finite.
func centreWeights(i, j int, ent []stepEntry, weights func(i, j int) [2][2]float64) ([2][2]float64, bool) {
	var w [2][2]float64
	diag := 0.0
	for _, e := range ent {
		if e.di == 0 && e.dj == 0 {
			diag += e.a
		}
	}
	if !(diag > 0) {
		return w, false
	}
	i0, j0 := i>>1, j>>1
	for _, e := range ent {
		if e.di == 0 && e.dj == 0 {
			continue
		}
		x, y := i+int(e.di), j+int(e.dj)
		pw := weights(x, y)
		for b := range 2 {
			for a := range 2 {
				if pw[b][a] == 0 {
					continue
				}
				// The neighbour's parent (x>>1 + a, y>>1 + b) in this node's cell.
				ca, cb := x>>1+a-i0, y>>1+b-j0
				if ca < 0 || ca > 1 || cb < 0 || cb > 1 {
					return w, false // outside the cell: cannot happen for entries one step away
				}
				w[cb][ca] -= e.a * pw[b][a] / diag
			}
		}
	}
	for _, r := range w {
		for _, v := range r {
			if !(v >= 0) || math.IsInf(v, 0) {
				return w, false
			}
		}
	}
	return w, true
}
