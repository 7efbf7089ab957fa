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

// slenderness is the length-to-thickness ratio from which a body is charted like a foil
// (against x/chord, upper and lower surfaces) rather than like a bluff body (against the angle
// from its front stagnation point). A choice of this package: a 2.5:1 ellipse or a strut
// already reads naturally along its chord, a 2:1 one better around its outline.
const slenderness = 2.5

// sharpEdge is the largest interior corner angle taken as a trailing edge, radians (60°).
const sharpEdge = math.Pi / 3

// bodyFrame describes how a body's surface is charted.
type bodyFrame struct {
	foil bool
	// Foil: leading and trailing edge, chord length.
	le, te mesh.Point
	chord  float64
	// Bluff: centre and the front stagnation point.
	centre, front mesh.Point
}

// param returns the chart abscissa of surface point p (x/c for a foil, degrees from the front
// stagnation point for a bluff body, positive over the upper side).
func (bf *bodyFrame) param(p mesh.Point) float64 {
	if bf.foil {
		d := bf.te.Sub(bf.le)
		return p.Sub(bf.le).Dot(d) / (bf.chord * bf.chord)
	}
	a := math.Atan2(p.Y-bf.centre.Y, p.X-bf.centre.X)
	f := math.Atan2(bf.front.Y-bf.centre.Y, bf.front.X-bf.centre.X)
	// Clockwise from the front point (over the top when the flow comes from the left).
	t := math.Remainder(f-a, 2*math.Pi)
	return t * 180 / math.Pi
}

// newBodyFrame classifies body k and sets up its chart coordinates.
func (sc *scene) newBodyFrame(k int) bodyFrame {
	body := sc.m.Geom.Bodies[k]
	s := &sc.r.Surfaces[2+k]
	// Principal axes of the outline (second moments of arc length about its centroid).
	var cx, cy, wsum float64
	for _, p := range s.Points {
		cx += p.W * p.P.X
		cy += p.W * p.P.Y
		wsum += p.W
	}
	cx /= wsum
	cy /= wsum
	var sxx, syy, sxy float64
	for _, p := range s.Points {
		dx, dy := p.P.X-cx, p.P.Y-cy
		sxx += p.W * dx * dx
		syy += p.W * dy * dy
		sxy += p.W * dx * dy
	}
	th := 0.5 * math.Atan2(2*sxy, sxx-syy)
	u := mesh.Point{X: math.Cos(th), Y: math.Sin(th)}
	if u.X < 0 {
		u = u.Scale(-1)
	}
	n := mesh.Point{X: -u.Y, Y: u.X}
	amin, amax, bmin, bmax := math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1)
	var pmin, pmax mesh.Point
	c := mesh.Point{X: cx, Y: cy}
	for _, q := range outline(body.Shape, 0.002*wsum) {
		a := q.Sub(c).Dot(u)
		b := q.Sub(c).Dot(n)
		if a < amin {
			amin, pmin = a, q
		}
		if a > amax {
			amax, pmax = a, q
		}
		bmin, bmax = math.Min(bmin, b), math.Max(bmax, b)
	}
	bf := bodyFrame{centre: c}
	if (amax-amin) >= slenderness*(bmax-bmin) && math.Abs(u.Y) < math.Abs(u.X) {
		bf.foil = true
		bf.le, bf.te = pmin, pmax
		sharp := math.Inf(1)
		for _, cn := range body.Shape.Corners() {
			if cn.Angle < sharpEdge && cn.Angle < sharp {
				sharp = cn.Angle
				bf.te = cn.P
			}
		}
		if sharp < math.Inf(1) {
			// The leading edge is the outline point farthest from the trailing edge.
			best := 0.0
			for _, q := range outline(body.Shape, 0.002*wsum) {
				if d := q.Sub(bf.te).Norm(); d > best {
					best, bf.le = d, q
				}
			}
		}
		bf.chord = bf.te.Sub(bf.le).Norm()
		return bf
	}
	// Bluff: the front stagnation point is the most upstream one found, else the most upstream
	// surface point.
	bs := sc.r.Body(k)
	front := mesh.Point{X: math.Inf(1)}
	for _, p := range bs.Stagnation {
		if p.X < front.X {
			front = p
		}
	}
	if math.IsInf(front.X, 1) {
		for _, p := range s.Points {
			if p.P.X < front.X {
				front = p.P
			}
		}
	}
	bf.front = front
	return bf
}

// sides splits a body's samples into the upper and lower surface: for a foil the
// counter-clockwise run from the trailing to the leading edge is the upper surface; for a bluff
// body the points with a positive angle.
func (bf *bodyFrame) sides(pts []flow.SurfaceValue) (upper, lower []flow.SurfaceValue) {
	n := len(pts)
	if !bf.foil {
		for _, p := range pts {
			if bf.param(p.P) >= 0 {
				upper = append(upper, p)
			} else {
				lower = append(lower, p)
			}
		}
		return upper, lower
	}
	nearest := func(q mesh.Point) int {
		best, bi := math.Inf(1), 0
		for i, p := range pts {
			if d := p.P.Sub(q).Norm(); d < best {
				best, bi = d, i
			}
		}
		return bi
	}
	ite, ile := nearest(bf.te), nearest(bf.le)
	for i := ite; ; i = (i + 1) % n {
		upper = append(upper, pts[i])
		if i == ile {
			break
		}
	}
	for i := ile; ; i = (i + 1) % n {
		lower = append(lower, pts[i])
		if i == ite {
			break
		}
	}
	return upper, lower
}

// surface draws surface-<body>.png for body k.
func (sc *scene) surface(k int) *image.RGBA {
	w := float64(sc.width)
	fs := fontSize(sc.width)
	s := &sc.r.Surfaces[2+k]
	bs := sc.r.Body(k)
	bf := sc.newBodyFrame(k)
	thumbW := math.Round(0.24 * w)
	left := chartMarginLeft * fs
	width := w - (chartMarginLeft+chartMarginRight)*fs - thumbW - 1.5*fs
	chartH := math.Round(0.42 * w)
	top := (chartHeader + chartLegend) * fs
	h := int(math.Ceil(top + chartH + 3.7*fs + chartFooter*fs))
	c := newCanvas(sc.width, h)
	dc := c.dc
	var cps []float64
	for _, p := range s.Points {
		cps = append(cps, p.Cp)
	}
	lo, hi, clipped := cpRange(cps)
	a := &cpAxis{left: left, top: top, width: width, height: chartH, lo: lo, hi: hi}
	var xname string
	var xstep float64
	var xfmt func(float64) string
	if bf.foil {
		a.x0, a.x1 = -0.02, 1.02
		xname = "x/c (chord " + formatLength(bf.chord) + ")"
		xstep = 0.1
		xfmt = func(v float64) string { return formatNum(v, 1) }
	} else {
		a.x0, a.x1 = -180, 180
		xname = "angle from the front stagnation point (°): lower side < 0 < upper side"
		xstep = 30
		xfmt = func(v float64) string { return formatNum(v, 0) }
	}
	sc.drawCpAxes(c, a)
	upper, lower := bf.sides(s.Points)
	dc.SetLineJoinRound()
	dc.SetLineCapRound()
	for _, side := range []struct {
		pts []flow.SurfaceValue
		col color.RGBA
	}{{lower, lowerColour}, {upper, upperColour}} {
		xs, ys := make([]float64, len(side.pts)), make([]float64, len(side.pts))
		for i, p := range side.pts {
			xs[i], ys[i] = bf.param(p.P), p.Cp
		}
		if !bf.foil {
			sortPairs(xs, ys)
		}
		dc.SetLineWidth(1.8 * c.lw)
		setColour(dc, side.col, 1)
		c.curve(a, xs, ys)
	}
	// Marks: stagnation points (open circles) and the minimum Cp (a filled dot).
	r := 0.45 * fs
	for _, sp := range bs.Stagnation {
		x, y := a.px(bf.param(sp), nearestCp(s.Points, sp))
		dc.SetLineWidth(1.4 * c.lw)
		setColour(dc, color.RGBA{0xff, 0xff, 0xff, 0xff}, 1)
		dc.DrawCircle(x, y, r)
		dc.FillPreserve()
		setColour(dc, inkColour, 1)
		dc.Stroke()
	}
	mx, my := a.px(bf.param(bs.MinCp.At), bs.MinCp.Value)
	my = math.Max(a.top, my)
	setColour(dc, inkColour, 1)
	dc.DrawCircle(mx, my, r)
	dc.Fill()
	where := ""
	if bf.foil {
		where = fmt.Sprintf("x/c = %s", formatNum(bf.param(bs.MinCp.At), 2))
	} else {
		where = fmt.Sprintf("%s°", formatNum(bf.param(bs.MinCp.At), 0))
	}
	note := fmt.Sprintf("min Cp %s at %s", formatSig(bs.MinCp.Value, 3), where)
	ax := 0.0
	if mx > a.left+0.6*a.width {
		ax = 1
	}
	tx := mx + (1-2*ax)*1.0*fs
	c.text(note, tx, math.Max(my, a.top+1.2*fs), ax, 0.35, faceSmall, inkColour)
	if clipped {
		c.text("curve runs off scale near a corner", a.left+0.5*fs, a.top+a.height-0.6*fs, 0, 0, faceSmall, mutedColour)
	}
	drawXTicks(c, a, a.top+a.height, xstep, xfmt, xname)
	// Thumbnail of the body on the right, with the same marks.
	sc.drawThumb(c, k, &bf, a.left+a.width+chartMarginRight*fs+0.5*fs, top, thumbW, chartH, upper, lower, bs)
	subject := "pressure coefficient around " + s.Name
	sc.chartHeader(c, &cpAxis{left: a.left, width: a.width + chartMarginRight*fs + thumbW + 1.0*fs}, subject)
	sideName := [2]string{"lower surface", "upper surface"}
	if !bf.foil {
		sideName = [2]string{"lower side", "upper side"}
	}
	c.legend(a.left, (chartHeader+1.0)*fs, []legendEntry{
		{sideName[0], lowerColour, 1.8, 1},
		{sideName[1], upperColour, 1.8, 1},
	})
	lx := a.left + c.measure(sideName[0]+sideName[1], faceBody) + 11*fs
	ly := (chartHeader + 1.0) * fs
	setColour(dc, color.RGBA{0xff, 0xff, 0xff, 0xff}, 1)
	dc.DrawCircle(lx, ly, r)
	dc.FillPreserve()
	setColour(dc, inkColour, 1)
	dc.SetLineWidth(1.4 * c.lw)
	dc.Stroke()
	c.text("stagnation point", lx+1.2*fs, ly, 0, 0.35, faceBody, inkColour)
	lx += c.measure("stagnation point", faceBody) + 3*fs
	dc.DrawCircle(lx, ly, r)
	dc.Fill()
	c.text("minimum Cp", lx+1.2*fs, ly, 0, 0.35, faceBody, inkColour)
	sc.caption(c, a.left, float64(h)-chartFooter*fs+1.0*fs)
	return c.img
}

// sortPairs sorts xs ascending, carrying ys along.
func sortPairs(xs, ys []float64) {
	idx := make([]int, len(xs))
	for i := range idx {
		idx[i] = i
	}
	sort.Slice(idx, func(a, b int) bool { return xs[idx[a]] < xs[idx[b]] })
	nx, ny := make([]float64, len(xs)), make([]float64, len(ys))
	for i, j := range idx {
		nx[i], ny[i] = xs[j], ys[j]
	}
	copy(xs, nx)
	copy(ys, ny)
}

// nearestCp returns the Cp of the sample nearest to p.
func nearestCp(pts []flow.SurfaceValue, p mesh.Point) float64 {
	best, cp := math.Inf(1), 0.0
	for _, q := range pts {
		if d := q.P.Sub(p).Norm(); d < best {
			best, cp = d, q.Cp
		}
	}
	return cp
}

// drawThumb draws body k in the box (x, y, w, h) with its two sides coloured as in the chart,
// the flow direction, the stagnation points and the minimum-Cp point.
func (sc *scene) drawThumb(c *canvas, k int, bf *bodyFrame, x, y, w, h float64, upper, lower []flow.SurfaceValue, bs flow.BodySummary) {
	dc := c.dc
	fs := c.fs
	box := sc.m.Geom.Bodies[k].Shape.Bounds()
	bw, bh := box.Max.X-box.Min.X, box.Max.Y-box.Min.Y
	inner := 0.78
	s := math.Min(inner*w/bw, inner*(h-3*fs)/bh)
	// A flat body gets a shorter panel, centred on the chart's height.
	if hh := bh*s/inner + 4*fs; hh < h {
		y += (h - hh) / 2
		h = hh
	}
	cx, cy := x+w/2, y+(h-3*fs)/2+1.5*fs
	mx, my := 0.5*(box.Min.X+box.Max.X), 0.5*(box.Min.Y+box.Max.Y)
	pt := func(p mesh.Point) (float64, float64) { return cx + (p.X-mx)*s, cy - (p.Y-my)*s }
	setColour(dc, color.RGBA{0xf4, 0xf5, 0xf6, 0xff}, 1)
	dc.DrawRectangle(x, y, w, h)
	dc.Fill()
	setColour(dc, mutedColour, 1)
	dc.SetLineWidth(c.lw)
	dc.DrawRectangle(x, y, w, h)
	dc.Stroke()
	for q, p := range outline(sc.m.Geom.Bodies[k].Shape, 0.5/s) {
		px, py := pt(p)
		if q == 0 {
			dc.MoveTo(px, py)
		} else {
			dc.LineTo(px, py)
		}
	}
	dc.ClosePath()
	setColour(dc, bodyColour, 0.35)
	dc.Fill()
	for _, side := range []struct {
		pts []flow.SurfaceValue
		col color.RGBA
	}{{lower, lowerColour}, {upper, upperColour}} {
		pts := side.pts
		if !bf.foil {
			// In angle order: the samples of a side need not be contiguous in outline order.
			pts = append([]flow.SurfaceValue(nil), pts...)
			sort.SliceStable(pts, func(i, j int) bool { return bf.param(pts[i].P) < bf.param(pts[j].P) })
		}
		var ps []mesh.Point
		for _, p := range pts {
			ps = append(ps, p.P)
		}
		strokePts(c, ps, pt, 2.4*c.lw, side.col, 1)
	}
	r := 0.45 * fs
	for _, sp := range bs.Stagnation {
		px, py := pt(sp)
		setColour(dc, color.RGBA{0xff, 0xff, 0xff, 0xff}, 1)
		dc.DrawCircle(px, py, r)
		dc.FillPreserve()
		setColour(dc, inkColour, 1)
		dc.SetLineWidth(1.4 * c.lw)
		dc.Stroke()
	}
	px, py := pt(bs.MinCp.At)
	setColour(dc, inkColour, 1)
	dc.DrawCircle(px, py, r)
	dc.Fill()
	// Flow direction.
	ay := y + 1.3*fs
	ax0, ax1 := x+0.8*fs, x+4.5*fs
	dc.SetLineWidth(1.3 * c.lw)
	dc.DrawLine(ax0, ay, ax1, ay)
	dc.Stroke()
	dc.MoveTo(ax1+0.2*fs, ay)
	dc.LineTo(ax1-0.6*fs, ay-0.4*fs)
	dc.LineTo(ax1-0.6*fs, ay+0.4*fs)
	dc.ClosePath()
	dc.Fill()
	c.text("flow", ax1+0.6*fs, ay, 0, 0.35, faceSmall, inkColour)
	kind := "bluff body"
	if bf.foil {
		kind = "foil-like body"
	}
	gamma := bs.Circulation
	if math.Abs(gamma) < 1e-9*sc.r.Speed*math.Max(bw, bh) {
		gamma = 0 // round-off of a zero circulation
	}
	c.text(fmt.Sprintf("%s, Γ = %s m²/s", kind, formatSig(gamma, 3)), x+w/2, y+h-0.6*fs, 0.5, 0, faceSmall, mutedColour)
}
