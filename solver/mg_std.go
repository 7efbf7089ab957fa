package solver

import "math"

// A coarse level away from walls and bodies is the Galerkin product of plain five-point rows,
// formed for every node by the same sums in the same order: one stencil, the same bits at every
// such node. The level finds that stencil (the most common one) and the runs of nodes in each
// row that have it; the kernels sum those runs with the coefficients held in registers instead of
// reading 36 bytes of stencil per node, which is most of a coarse level's memory traffic. The
// results are the same bits as from the stored stencils.

// standardStencil is a level's most common stencil, as the kernels use it.
type standardStencil struct {
	a   [9]float64 // the float32 coefficients, widened
	inv float64    // 1/a[4], as invD holds it
}

// minStandardRun is the shortest run of standard stencils kept: shorter ones go the general way.
const minStandardRun = 8

// sameStencil reports whether two stencils are the same bits.
func sameStencil(s, t *stencil) bool {
	for d := range s {
		if math.Float32bits(s[d]) != math.Float32bits(t[d]) {
			return false
		}
	}
	return true
}

// standardRuns finds the level's most common stencil among a sample of its active nodes and the
// runs of at least minStandardRun nodes that have it, row by row.
func (lv *gridLevel) standardRuns() {
	lv.stdRow = make([]int32, lv.ny+1)
	lv.stdRuns = lv.stdRuns[:0]
	counts := map[stencil]int{}
	step := max(1, len(lv.st)/4096)
	for k := 0; k < len(lv.st); k += step {
		if lv.invD[k] != 0 {
			counts[lv.st[k]]++
		}
	}
	best, most := stencil{}, 0
	for s, c := range counts {
		if c > most || (c == most && lessStencil(&s, &best)) {
			best, most = s, c
		}
	}
	if most == 0 {
		return
	}
	for d, v := range best {
		lv.std.a[d] = float64(v)
	}
	lv.std.inv = 1 / lv.std.a[4]
	for j := range lv.ny {
		lv.stdRow[j] = int32(len(lv.stdRuns))
		row := (j+1)*lv.sx + 1
		st := lv.st[row : row+lv.nx]
		inv := lv.invD[row : row+lv.nx]
		for i := 0; i < len(st); {
			if inv[i] == 0 || !sameStencil(&st[i], &best) || inv[i] != lv.std.inv {
				i++
				continue
			}
			i0 := i
			for i < len(st) && inv[i] != 0 && sameStencil(&st[i], &best) && inv[i] == lv.std.inv {
				i++
			}
			if i-i0 >= minStandardRun {
				lv.stdRuns = append(lv.stdRuns, [2]int32{int32(i0), int32(i)})
			}
		}
	}
	lv.stdRow[lv.ny] = int32(len(lv.stdRuns))
}

// lessStencil orders stencils by their bits, so that a tie in the counts is broken the same way
// in every run.
func lessStencil(s, t *stencil) bool {
	for d := range s {
		if a, b := math.Float32bits(s[d]), math.Float32bits(t[d]); a != b {
			return a < b
		}
	}
	return false
}

// spans calls f on the stretches of row j in order, whole row covered: std tells a run of
// standard stencils from the nodes between runs.
func (lv *gridLevel) spans(j int, f func(lo, hi int, std bool)) {
	lo := 0
	if lv.stdRow != nil {
		for _, run := range lv.stdRuns[lv.stdRow[j]:lv.stdRow[j+1]] {
			if int(run[0]) > lo {
				f(lo, int(run[0]), false)
			}
			f(int(run[0]), int(run[1]), true)
			lo = int(run[1])
		}
	}
	if lo < lv.nx {
		f(lo, lv.nx, false)
	}
}
