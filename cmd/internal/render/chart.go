package render

import (
	"fmt"
	"image"
	"image/color"
	"math"
	"sort"

	"phipsi/mesh"
	"phipsi/solver/flow"
)

// Layout of a chart, in units of the body font size.
const (
	chartMarginLeft  = 5.5 // Cp tick labels and label
	chartMarginRight = 5.5 // the second scale (Pa)
	chartHeader      = 3.0
	chartLegend      = 2.0
	chartFooter      = 4.8
	// chartAspect is the height of the plotting area as a fraction of the image width.
	chartAspect = 0.28
)

// cpAxis is a chart's plotting area: x to the right, Cp downwards (negative Cp up, the
// aerodynamic convention, so suction peaks point up).
type cpAxis struct {
	left, top, width, height float64
	x0, x1                   float64
	lo, hi                   float64 // Cp at the top and at the bottom
}

func (a *cpAxis) px(x, cp float64) (float64, float64) {
	return a.left + (x-a.x0)/(a.x1-a.x0)*a.width, a.top + (cp-a.lo)/(a.hi-a.lo)*a.height
}

// cpRange returns the Cp axis ends for the values vs: a round range over all of them, unless a
// few (corner singularities) lie far below the rest, in which case the axis covers the rest and
// clipped is true.
func cpRange(vs []float64) (lo, hi float64, clipped bool) {
	if len(vs) == 0 {
		return -1, 1, false
	}
	s := append([]float64(nil), vs...)
	sort.Float64s(s)
	min, max := s[0], s[len(s)-1]
	robust := s[int(0.01*float64(len(s)-1))]
	lo = min
	if span := max - robust; min < robust-0.5*math.Max(span, 0.2) {
		lo, clipped = robust-0.1*math.Max(span, 0.2), true
	}
	hi = max
	if hi-lo < 0.2 {
		mid := 0.5 * (hi + lo)
		lo, hi = mid-0.1, mid+0.1
	}
	st := niceStep(hi-lo, 6)
	lo = math.Floor(lo/st+1e-9) * st
	top := math.Ceil(hi/st-1e-9) * st
	if max <= 1+1e-9 && top > 1 && hi > 0.9 {
		top = 1 // Cp never exceeds 1, the stagnation value
	}
	return lo, top, clipped
}

// drawCpAxes draws the frame, Cp ticks on the left (with faint grid lines), pressure in Pa on
// the right, and the zero line.
func (sc *scene) drawCpAxes(c *canvas, a *cpAxis) {
	dc := c.dc
	fs := c.fs
	tick := 0.4 * fs
	n := max(3, int(a.height/(3.5*fs)))
	st := niceStep(a.hi-a.lo, n)
	d := decimals(st)
	lw := 0.0
	for _, v := range ticks(a.lo, a.hi, st) {
		_, y := a.px(a.x0, v)
		setColour(dc, color.RGBA{0xe3, 0xe5, 0xe8, 0xff}, 1)
		dc.SetLineWidth(c.lw)
		dc.DrawLine(a.left, y, a.left+a.width, y)
		dc.Stroke()
		setColour(dc, inkColour, 1)
		dc.DrawLine(a.left-tick, y, a.left, y)
		dc.Stroke()
		s := formatNum(v, d)
		lw = math.Max(lw, c.measure(s, faceBody))
		c.text(s, a.left-tick-0.25*fs, y, 1, 0.35, faceBody, inkColour)
	}
	if a.lo < 0 && a.hi > 0 {
		_, y := a.px(a.x0, 0)
		setColour(dc, mutedColour, 1)
		dc.SetLineWidth(1.2 * c.lw)
		dc.DrawLine(a.left, y, a.left+a.width, y)
		dc.Stroke()
	}
	// Pressure, p = p_inlet + ½ρU²·Cp, on the right.
	q := sc.r.Q2()
	pref := sc.r.Fluid.Pressure
	plo, phi := pref+q*a.lo, pref+q*a.hi
	pst := niceStep(phi-plo, n)
	pd := decimals(pst)
	right := a.left + a.width
	setColour(dc, mutedColour, 1)
	dc.SetLineWidth(c.lw)
	rw := 0.0
	for _, v := range ticks(plo, phi, pst) {
		_, y := a.px(a.x0, (v-pref)/q)
		dc.DrawLine(right, y, right+tick, y)
		dc.Stroke()
		s := formatNum(v, pd)
		rw = math.Max(rw, c.measure(s, faceSmall))
		c.text(s, right+tick+0.25*fs, y, 0, 0.35, faceSmall, mutedColour)
	}
	setColour(dc, inkColour, 1)
	dc.SetLineWidth(c.lw)
	dc.DrawRectangle(a.left, a.top, a.width, a.height)
	dc.Stroke()
	// Axis names, turned along the axes (glyphs grow away from the tick labels).
	mid := a.top + a.height/2
	dc.Push()
	lx := a.left - tick - 0.25*fs - lw - 0.6*fs
	dc.RotateAbout(-math.Pi/2, lx, mid)
	c.text("Cp (negative up)", lx, mid, 0.5, 0, faceBody, inkColour)
	dc.Pop()
	dc.Push()
	rx := right + tick + 0.25*fs + rw + 0.6*fs
	dc.RotateAbout(math.Pi/2, rx, mid)
	c.text("p (Pa)", rx, mid, 0.5, 0, faceBody, mutedColour)
	dc.Pop()
}

// drawXTicks draws x ticks and labels under the bottom edge at y.
func drawXTicks(c *canvas, a *cpAxis, y float64, step float64, format func(v float64) string, name string) {
	dc := c.dc
	fs := c.fs
	tick := 0.4 * fs
	setColour(dc, inkColour, 1)
	dc.SetLineWidth(c.lw)
	for _, v := range ticks(a.x0, a.x1, step) {
		x, _ := a.px(v, 0)
		dc.DrawLine(x, y, x, y+tick)
		dc.Stroke()
		c.text(format(v), x, y+tick+0.25*fs, 0.5, 1, faceBody, inkColour)
	}
	c.text(name, a.left+a.width/2, y+tick+1.6*fs, 0.5, 1, faceBody, inkColour)
}

// curve strokes (x, Cp) pairs inside the plotting area.
func (c *canvas) curve(a *cpAxis, xs, cps []float64) {
	if len(xs) < 2 {
		return
	}
	dc := c.dc
	for k := range xs {
		x, y := a.px(xs[k], cps[k])
		y = math.Max(a.top, math.Min(a.top+a.height, y))
		if k == 0 {
			dc.MoveTo(x, y)
		} else {
			dc.LineTo(x, y)
		}
	}
	dc.Stroke()
}

// legendEntry is one item of a chart legend.
type legendEntry struct {
	text  string
	col   color.RGBA
	width float64 // line width in base widths; negative for a dashed line
	alpha float64
}

// legend writes entries in a row starting at (x, y).
func (c *canvas) legend(x, y float64, es []legendEntry) {
	dc := c.dc
	fs := c.fs
	for _, e := range es {
		w := e.width
		if w < 0 { // dashed
			w = -w
			dc.SetDash(6*c.lw, 4*c.lw)
		}
		dc.SetLineWidth(w * c.lw)
		dc.SetLineCapButt()
		setColour(dc, e.col, e.alpha)
		dc.DrawLine(x, y, x+2.2*fs, y)
		dc.Stroke()
		dc.SetDash()
		x += 2.7 * fs
		c.text(e.text, x, y, 0, 0.35, faceBody, inkColour)
		x += c.measure(e.text, faceBody) + 1.6*fs
	}
	dc.SetLineCapRound()
}

// adverseThreshold is the rise of Cp per inlet height above which a wall stretch counts as
// an adverse pressure gradient. It is a screening mark, not a separation criterion: it keeps the
// round-off ripple of a flat wall (well below 0.001 per inlet height) unmarked and catches the
// recovery behind any body or bend a reviewer would ask about.
const adverseThreshold = 0.05

// adverseStretches returns the x intervals of a wall where Cp rises downstream by more than
// adverseThreshold per inlet height, from differences over a window of 4h or 1 % of the
// channel length (the larger), which smooths the sample-to-sample ripple of the surface fits.
func (sc *scene) adverseStretches(s *flow.Surface) [][2]float64 {
	pts := s.Points
	if len(pts) < 3 {
		return nil
	}
	inlet := sc.m.Geom.Upper.Y(0) - sc.m.Geom.Lower.Y(0)
	win := math.Max(4*sc.g.H, 0.01*sc.m.Geom.Length)
	thr := adverseThreshold / inlet
	// Cp against x, keeping the downstream side of a step face (the last sample at an x).
	var xs, cps []float64
	for _, p := range pts {
		if n := len(xs); n > 0 && p.P.X <= xs[n-1]+1e-12 {
			xs[n-1], cps[n-1] = math.Max(xs[n-1], p.P.X), p.Cp
			continue
		}
		xs = append(xs, p.P.X)
		cps = append(cps, p.Cp)
	}
	at := func(x float64) float64 {
		i := sort.SearchFloat64s(xs, x)
		switch {
		case i <= 0:
			return cps[0]
		case i >= len(xs):
			return cps[len(cps)-1]
		}
		f := (x - xs[i-1]) / (xs[i] - xs[i-1])
		return cps[i-1] + f*(cps[i]-cps[i-1])
	}
	var out [][2]float64
	x0, x1 := xs[0], xs[len(xs)-1]
	step := math.Min(win/4, (x1-x0)/200)
	open := false
	var start float64
	for x := x0 + win/2; x <= x1-win/2+1e-12; x += step {
		g := (at(x+win/2) - at(x-win/2)) / win
		if g > thr && !open {
			open, start = true, x
		} else if g <= thr && open {
			open = false
			out = append(out, [2]float64{start, x})
		}
	}
	if open {
		out = append(out, [2]float64{start, x1 - win/2})
	}
	// Drop specks shorter than the window: they are ripple, not a stretch.
	kept := out[:0]
	for _, iv := range out {
		if iv[1]-iv[0] >= win {
			kept = append(kept, iv)
		}
	}
	return kept
}

// walls draws walls.png: Cp along both walls against x, adverse stretches marked, and the
// channel as an x-aligned strip underneath.
func (sc *scene) walls() *image.RGBA {
	w := float64(sc.width)
	fs := fontSize(sc.width)
	L := sc.m.Geom.Length
	left := chartMarginLeft * fs
	width := w - (chartMarginLeft+chartMarginRight)*fs
	chartH := math.Round(chartAspect * w)
	// The strip: equal scales while that keeps it under an eighth of the width, squeezed in y
	// beyond (and then labelled with the factor).
	span := sc.yhi - sc.ylo
	band := stripBand * fs
	stripH := span/L*width + 2*band
	squeeze := 1.0
	if stripH > 0.125*w {
		stripH = 0.125 * w
		squeeze = (stripH - 2*band) / span / (width / L)
	}
	top := (chartHeader + chartLegend) * fs
	stripTop := top + chartH + 1.6*fs
	h := int(math.Ceil(stripTop + stripH + 3.7*fs + chartFooter*fs))
	c := newCanvas(sc.width, h)
	lower, upper := &sc.r.Surfaces[mesh.LowerWall], &sc.r.Surfaces[mesh.UpperWall]
	var all []float64
	for _, s := range []*flow.Surface{lower, upper} {
		for _, p := range s.Points {
			all = append(all, p.Cp)
		}
	}
	lo, hi, clipped := cpRange(all)
	a := &cpAxis{left: left, top: top, width: width, height: chartH, x0: 0, x1: L, lo: lo, hi: hi}
	dc := c.dc
	// Where the bodies are: a pale band across the chart over each body's x extent.
	for _, b := range sc.m.Geom.Bodies {
		box := b.Shape.Bounds()
		x0, _ := a.px(box.Min.X, 0)
		x1, _ := a.px(box.Max.X, 0)
		setColour(dc, color.RGBA{0xec, 0xee, 0xf1, 0xff}, 1)
		dc.DrawRectangle(x0, a.top, math.Max(x1-x0, 1), a.height)
		dc.Fill()
		c.text(b.Name, 0.5*(x0+x1), a.top+a.height-0.4*fs, 0.5, 0, faceSmall, mutedColour)
	}
	sc.drawCpAxes(c, a)
	adv := [2][][2]float64{sc.adverseStretches(lower), sc.adverseStretches(upper)}
	cols := [2]color.RGBA{lowerColour, upperColour}
	// Adverse stretches: a broad pale band behind the curve.
	for id, s := range []*flow.Surface{lower, upper} {
		for _, iv := range adv[id] {
			xs, cps := wallCurve(s, iv[0], iv[1])
			dc.SetLineWidth(7 * c.lw)
			dc.SetLineCapButt()
			setColour(dc, adverseColour, 0.35)
			c.curve(a, xs, cps)
		}
	}
	dc.SetLineCapRound()
	dc.SetLineJoinRound()
	// The upper wall solid and the lower wall dashed on top, so that both show where they
	// coincide (a symmetric channel).
	for _, id := range []int{mesh.UpperWall, mesh.LowerWall} {
		xs, cps := wallCurve(&sc.r.Surfaces[id], math.Inf(-1), math.Inf(1))
		dc.SetLineWidth(1.8 * c.lw)
		if id == mesh.LowerWall {
			dc.SetDash(6*c.lw, 4*c.lw)
		}
		setColour(dc, cols[id], 1)
		c.curve(a, xs, cps)
		dc.SetDash()
	}
	if clipped {
		e, _ := sc.r.MinCp()
		c.text(fmt.Sprintf("off scale: min Cp %s", formatSig(e.Value, 3)), a.left+0.5*fs, a.top+1.4*fs, 0, 0, faceSmall, mutedColour)
	}
	// The strip.
	sc.drawStrip(c, a, stripTop, stripH, adv)
	note := "channel, to scale"
	if squeeze < 1 {
		note = fmt.Sprintf("channel, y scale × %s", formatSig(squeeze, 2))
	}
	c.text(note, a.left+a.width, stripTop-0.3*fs, 1, 0, faceSmall, mutedColour)
	xs := niceStep(L, max(2, int(width/(8*fs))))
	drawXTicks(c, a, stripTop+stripH, xs, func(v float64) string { return formatNum(v, decimals(xs)) }, "x (m)")
	// Header, legend, caption.
	sc.chartHeader(c, a, "pressure coefficient along the walls")
	c.legend(a.left, (chartHeader+1.0)*fs, []legendEntry{
		{"lower wall", lowerColour, -1.8, 1},
		{"upper wall", upperColour, 1.8, 1},
		{"pressure rising downstream (adverse gradient)", adverseColour, 7, 0.35},
	})
	sc.caption(c, a.left, float64(h)-chartFooter*fs+1.0*fs)
	return c.img
}

// wallCurve returns the (x, Cp) samples of a wall with x in [x0, x1].
func wallCurve(s *flow.Surface, x0, x1 float64) (xs, cps []float64) {
	for _, p := range s.Points {
		if p.P.X >= x0 && p.P.X <= x1 {
			xs = append(xs, p.P.X)
			cps = append(cps, p.Cp)
		}
	}
	return xs, cps
}

// stripBand is the thickness of the wall material drawn in the channel strip, in font sizes.
const stripBand = 0.5

// drawStrip draws the channel outline under a wall chart, on the chart's x scale (y to scale
// or squeezed to fit the strip), with the adverse stretches marked on each wall.
func (sc *scene) drawStrip(c *canvas, a *cpAxis, top, height float64, adv [2][][2]float64) {
	dc := c.dc
	geo := sc.m.Geom
	span := sc.yhi - sc.ylo
	band := stripBand * c.fs
	sx := a.width / (a.x1 - a.x0)
	sy := math.Min(sx, (height-2*band)/span)
	mid := top + height/2
	ymid := 0.5 * (sc.ylo + sc.yhi)
	pt := func(p mesh.Point) (float64, float64) {
		return a.left + (p.X-a.x0)*sx, mid - (p.Y-ymid)*sy
	}
	ds := 0.5 / sx
	// Material beyond the walls as a band of fixed thickness, the fluid white.
	for _, wl := range [2]*mesh.Wall{geo.Lower, geo.Upper} {
		line := wallLine(wl, ds)
		edge := mid + (span/2)*sy + band
		if wl.Upper {
			edge = mid - (span/2)*sy - band
		}
		for k, q := range line {
			x, y := pt(q)
			if k == 0 {
				dc.MoveTo(x, y)
			} else {
				dc.LineTo(x, y)
			}
		}
		x, _ := pt(line[len(line)-1])
		dc.LineTo(x, edge)
		x, _ = pt(line[0])
		dc.LineTo(x, edge)
		dc.ClosePath()
		setColour(dc, wallColour, 1)
		dc.Fill()
	}
	for _, b := range geo.Bodies {
		for k, q := range outline(b.Shape, ds) {
			x, y := pt(q)
			if k == 0 {
				dc.MoveTo(x, y)
			} else {
				dc.LineTo(x, y)
			}
		}
		dc.ClosePath()
		setColour(dc, bodyColour, 1)
		dc.Fill()
	}
	cols := [2]color.RGBA{lowerColour, upperColour}
	for id, wl := range [2]*mesh.Wall{geo.Lower, geo.Upper} {
		line := wallLine(wl, ds)
		for _, iv := range adv[id] {
			var seg []mesh.Point
			for _, q := range line {
				if q.X >= iv[0] && q.X <= iv[1] {
					seg = append(seg, q)
				}
			}
			strokePts(c, seg, pt, 5*c.lw, adverseColour, 0.6)
		}
		if id == mesh.LowerWall {
			dc.SetDash(6*c.lw, 4*c.lw)
		}
		strokePts(c, line, pt, 1.6*c.lw, cols[id], 1)
		dc.SetDash()
	}
}

// strokePts strokes world points through the mapping pt.
func strokePts(c *canvas, pts []mesh.Point, pt func(mesh.Point) (float64, float64), lw float64, col color.RGBA, alpha float64) {
	if len(pts) < 2 {
		return
	}
	dc := c.dc
	dc.SetLineWidth(lw)
	setColour(dc, col, alpha)
	for k, q := range pts {
		x, y := pt(q)
		if k == 0 {
			dc.MoveTo(x, y)
		} else {
			dc.LineTo(x, y)
		}
	}
	dc.Stroke()
}

// chartHeader writes the title and the subject of a chart.
func (sc *scene) chartHeader(c *canvas, a *cpAxis, subject string) {
	fs := c.fs
	y := 1.85 * fs
	x := a.left
	if sc.title != "" {
		c.text(sc.title, x, y, 0, 0, faceTitle, inkColour)
		x += c.measure(sc.title, faceTitle) + 1.5*fs
	}
	right := a.left + a.width
	if w := c.measure(subject, faceBody); right-w < x {
		right = x + w
	}
	c.text(subject, right, y, 1, 0, faceBody, mutedColour)
}
