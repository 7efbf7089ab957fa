package flow

import (
	"fmt"
	"math"

	"phipsi/mesh"
)

// BodySummary is the design-review numbers of one body.
type BodySummary struct {
	Name        string
	Psi         float64 // the body's constant stream function, m²/s
	Circulation float64 // Γ, counter-clockwise positive, m²/s
	MaxSpeed    Extreme // m/s
	MinCp       Extreme
	// Force is the pressure force per unit span, −∮ p n ds with n out of the body, N/m.
	Force [2]float64
	// Stagnation lists the surface points where the surface velocity changes sign.
	Stagnation  []mesh.Point
	CellsAcross float64 // frontal height ÷ grid spacing
	Frontal     float64 // frontal height (y extent), m
}

// WallSummary is the design-review numbers of one wall.
type WallSummary struct {
	Name         string
	MinCp, MaxCp Extreme
	// MaxAdverseGradient is the largest dCp/dx along the wall (pressure rising downstream), 1/m,
	// at X; zero when the pressure never rises.
	MaxAdverseGradient float64
	MaxAdverseAt       mesh.Point
}

// Body returns the summary of body k.
func (r *Result) Body(k int) BodySummary {
	sol := r.Sol
	m := sol.Sys.Mesh
	s := &r.Surfaces[2+k]
	box := m.Geom.Bodies[k].Shape.Bounds()
	b := BodySummary{
		Name:        s.Name,
		Psi:         sol.BodyPsi[k],
		Circulation: sol.Circulation[k],
		MaxSpeed:    s.MaxSpeed(true),
		Frontal:     box.Max.Y - box.Min.Y,
	}
	b.MinCp = extreme(s.Points, true, -1, func(v *SurfaceValue) float64 { return v.Cp })
	b.CellsAcross = b.Frontal / m.Grid.H
	q := r.Q2()
	for _, p := range s.Points {
		b.Force[0] -= q * p.Cp * p.N.X * p.W
		b.Force[1] -= q * p.Cp * p.N.Y * p.W
	}
	b.Stagnation = stagnation(s.Points)
	return b
}

// stagnation finds the sign changes of the surface velocity around a closed surface, placed by
// linear interpolation between the two samples.
func stagnation(pts []SurfaceValue) []mesh.Point {
	var out []mesh.Point
	n := len(pts)
	for i := range n {
		a, b := &pts[i], &pts[(i+1)%n]
		if (a.VT > 0) == (b.VT > 0) || a.VT == b.VT {
			continue
		}
		f := a.VT / (a.VT - b.VT)
		out = append(out, a.P.Add(b.P.Sub(a.P).Scale(f)))
	}
	return out
}

// Wall returns the summary of wall id (mesh.LowerWall or mesh.UpperWall).
func (r *Result) Wall(id int) WallSummary {
	s := &r.Surfaces[id]
	w := WallSummary{Name: s.Name}
	w.MinCp = extreme(s.Points, false, -1, func(v *SurfaceValue) float64 { return v.Cp })
	w.MaxCp = extreme(s.Points, false, 1, func(v *SurfaceValue) float64 { return v.Cp })
	w.MaxAdverseGradient, w.MaxAdverseAt = maxAdverse(s.Points, r.Sol.Sys.Mesh.Grid.H)
	return w
}

// maxAdverse returns the largest dCp/dx between neighbouring samples at least H/4 apart in x
// (step faces, where x does not advance, are skipped) and the midpoint where it occurs.
func maxAdverse(pts []SurfaceValue, h float64) (float64, mesh.Point) {
	best, at := 0.0, mesh.Point{}
	for i := 1; i < len(pts); i++ {
		a, b := &pts[i-1], &pts[i]
		dx := b.P.X - a.P.X
		if dx < h/4 {
			continue
		}
		if g := (b.Cp - a.Cp) / dx; g > best {
			best, at = g, a.P.Add(b.P).Scale(0.5)
		}
	}
	return best, at
}

// ProbeValue is the flow at a named point.
type ProbeValue struct {
	Name     string
	At       mesh.Point
	U, V     float64 // m/s
	Speed    float64 // m/s
	Pressure float64 // Pa
	Cp       float64
}

// Probe evaluates the flow at p from a harmonic fit to the fluid nodes that can see it.
func (r *Result) Probe(name string, p mesh.Point) (ProbeValue, error) {
	m := r.Sol.Sys.Mesh
	if !m.InFluid(p) {
		return ProbeValue{}, fmt.Errorf("probe %q at (%g, %g) is not in the fluid", name, p.X, p.Y)
	}
	gx, gy, ok := gradient(m, r.Sol.Psi, p, p, false, 0)
	if !ok {
		return ProbeValue{}, fmt.Errorf("probe %q at (%g, %g): too few fluid nodes around it; refine the grid", name, p.X, p.Y)
	}
	u, v := gy, -gx
	sp := math.Hypot(u, v)
	return ProbeValue{Name: name, At: p, U: u, V: v, Speed: sp, Pressure: r.Pressure(sp), Cp: r.Cp(sp)}, nil
}

// MinCp returns the lowest Cp on any wall or body, and where.
func (r *Result) MinCp() (Extreme, string) {
	var best Extreme
	name := ""
	for i := range r.Surfaces {
		s := &r.Surfaces[i]
		e := extreme(s.Points, s.Boundary >= 2, -1, func(v *SurfaceValue) float64 { return v.Cp })
		if name == "" || e.Value < best.Value {
			best, name = e, s.Name
		}
	}
	return best, name
}

// MaxFieldSpeed returns the highest nodal speed in the field and where.
func (r *Result) MaxFieldSpeed() (float64, mesh.Point) {
	f := r.Field
	best, at := 0.0, mesh.Point{}
	for k, ok := range f.Valid {
		if ok && f.Speed[k] > best {
			best, at = f.Speed[k], f.Grid.At(k%f.Grid.NX, k/f.Grid.NX)
		}
	}
	return best, at
}
