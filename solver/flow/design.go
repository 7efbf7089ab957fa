package flow

import (
	"math"

	"phipsi/mesh"
)

// AdverseThreshold is the rate of pressure rise along a wall, dCp/d(x/H) with H the inlet height,
// above which a stretch is reported as adverse: a rise of 5 % of the dynamic pressure per channel
// height. StrongAdverse is the recovery over one stretch, as a fraction of the local dynamic
// pressure where the stretch starts, above which a warning is raised: ideal flow cannot show
// separation, and a wall boundary layer asked to give up more than half of its dynamic pressure
// is at risk (a screening threshold of our own, in the spirit of the common practice of limiting
// diffuser pressure recovery).
const (
	AdverseThreshold = 0.05
	StrongAdverse    = 0.5
)

// Stretch is an x-range of a wall where the pressure rises downstream faster than
// AdverseThreshold.
type Stretch struct {
	X0, X1  float64 // m
	CpRise  float64 // Cp at X1 minus Cp at X0
	MaxGrad float64 // largest dCp/dx in the stretch, 1/m
	// Recovery is the pressure rise as a fraction of the local dynamic pressure at X0,
	// CpRise/(1 − Cp(X0)) = (p₁ − p₀)/(½ρV₀²).
	Recovery float64
}

// Strong reports whether the stretch recovers more than StrongAdverse of its dynamic pressure.
func (s Stretch) Strong() bool { return s.Recovery > StrongAdverse }

// AdverseStretches returns the adverse stretches of wall id (0 lower, 1 upper).
func (r *Result) AdverseStretches(id int) []Stretch {
	pts := r.Surfaces[id].Points
	m := r.Sol.Sys.Mesh
	hIn := r.Sol.Sys.BC.InletHigh - r.Sol.Sys.BC.InletLow
	limit := AdverseThreshold / hIn
	var out []Stretch
	var cur *Stretch
	var cp0 float64
	for i := 1; i < len(pts); i++ {
		a, b := &pts[i-1], &pts[i]
		dx := b.P.X - a.P.X
		if dx < m.H/4 {
			continue // a step face: x does not advance
		}
		g := (b.Cp - a.Cp) / dx
		if g > limit {
			if cur == nil {
				out = append(out, Stretch{X0: a.P.X})
				cur = &out[len(out)-1]
				cp0 = a.Cp
			}
			cur.X1 = b.P.X
			cur.CpRise = b.Cp - cp0
			cur.Recovery = cur.CpRise / (1 - cp0)
			cur.MaxGrad = math.Max(cur.MaxGrad, g)
		} else {
			cur = nil
		}
	}
	return out
}

// Blockage is how much of the channel's section one body, or all bodies together, fill.
type Blockage struct {
	X       float64 // station, m
	Frontal float64 // blocked height at the station, m
	Height  float64 // channel height at the station, m
	Ratio   float64 // Frontal / Height
	// Classical is the first-order solid-blockage speed increment ε = Λσ, σ = (π²/48)(c/H)²
	// (Allen & Vincenti, NACA Report 782), with Λ from the body's equivalent ellipse of the same
	// length c and frontal height t: Λ = 2(t/c)(1 + t/c), exact for ellipses (Λ = 4 and
	// ε = (π²/12)(d/H)² for a circle). Zero for the all-bodies figure.
	Classical float64
	// WallIncrement is the computed rise of the wall speed at the station over the speed the
	// empty channel would have there, (V_wall/U_local − 1), averaged over both walls. To first
	// order the images of a body's doublet make it three times the solid-blockage increment.
	WallIncrement float64
}

// BodyBlockage returns body k's blockage at the station of its centre.
func (r *Result) BodyBlockage(k int) Blockage {
	m := r.Sol.Sys.Mesh
	geo := m.Geom
	box := geo.Bodies[k].Shape.Bounds()
	x := 0.5 * (box.Min.X + box.Max.X)
	b := Blockage{X: x, Frontal: box.Max.Y - box.Min.Y, Height: geo.Upper.Y(x) - geo.Lower.Y(x)}
	b.Ratio = b.Frontal / b.Height
	c := box.Max.X - box.Min.X
	tc := b.Frontal / c
	lambda := 2 * tc * (1 + tc)
	b.Classical = lambda * math.Pi * math.Pi / 48 * (c / b.Height) * (c / b.Height)
	b.WallIncrement = r.wallIncrement(x, b.Height)
	return b
}

// TotalBlockage returns the station where all bodies together block the largest fraction of the
// channel height, measured on 400 stations across the bodies' x-extent.
func (r *Result) TotalBlockage() Blockage {
	m := r.Sol.Sys.Mesh
	geo := m.Geom
	if len(geo.Bodies) == 0 {
		return Blockage{}
	}
	x0, x1 := math.Inf(1), math.Inf(-1)
	for _, b := range geo.Bodies {
		box := b.Shape.Bounds()
		x0, x1 = math.Min(x0, box.Min.X), math.Max(x1, box.Max.X)
	}
	best := Blockage{}
	var ts []float64
	const n = 400
	for s := 0; s <= n; s++ {
		x := x0 + (x1-x0)*float64(s)/n
		lo, hi := geo.Lower.Y(x), geo.Upper.Y(x)
		blocked := 0.0
		for _, b := range geo.Bodies {
			ts = b.Shape.Intersect(ts[:0], mesh.Point{X: x, Y: lo}, mesh.Point{X: x, Y: hi})
			if len(ts) < 2 {
				continue
			}
			tmin, tmax := ts[0], ts[0]
			for _, t := range ts {
				tmin, tmax = math.Min(tmin, t), math.Max(tmax, t)
			}
			blocked += (tmax - tmin) * (hi - lo)
		}
		if ratio := blocked / (hi - lo); ratio > best.Ratio {
			best = Blockage{X: x, Frontal: blocked, Height: hi - lo, Ratio: ratio}
		}
	}
	if best.Height > 0 {
		best.WallIncrement = r.wallIncrement(best.X, best.Height)
	}
	return best
}

// wallIncrement returns the mean over both walls of V_wall(x)/(Q/height) − 1.
func (r *Result) wallIncrement(x, height float64) float64 {
	local := r.Q / height
	sum, n := 0.0, 0
	for id := range 2 {
		pts := r.Surfaces[id].Points
		best, bestD := 0.0, math.Inf(1)
		for _, p := range pts {
			if d := math.Abs(p.P.X - x); d < bestD {
				best, bestD = p.Speed, d
			}
		}
		if !math.IsInf(bestD, 1) {
			sum += best/local - 1
			n++
		}
	}
	if n == 0 {
		return 0
	}
	return sum / float64(n)
}

// Clearance returns the smallest distance from body k to a wall and to any other body (+Inf when
// there is none), measured between boundary samples at spacing ds.
func (r *Result) Clearance(k int, ds float64) (wall, body float64) {
	m := r.Sol.Sys.Mesh
	geo := m.Geom
	own := geo.Bodies[k].Shape.Sample(ds)
	box := geo.Bodies[k].Shape.Bounds()
	// nearest is the least distance from q to the body's samples, or best when no sample can be
	// nearer than best: the samples lie in the body's box, so the distance from q to the box
	// bounds them all from below. Squared distances pick the nearest sample, whose distance is
	// then taken by Norm (two samples whose distances tie within rounding may swap, an ulp apart).
	nearest := func(q mesh.Point, best float64) float64 {
		dx := math.Max(0, math.Max(box.Min.X-q.X, q.X-box.Max.X))
		dy := math.Max(0, math.Max(box.Min.Y-q.Y, q.Y-box.Max.Y))
		if math.Hypot(dx, dy) >= best {
			return best
		}
		near, d2 := -1, math.Inf(1)
		for i, p := range own {
			ex, ey := p.P.X-q.X, p.P.Y-q.Y
			if e2 := ex*ex + ey*ey; e2 < d2 {
				near, d2 = i, e2
			}
		}
		if near >= 0 {
			best = math.Min(best, own[near].P.Sub(q).Norm())
		}
		return best
	}
	wall, body = math.Inf(1), math.Inf(1)
	for id := range 2 {
		for _, w := range m.Sample(id, ds) {
			wall = nearest(w.P, wall)
		}
	}
	for j, b := range geo.Bodies {
		if j == k {
			continue
		}
		for _, q := range b.Shape.Sample(ds) {
			body = nearest(q.P, body)
		}
	}
	return wall, body
}
