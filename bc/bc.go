package bc

import (
	"fmt"
	"math"

	"phipsi/mesh"
)

// Body is the condition that closes one body's unknown constant ψ.
type Body struct {
	// Kutta asks for the circulation that makes the flow leave the trailing edge smoothly.
	Kutta bool
	// Circulation is the given circulation Γ = ∮ v·ds, counter-clockwise positive, m²/s. Used
	// when Kutta is false; zero by default.
	Circulation float64
	// TrailingEdge, with Kutta, names the trailing edge; nil means the sharpest convex corner.
	TrailingEdge *mesh.Point
}

// Set is the complete set of boundary conditions of one scenario.
type Set struct {
	Speed         float64 // U: mean inflow speed across the inlet, m/s
	InletLow      float64 // lower wall y at the inlet, m
	InletHigh     float64 // upper wall y at the inlet, m
	Q             float64 // flow rate per unit depth, U·(InletHigh − InletLow), m²/s
	Bodies        []Body
	TrailingEdges []TrailingEdge // per body: the corner used by the Kutta condition (zero value otherwise)

	// Outer, when set, replaces the channel conditions for verification against known
	// solutions: the walls, the inlet and the outlet all take ψ = Outer(p) (an exact far field
	// imposed on a box).
	Outer func(p mesh.Point) float64
	// Prescribed, when set, gives every body the boundary value ψ = Prescribed(p) instead of an
	// unknown constant (manufactured solutions); the body conditions are then ignored.
	// Outer and Prescribed are called from several goroutines at once (assembly and the
	// expansion of the solution to the grid share the rows out).
	Prescribed func(p mesh.Point) float64
}

// TrailingEdge is the sharp corner a Kutta condition applies at.
type TrailingEdge struct {
	mesh.Corner
	Set bool
}

// New returns the conditions for mesh m with inflow speed u and one Body per body of the mesh.
func New(m *mesh.Mesh, u float64, bodies []Body) (*Set, error) {
	if !(u > 0) || math.IsInf(u, 0) {
		return nil, fmt.Errorf("inflow speed must be > 0, got %g", u)
	}
	if len(bodies) != len(m.Geom.Bodies) {
		return nil, fmt.Errorf("bc: %d body conditions for %d bodies", len(bodies), len(m.Geom.Bodies))
	}
	lo, hi := m.Geom.Lower.Y(0), m.Geom.Upper.Y(0)
	if !(hi > lo) {
		return nil, fmt.Errorf("inlet height must be > 0, got %g", hi-lo)
	}
	s := &Set{Speed: u, InletLow: lo, InletHigh: hi, Q: u * (hi - lo), Bodies: bodies,
		TrailingEdges: make([]TrailingEdge, len(bodies))}
	for k, b := range bodies {
		if b.Kutta {
			if b.Circulation != 0 {
				return nil, fmt.Errorf("body %q: a given circulation and the Kutta condition exclude each other", m.Geom.Bodies[k].Name)
			}
			te, err := trailingEdge(m.Geom.Bodies[k], b.TrailingEdge)
			if err != nil {
				return nil, err
			}
			s.TrailingEdges[k] = TrailingEdge{Corner: te, Set: true}
		} else if math.IsNaN(b.Circulation) || math.IsInf(b.Circulation, 0) {
			return nil, fmt.Errorf("body %q: circulation must be finite", m.Geom.Bodies[k].Name)
		}
	}
	return s, nil
}

// trailingEdge picks the sharpest convex corner of a body, or the corner nearest to the given
// point (which must lie within 5 % of the body's size of it).
func trailingEdge(b mesh.Body, near *mesh.Point) (mesh.Corner, error) {
	cs := b.Shape.Corners()
	if len(cs) == 0 {
		return mesh.Corner{}, fmt.Errorf("body %q: the Kutta condition needs a sharp trailing edge (a polygon or NACA section)", b.Name)
	}
	best := 0
	for i, c := range cs {
		if near != nil {
			if c.P.Sub(*near).Norm() < cs[best].P.Sub(*near).Norm() {
				best = i
			}
		} else if c.Angle < cs[best].Angle {
			best = i
		}
	}
	c := cs[best]
	box := b.Shape.Bounds()
	if near != nil && c.P.Sub(*near).Norm() > 0.05*box.Max.Sub(box.Min).Norm() {
		return mesh.Corner{}, fmt.Errorf("body %q: trailing_edge (%g, %g) is not a corner of the outline (nearest corner at (%g, %g))", b.Name, near.X, near.Y, c.P.X, c.P.Y)
	}
	if c.Angle > math.Pi*0.75 {
		return mesh.Corner{}, fmt.Errorf("body %q: its sharpest corner has an interior angle of %.1f°, too blunt for a Kutta condition (at most 135°)", b.Name, c.Angle*180/math.Pi)
	}
	return c, nil
}

// InletPsi returns ψ on the inlet at height y: uniform inflow, so ψ rises linearly from 0 on the
// lower wall to Q on the upper.
func (s *Set) InletPsi(y float64) float64 { return s.Speed * (y - s.InletLow) }

// WallPsi returns ψ on wall id (mesh.LowerWall: 0, mesh.UpperWall: Q) in the channel
// conditions (Outer unset).
func (s *Set) WallPsi(id int) float64 {
	switch id {
	case mesh.LowerWall:
		return 0
	case mesh.UpperWall:
		return s.Q
	}
	panic(fmt.Sprintf("bc: boundary %d is not a wall", id))
}
