package scenario

import (
	"fmt"
	"math"

	"phipsi/bc"
	"phipsi/mesh"
)

// Plan is a scenario whose geometry has been built and checked and whose grid is known, before
// any grid-sized memory is allocated.
type Plan struct {
	Scenario *Scenario
	Geom     *mesh.Geometry
	Grid     mesh.Grid
	Bodies   []bc.Body
	// Memory is the estimated peak memory of a run, bytes (see EstimateMemory).
	Memory int64
}

// EstimateMemory returns the estimated peak memory of a run on grid g with the given number of
// bodies, bytes. The model is fitted to peaks measured with /usr/bin/time on the bundled
// scenarios (240k to 920k nodes, with their pictures), a 1M-node channel with pictures and a
// 4M-node and a 16M-node channel without (all within 20 %, above the measurement but for the
// 1M-node channel, 2 % below): about 140 B per node for the classification, the ψ and φ systems,
// the multigrid hierarchy, the Krylov vectors, the solution and derived fields and the
// collector's headroom (the stages reuse each other's memory, so the peak is the largest stage's),
// 10 B per node for each body's solution vector, and a fixed 40 MiB for the program, its
// pictures and tables.
func EstimateMemory(g mesh.Grid, bodies int) int64 {
	perNode := 140 + 10*bodies
	return int64(g.Len())*int64(perNode) + 40<<20
}

// Plan builds the geometry, checks it (walls that cross, bodies outside the channel, touching a
// wall or each other, probes outside the fluid) and plans the grid. A spacing > 0 overrides the
// scenario's. Every error is an *Error positioned at the offending key.
func (s *Scenario) Plan(spacing float64) (*Plan, error) {
	ch := s.Channel
	smooth := ch.Profile == "smooth"
	lower, err := mesh.NewWall(points(ch.Lower), smooth, false)
	if err != nil {
		return nil, s.Errorf(wallKey("lower", ch.Height), "%v", err)
	}
	upper, err := mesh.NewWall(points(ch.Upper), smooth, true)
	if err != nil {
		return nil, s.Errorf(wallKey("upper", ch.Height), "%v", err)
	}
	geo := &mesh.Geometry{Length: ch.Length, Lower: lower, Upper: upper}
	if x, gap := narrowest(geo); !(gap > 0) {
		return nil, s.Errorf(wallKey("upper", ch.Height), "the walls touch or cross at x = %.6g (upper − lower = %.6g m); the upper wall must stay above the lower", x, gap)
	}
	inlet := upper.Y(0) - lower.Y(0)

	h := spacing
	if !(h > 0) {
		h = s.Grid.Spacing
		if s.Grid.CellsAcross > 0 {
			h = inlet / float64(s.Grid.CellsAcross)
		}
	}
	for k := range s.Obstacles {
		o := &s.Obstacles[k]
		shape, err := o.shape(h)
		if err != nil {
			return nil, s.Errorf(fmt.Sprintf("obstacle[%d]", k), "%v", err)
		}
		geo.Bodies = append(geo.Bodies, mesh.Body{Name: o.Name, Shape: shape})
	}
	if err := s.checkBodies(geo); err != nil {
		return nil, err
	}
	if err := s.checkGaps(geo, h); err != nil {
		return nil, err
	}
	for k, p := range s.Probes {
		if !geo.InFluid(mesh.Point{X: p.At[0], Y: p.At[1]}) {
			return nil, s.Errorf(fmt.Sprintf("probe[%d].at", k), "(%g, %g) is not in the fluid: it must lie inside the channel (0 ≤ x ≤ %g, between the walls) and outside every obstacle", p.At[0], p.At[1], ch.Length)
		}
	}
	lo, _ := lower.Extent()
	_, hi := upper.Extent()
	g, err := mesh.PlanGrid(ch.Length, lo, hi, h)
	if err != nil {
		return nil, s.Errorf(s.spacingKey(spacing), "%v", err)
	}
	if g.NY < 4 {
		return nil, s.Errorf(s.spacingKey(spacing), "spacing %g m leaves fewer than 3 cells across the channel", h)
	}
	p := &Plan{Scenario: s, Geom: geo, Grid: g, Memory: EstimateMemory(g, len(geo.Bodies))}
	for _, o := range s.Obstacles {
		b := bc.Body{Kutta: o.Kutta, Circulation: o.Circulation}
		if o.HasTrailingEdge {
			b.TrailingEdge = &mesh.Point{X: o.TrailingEdge[0], Y: o.TrailingEdge[1]}
		}
		p.Bodies = append(p.Bodies, b)
	}
	return p, nil
}

// spacingKey names the key a spacing problem belongs to.
func (s *Scenario) spacingKey(override float64) string {
	if override > 0 || s.Grid.CellsAcross == 0 {
		return "grid.spacing"
	}
	return "grid.cells_across"
}

func wallKey(name string, height float64) string {
	if height > 0 {
		return "channel.height"
	}
	return "channel." + name
}

// Build classifies the grid and sets up the boundary conditions.
func (p *Plan) Build() (*mesh.Mesh, *bc.Set, error) {
	m, err := mesh.Build(p.Geom, p.Grid)
	if err != nil {
		return nil, nil, err
	}
	set, err := bc.New(m, p.Scenario.Inflow.Speed, p.Bodies)
	if err != nil {
		return nil, nil, p.Scenario.Errorf("obstacle", "%v", err)
	}
	return m, set, nil
}

func points(ps [][2]float64) []mesh.Point {
	out := make([]mesh.Point, len(ps))
	for i, p := range ps {
		out[i] = mesh.Point{X: p[0], Y: p[1]}
	}
	return out
}

// narrowest returns the x where upper − lower is smallest over [0, L], checked at every knot of
// both walls and at 4000 points between.
func narrowest(geo *mesh.Geometry) (float64, float64) {
	bestX, best := 0.0, math.Inf(1)
	try := func(x float64) {
		_, lowTop := geo.Lower.Range(x)
		upBottom, _ := geo.Upper.Range(x)
		if gap := upBottom - lowTop; gap < best || math.IsNaN(gap) {
			bestX, best = x, gap
		}
	}
	const n = 4000
	for i := 0; i <= n; i++ {
		try(geo.Length * float64(i) / n)
	}
	for _, w := range []*mesh.Wall{geo.Lower, geo.Upper} {
		for _, sp := range w.Sample(geo.Length / n) {
			try(sp.P.X)
		}
	}
	return bestX, best
}

// shape builds the outline of one obstacle; h sets the resolution of NACA sections.
func (o *Obstacle) shape(h float64) (mesh.Shape, error) {
	deg := math.Pi / 180
	c := mesh.Point{X: o.Center[0], Y: o.Center[1]}
	switch o.Shape {
	case "circle":
		return mesh.NewCircle(c, o.Radius), nil
	case "ellipse":
		return mesh.NewEllipse(c, o.SemiAxes[0], o.SemiAxes[1], o.Angle*deg), nil
	case "rectangle":
		return mesh.NewRectangle(c, o.Size[0], o.Size[1], o.Angle*deg, o.CornerRadius)
	case "polygon":
		return mesh.NewPolygon(points(o.Points))
	case "naca4":
		// Points per surface: at least 120, and about two per grid spacing along the chord so the
		// outline is finer than the grid that sees it.
		n := int(math.Min(4000, math.Max(120, math.Ceil(2*o.Chord/h))))
		return mesh.NACA4(o.Code, o.Chord, mesh.Point{X: o.LeadingEdge[0], Y: o.LeadingEdge[1]}, o.Angle*deg, n)
	}
	return nil, fmt.Errorf("unknown shape %q", o.Shape)
}

// checkBodies refuses bodies that leave the channel, touch a wall or touch or overlap each other.
func (s *Scenario) checkBodies(geo *mesh.Geometry) error {
	samples := make([][]mesh.SurfacePoint, len(geo.Bodies))
	for k, b := range geo.Bodies {
		box := b.Shape.Bounds()
		size := math.Max(box.Max.X-box.Min.X, box.Max.Y-box.Min.Y)
		samples[k] = b.Shape.Sample(size / 2000)
		key := fmt.Sprintf("obstacle[%d]", k)
		if box.Min.X <= 0 || box.Max.X >= geo.Length {
			return s.Errorf(key, "%q reaches x = %.6g..%.6g, beyond the channel's 0..%g: obstacles must lie inside the channel", b.Name, box.Min.X, box.Max.X, geo.Length)
		}
		for _, p := range samples[k] {
			_, hi := geo.Lower.Range(p.P.X)
			up, _ := geo.Upper.Range(p.P.X)
			if p.P.Y <= hi || p.P.Y >= up {
				which := "lower"
				if p.P.Y >= up {
					which = "upper"
				}
				return s.Errorf(key, "%q touches or crosses the %s wall near (%.6g, %.6g): obstacles must lie inside the channel", b.Name, which, p.P.X, p.P.Y)
			}
		}
		// A body corner may poke through a wall between wall samples: test wall points too.
		for _, w := range []*mesh.Wall{geo.Lower, geo.Upper} {
			for _, p := range w.SampleBetween(box.Min.X, box.Max.X, size/2000) {
				if b.Shape.Contains(p.P) {
					return s.Errorf(key, "%q crosses a wall near (%.6g, %.6g): obstacles must lie inside the channel", b.Name, p.P.X, p.P.Y)
				}
			}
		}
	}
	for a := range geo.Bodies {
		for b := a + 1; b < len(geo.Bodies); b++ {
			A, B := geo.Bodies[a], geo.Bodies[b]
			if !A.Shape.Bounds().Overlaps(B.Shape.Bounds()) {
				continue
			}
			key := fmt.Sprintf("obstacle[%d]", b)
			for _, p := range samples[a] {
				if B.Shape.Contains(p.P) {
					return s.Errorf(key, "%q overlaps %q near (%.6g, %.6g): obstacles must not touch", B.Name, A.Name, p.P.X, p.P.Y)
				}
			}
			for _, p := range samples[b] {
				if A.Shape.Contains(p.P) {
					return s.Errorf(key, "%q overlaps %q near (%.6g, %.6g): obstacles must not touch", B.Name, A.Name, p.P.X, p.P.Y)
				}
			}
		}
	}
	return nil
}

// MinGapCells is the narrowest gap, in grid spacings, between a body and a wall or another body
// that the grid can resolve: at two cells the peak speed in a cylinder's gap to a wall is within
// 1 % of the converged value, at one and a half already 8 % off, and at one cell no fluid node
// may lie in the gap at all. Narrower gaps are refused with the spacing that would resolve them;
// gaps under four cells are run with a warning.
const MinGapCells = 2

// checkGaps refuses a body closer than MinGapCells·h to a wall or another body.
func (s *Scenario) checkGaps(geo *mesh.Geometry, h float64) error {
	ds := h / 4
	walls := [2][]mesh.SurfacePoint{geo.Lower.Sample(ds), geo.Upper.Sample(ds)}
	samples := make([][]mesh.SurfacePoint, len(geo.Bodies))
	for k, b := range geo.Bodies {
		samples[k] = b.Shape.Sample(ds)
	}
	limit := MinGapCells * h
	for k, b := range geo.Bodies {
		box := b.Shape.Bounds().Grow(limit)
		for w, name := range [2]string{"lower wall", "upper wall"} {
			for _, q := range walls[w] {
				if q.P.X < box.Min.X || q.P.X > box.Max.X || q.P.Y < box.Min.Y || q.P.Y > box.Max.Y {
					continue
				}
				for _, p := range samples[k] {
					if d := p.P.Sub(q.P).Norm(); d < limit {
						return s.Errorf(fmt.Sprintf("obstacle[%d]", k), "%q is %.3g m (%.1f cells) from the %s near x = %.4g m; the grid needs at least %d cells across a gap to resolve the flow through it: use a spacing of at most %.3g m", b.Name, d, d/h, name, p.P.X, MinGapCells, d/4)
					}
				}
			}
		}
		for j := k + 1; j < len(geo.Bodies); j++ {
			if !box.Overlaps(geo.Bodies[j].Shape.Bounds()) {
				continue
			}
			for _, q := range samples[j] {
				for _, p := range samples[k] {
					if d := p.P.Sub(q.P).Norm(); d < limit {
						return s.Errorf(fmt.Sprintf("obstacle[%d]", j), "%q is %.3g m (%.1f cells) from %q; the grid needs at least %d cells across a gap to resolve the flow through it: use a spacing of at most %.3g m", geo.Bodies[j].Name, d, d/h, b.Name, MinGapCells, d/4)
					}
				}
			}
		}
	}
	return nil
}
