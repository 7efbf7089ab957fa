package render

import (
	"fmt"
	"image"
	"math"

	"phipsi/mesh"
)

// filled returns vals with every node outside the fluid given the mean of its valid
// neighbours (two sweeps, so a node two links from the fluid gets a value too) and NaN where
// none is near. Contours of a field that is not constant on the boundary (Cp, φ) then run up to
// the wall instead of stopping a cell short; the solid drawing covers what lies beyond it.
func (sc *scene) filled(vals []float64) []float64 {
	g := sc.g
	valid := sc.r.Field.Valid
	out := make([]float64, len(vals))
	known := make([]bool, len(vals))
	for k := range vals {
		if valid[k] {
			out[k] = vals[k]
			known[k] = true
		} else {
			out[k] = math.NaN()
		}
	}
	for range 2 {
		next := make([]bool, len(known))
		copy(next, known)
		for j := 0; j < g.NY; j++ {
			for i := 0; i < g.NX; i++ {
				k := j*g.NX + i
				if known[k] {
					continue
				}
				s, n := 0.0, 0
				if i > 0 && known[k-1] {
					s, n = s+out[k-1], n+1
				}
				if i < g.NX-1 && known[k+1] {
					s, n = s+out[k+1], n+1
				}
				if j > 0 && known[k-g.NX] {
					s, n = s+out[k-g.NX], n+1
				}
				if j < g.NY-1 && known[k+g.NX] {
					s, n = s+out[k+g.NX], n+1
				}
				if n > 0 {
					out[k] = s / float64(n)
					next[k] = true
				}
			}
		}
		known = next
	}
	return out
}

// gradient returns |∇f| at p from the grid cell around it (0 where it has no value).
func (f *nodeField) gradient(p mesh.Point) float64 {
	g := f.g
	fx, fy := (p.X-g.X0)/g.H, (p.Y-g.Y0)/g.H
	i, j := int(math.Floor(fx)), int(math.Floor(fy))
	if i < 0 || j < 0 || i >= g.NX-1 || j >= g.NY-1 {
		return 0
	}
	fx -= float64(i)
	fy -= float64(j)
	k := j*g.NX + i
	v00, v10, v01, v11 := f.v[k], f.v[k+1], f.v[k+g.NX], f.v[k+g.NX+1]
	gx := ((v10-v00)*(1-fy) + (v11-v01)*fy) / g.H
	gy := ((v01-v00)*(1-fx) + (v11-v10)*fx) / g.H
	r := math.Hypot(gx, gy)
	if math.IsNaN(r) {
		return 0
	}
	return r
}

// label is a placed contour label, in pixels.
type label struct {
	x, y, r float64
}

// drawLabelled strokes contour lines with their values written into gaps along them. Labels sit
// where the line is nearly straight over the label's length, inside the fluid, and clear of
// the other labels.
//
// Labels also stay out of places where the lines crowd: the local spacing between contours,
// step/|∇f| from the contoured field f, must leave room for the text.
func (sc *scene) drawLabelled(p *fieldPic, f *nodeField, levels []contourLevel, step float64, widthOf func(v float64) float64) {
	d := decimals(step)
	dc := p.dc
	fr := &p.fr
	fs := p.fs
	var placed []label
	textH := 0.85 * fs
	spacing := math.Max(18*fs, fr.width/3)
	for _, lv := range levels {
		txt := formatNum(lv.value, d)
		tw := p.measure(txt, faceSmall)
		half := tw/2 + 0.35*fs
		for _, pl := range lv.lines {
			xs, ys, cum := pixelPath(fr, pl.pts)
			total := cum[len(cum)-1]
			var gaps [][2]float64
			type spot struct{ x, y, ang float64 }
			var spots []spot
			if total > 5*half {
				var cands []float64
				if total < 2*spacing {
					cands = []float64{total / 2, total / 3, 2 * total / 3}
				} else {
					for s := spacing / 2; s < total-half; s += spacing {
						cands = append(cands, s)
					}
				}
				for _, s := range cands {
					if len(gaps) > 0 && total < 2*spacing {
						break // one label on a short line
					}
					ax, ay := along(xs, ys, cum, s-half)
					bx, by := along(xs, ys, cum, s+half)
					cx, cy := along(xs, ys, cum, s)
					if math.Hypot(bx-ax, by-ay) < 0.9*2*half {
						continue // the line bends under the label
					}
					if !sc.clearSpot(fr, cx, cy, ax, ay, bx, by, textH) {
						continue
					}
					if g := f.gradient(fr.world(cx, cy)); g > 0 && step/g*fr.scale < 2.4*textH {
						continue
					}
					r := half + 0.2*fs
					ok := true
					for _, q := range placed {
						if math.Hypot(q.x-cx, q.y-cy) < q.r+r+0.5*fs {
							ok = false
							break
						}
					}
					if !ok {
						continue
					}
					placed = append(placed, label{cx, cy, r})
					gaps = append(gaps, [2]float64{s - half, s + half})
					ang := math.Atan2(by-ay, bx-ax)
					if ang > math.Pi/2 {
						ang -= math.Pi
					} else if ang < -math.Pi/2 {
						ang += math.Pi
					}
					spots = append(spots, spot{cx, cy, ang})
				}
			}
			dc.SetLineWidth(widthOf(lv.value) * p.lw)
			setColour(dc, inkColour, 0.85)
			strokeWithGaps(p.canvas, xs, ys, cum, gaps)
			for _, sp := range spots {
				dc.Push()
				dc.RotateAbout(sp.ang, sp.x, sp.y)
				p.text(txt, sp.x, sp.y, 0.5, 0.35, faceSmall, inkColour)
				dc.Pop()
			}
		}
	}
}

// clearSpot reports whether a label centred at (cx, cy) between (ax, ay) and (bx, by) lies in
// the fluid and inside the plot, with half a text height to spare.
func (sc *scene) clearSpot(fr *frame, cx, cy, ax, ay, bx, by, h float64) bool {
	dx, dy := bx-ax, by-ay
	l := math.Hypot(dx, dy)
	nx, ny := -dy/l*h, dx/l*h
	pts := [][2]float64{{cx, cy}, {ax, ay}, {bx, by}, {ax + nx, ay + ny}, {ax - nx, ay - ny}, {bx + nx, by + ny}, {bx - nx, by - ny}, {cx + nx, cy + ny}, {cx - nx, cy - ny}}
	for _, q := range pts {
		if q[0] < fr.left+h || q[0] > fr.left+fr.width-h || q[1] < fr.top+h || q[1] > fr.top+fr.height-h {
			return false
		}
		if !sc.m.Geom.InFluid(fr.world(q[0], q[1])) {
			return false
		}
	}
	return true
}

// pixelPath returns the pixel coordinates of pts and the cumulative length along them.
func pixelPath(fr *frame, pts []mesh.Point) (xs, ys, cum []float64) {
	xs = make([]float64, len(pts))
	ys = make([]float64, len(pts))
	cum = make([]float64, len(pts))
	for k, q := range pts {
		xs[k], ys[k] = fr.px(q)
		if k > 0 {
			cum[k] = cum[k-1] + math.Hypot(xs[k]-xs[k-1], ys[k]-ys[k-1])
		}
	}
	return xs, ys, cum
}

// along returns the point at length s along a pixel path (clamped to its ends).
func along(xs, ys, cum []float64, s float64) (float64, float64) {
	n := len(cum)
	if s <= 0 {
		return xs[0], ys[0]
	}
	if s >= cum[n-1] {
		return xs[n-1], ys[n-1]
	}
	lo, hi := 0, n-1
	for hi-lo > 1 {
		mid := (lo + hi) / 2
		if cum[mid] <= s {
			lo = mid
		} else {
			hi = mid
		}
	}
	f := 0.0
	if cum[hi] > cum[lo] {
		f = (s - cum[lo]) / (cum[hi] - cum[lo])
	}
	return xs[lo] + f*(xs[hi]-xs[lo]), ys[lo] + f*(ys[hi]-ys[lo])
}

// strokeWithGaps strokes a pixel path, leaving out the stretches gaps (sorted, in length along
// the path).
func strokeWithGaps(c *canvas, xs, ys, cum []float64, gaps [][2]float64) {
	dc := c.dc
	n := len(xs)
	if n < 2 {
		return
	}
	g := 0
	drawing := false
	lx, ly := 0.0, 0.0
	emit := func(x, y float64, force bool) {
		if !drawing {
			dc.MoveTo(x, y)
			drawing = true
			lx, ly = x, y
			return
		}
		if force || (x-lx)*(x-lx)+(y-ly)*(y-ly) >= 1.0/9 {
			dc.LineTo(x, y)
			lx, ly = x, y
		}
	}
	for k := 0; k < n; k++ {
		s := cum[k]
		// Close the stretches that end before this point.
		for g < len(gaps) && s > gaps[g][0] {
			if k > 0 && cum[k-1] < gaps[g][0] {
				x, y := along(xs, ys, cum, gaps[g][0])
				emit(x, y, true)
			}
			if drawing {
				dc.Stroke()
				drawing = false
			}
			if s < gaps[g][1] {
				break // this point is inside the gap
			}
			x, y := along(xs, ys, cum, gaps[g][1])
			emit(x, y, true)
			g++
		}
		if g < len(gaps) && s >= gaps[g][0] && s < gaps[g][1] {
			continue
		}
		emit(xs[k], ys[k], k == n-1)
	}
	if drawing {
		dc.Stroke()
	}
}

// pressure draws pressure.png.
func (sc *scene) pressure() *image.RGBA {
	p := sc.newFieldPic()
	f := sc.r.Field
	lo, _, min, max := robustRange(f.Cp, f.Valid, 1, cpLowQuantile, 1)
	// A scale symmetric about Cp = 0, to a round number covering the robust range.
	a := math.Max(math.Abs(lo), math.Abs(max))
	st := niceStep(a, 4) / 2
	a = math.Ceil(a/st-1e-9) * st
	if a <= 0 {
		a = 1
	}
	cm := newColormap(&pressureTable, -a, a, 0)
	sc.shade(p, f.Cp, 1, cm)
	// Contours at a round step, about ten across the robust range.
	step := niceStep(max-lo, 10)
	var levels []float64
	for _, v := range ticks(min, max, step) {
		if v > min && v < max-1e-3*step {
			levels = append(levels, v)
		}
	}
	nf := &nodeField{g: sc.g, v: sc.filled(f.Cp)}
	cs := nf.contours(levels)
	sc.drawLabelled(p, nf, cs, step, func(v float64) float64 {
		if v == 0 {
			return 1.7
		}
		return 0.9
	})
	sc.drawSolids(p.canvas, &p.fr)
	p.axes()
	p.header(sc.title, fmt.Sprintf("pressure coefficient Cp = (p − p_inlet)/(½ρU²), contours every %s", formatNum(step, decimals(step))))
	sc.caption(p.canvas, p.fr.left, p.footerTop+0.9*p.fs)
	q := sc.r.Q2()
	p.colourBar(scaleBar{cm: cm, label: "Cp", dimLabel: "Pa", offset: sc.r.Fluid.Pressure, factor: q,
		extendLo: min < -a*(1+1e-9), markZero: true})
	return p.img
}

// maxFlownetLines bounds the equipotentials of a flow net; a longer domain doubles the
// increment (of both families, so the cells stay square).
const maxFlownetLines = 600

// flownet draws flownet.png: streamlines and equipotentials at the same increment, so each cell
// of the net is close to a square (Δφ = Δψ, the Cauchy–Riemann relations).
func (sc *scene) flownet() *image.RGBA {
	p := sc.newFieldPic()
	f := sc.r.Field
	hi, over := sc.speedScale()
	cm := newColormap(&speedTable, 0, hi, 0.72)
	sc.shade(p, f.Speed, 1/sc.r.Speed, cm)
	_, _, pmin, pmax := robustRange(sc.phi, f.Valid, 1, 0, 1)
	_, _, _, vmax := robustRange(f.Speed, f.Valid, 1, 0, 1)
	delta := sc.r.Q / psiSteps
	mult := 1
	for (pmax-pmin)/delta > maxFlownetLines {
		delta *= 2
		mult *= 2
	}
	var levels []float64
	for _, v := range ticks(pmin, pmax, delta) {
		if v > pmin && v < pmax {
			levels = append(levels, v)
		}
	}
	// A cell across which φ changes by much more than the fastest flow allows holds the jump of
	// a circulating potential across its cut: not drawn.
	nf := &nodeField{g: sc.g, v: sc.filled(sc.phi), maxJump: 4 * vmax * sc.g.H}
	cs := nf.contours(levels)
	dc := p.dc
	dc.SetLineJoinRound()
	dc.SetLineWidth(1.0 * p.lw)
	setColour(dc, phiColour, 0.9)
	for _, lv := range cs {
		for _, pl := range lv.lines {
			p.polyline(&p.fr, pl.pts)
		}
	}
	for _, l := range sc.streamlineLevels() {
		if l.kind == psiFine {
			continue
		}
		k := int(math.Round(l.value / sc.r.Q * psiSteps))
		if l.kind == psiMain && k%mult != 0 {
			continue
		}
		w := 1.1
		if l.kind == psiDividing {
			w = 1.6
		}
		dc.SetLineWidth(w * p.lw)
		setColour(dc, streamColour, 1)
		for _, pl := range l.lines {
			p.polyline(&p.fr, pl.pts)
		}
	}
	sc.drawSolids(p.canvas, &p.fr)
	p.axes()
	p.header(sc.title, fmt.Sprintf("flow net: streamlines (dark) and equipotentials (brown), Δψ = Δφ = %s m²/s", formatSig(delta, 3)))
	sc.caption(p.canvas, p.fr.left, p.footerTop+0.9*p.fs)
	p.colourBar(sc.speedBar(cm, over))
	return p.img
}
