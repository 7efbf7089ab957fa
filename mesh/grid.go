package mesh

import (
	"fmt"
	"math"
)

// Grid is a uniform lattice of NX × NY nodes with spacing H; node (i, j) is at
// (X0 + i·H, Y0 + j·H) and has flat index j·NX + i.
type Grid struct {
	X0, Y0 float64
	H      float64
	NX, NY int
}

// X returns the x of column i.
func (g Grid) X(i int) float64 { return g.X0 + float64(i)*g.H }

// Y returns the y of row j.
func (g Grid) Y(j int) float64 { return g.Y0 + float64(j)*g.H }

// At returns the position of node (i, j).
func (g Grid) At(i, j int) Point { return Point{g.X(i), g.Y(j)} }

// Index returns the flat index of node (i, j).
func (g Grid) Index(i, j int) int { return j*g.NX + i }

// Len returns the number of nodes.
func (g Grid) Len() int { return g.NX * g.NY }

// Cells returns the number of grid cells, (NX−1)(NY−1).
func (g Grid) Cells() int { return (g.NX - 1) * (g.NY - 1) }

// Coarsen returns the grid with twice the spacing over the same x range: every other node of g
// when NX − 1 is even. ok is false when g cannot be halved (NX − 1 odd or too few nodes).
func (g Grid) Coarsen() (c Grid, ok bool) {
	if (g.NX-1)%2 != 0 || g.NX < 5 || g.NY < 5 {
		return Grid{}, false
	}
	return Grid{X0: g.X0, Y0: g.Y0, H: 2 * g.H, NX: (g.NX-1)/2 + 1, NY: (g.NY+1)/2 + 1}, true
}

// PlanGrid returns the grid for a channel from x = 0 to length whose walls lie within
// [ymin, ymax], with spacing as close to h as keeps the outlet on a node column (the spacing is
// reduced to length/ceil(length/h)). Rows run from ymin to at least ymax, so the first and last
// rows lie on or beyond the walls. It validates before anything is allocated.
func PlanGrid(length, ymin, ymax, h float64) (Grid, error) {
	if !(length > 0) || !(h > 0) || !(ymax > ymin) || math.IsInf(length, 0) || math.IsInf(ymax-ymin, 0) {
		return Grid{}, fmt.Errorf("grid: impossible extent (length %g, y from %g to %g, spacing %g)", length, ymin, ymax, h)
	}
	cols := math.Ceil(length/h - 1e-9)
	rows := math.Ceil((ymax-ymin)/(length/cols) - 1e-9)
	if cols*rows > 1<<34 {
		return Grid{}, fmt.Errorf("grid: %g × %g cells is far too many", cols, rows)
	}
	hh := length / cols
	return Grid{X0: 0, Y0: ymin, H: hh, NX: int(cols) + 1, NY: int(rows) + 1}, nil
}
