package render

import (
	"fmt"
	"image"
	"image/color"
	"math"
	"runtime"
	"sync"

	"phipsi/mesh"
)

// Layout of a field picture, in units of the body font size: a header band with the title, the
// plot with its axes, and a footer with the caption on the left and the colour bar on the right.
const (
	fieldMarginLeft  = 5.0 // y tick labels and the y label
	fieldMarginRight = 1.8
	fieldHeader      = 3.0
	fieldAxisBand    = 3.7 // x ticks, their labels and the x label
	fieldFooter      = 6.0
	// maxAspect caps the plot height at this multiple of the image width (tall domains shrink
	// the plot instead, keeping equal scales).
	maxAspect = 1.3
)

// fieldPic is a field picture being drawn.
type fieldPic struct {
	*canvas
	fr        frame
	footerTop float64
}

// layout returns the plot frame, the height and the top of the footer of a field picture of
// the scene's domain.
func (sc *scene) layout() (fr frame, height int, footerTop float64) {
	w := float64(sc.width)
	fs := fontSize(sc.width)
	L := sc.m.Geom.Length
	plotW := w - (fieldMarginLeft+fieldMarginRight)*fs
	scale := plotW / L
	// The walls are drawn as solid bands beyond the channel: a few per cent of its height, and
	// at least a little more than half a text line.
	span := sc.yhi - sc.ylo
	pad := math.Max(0.03*span, 0.7*fs/scale)
	y0, y1 := sc.ylo-pad, sc.yhi+pad
	plotH := (y1 - y0) * scale
	if plotH > maxAspect*w {
		plotH = maxAspect * w
		scale = plotH / (y1 - y0)
		pad = math.Max(0.03*span, 0.7*fs/scale)
		y0, y1 = sc.ylo-pad, sc.yhi+pad
		plotH = (y1 - y0) * scale
		plotW = L * scale
	}
	left := fieldMarginLeft*fs + (w-(fieldMarginLeft+fieldMarginRight)*fs-plotW)/2
	top := math.Round(fieldHeader * fs)
	height = int(math.Ceil(top + plotH + (fieldAxisBand+fieldFooter)*fs))
	fr = frame{x0: 0, x1: L, y0: y0, y1: y1, left: left, top: top, width: plotW, height: plotH, scale: scale}
	return fr, height, top + plotH + fieldAxisBand*fs
}

// newFieldPic lays out a field picture of the scene's domain.
func (sc *scene) newFieldPic() *fieldPic {
	fr, h, ft := sc.layout()
	return &fieldPic{canvas: newCanvas(sc.width, h), fr: fr, footerTop: ft}
}

// shade fills the plot with the colour of vals·mult under cm: each pixel takes the bilinear
// interpolation of the valid nodes of its grid cell, the weights of the others dropped and the
// rest renormalised, so nodes inside walls and bodies never leak into the picture. Pixels with
// no valid node nearby stay white; the solid drawings cover them.
func (sc *scene) shade(p *fieldPic, vals []float64, mult float64, cm *colormap) {
	fr := &p.fr
	g := sc.g
	valid := sc.r.Field.Valid
	img := p.img
	px0 := max(0, int(math.Ceil(fr.left-0.5)))
	px1 := min(img.Rect.Dx(), int(math.Floor(fr.left+fr.width+0.5)))
	py0 := max(0, int(math.Ceil(fr.top-0.5)))
	py1 := min(img.Rect.Dy(), int(math.Floor(fr.top+fr.height+0.5)))
	if px1 <= px0 || py1 <= py0 {
		return
	}
	cols := make([]int32, px1-px0)
	fxs := make([]float64, px1-px0)
	for x := px0; x < px1; x++ {
		w := fr.world(float64(x)+0.5, 0)
		f := (w.X - g.X0) / g.H
		i := int(math.Floor(f))
		i = max(0, min(g.NX-2, i))
		cols[x-px0] = int32(i)
		fxs[x-px0] = math.Max(0, math.Min(1, f-float64(i)))
	}
	rowsPer := (py1 - py0 + 3) / 4
	var wg sync.WaitGroup
	sem := make(chan struct{}, runtime.GOMAXPROCS(0))
	for r0 := py0; r0 < py1; r0 += rowsPer {
		r1 := min(py1, r0+rowsPer)
		wg.Add(1)
		sem <- struct{}{}
		go func() {
			defer wg.Done()
			defer func() { <-sem }()
			for y := r0; y < r1; y++ {
				wy := fr.world(0, float64(y)+0.5).Y
				f := (wy - g.Y0) / g.H
				j := int(math.Floor(f))
				if j < 0 || j > g.NY-2 {
					continue
				}
				fy := f - float64(j)
				row := img.Pix[y*img.Stride : y*img.Stride+img.Rect.Dx()*4]
				for x := px0; x < px1; x++ {
					i := int(cols[x-px0])
					fx := fxs[x-px0]
					k := j*g.NX + i
					var sw, sv float64
					if valid[k] {
						w := (1 - fx) * (1 - fy)
						sw += w
						sv += w * vals[k]
					}
					if valid[k+1] {
						w := fx * (1 - fy)
						sw += w
						sv += w * vals[k+1]
					}
					if valid[k+g.NX] {
						w := (1 - fx) * fy
						sw += w
						sv += w * vals[k+g.NX]
					}
					if valid[k+g.NX+1] {
						w := fx * fy
						sw += w
						sv += w * vals[k+g.NX+1]
					}
					if sw < 1e-9 {
						// All four corners are inside material: take the nearest valid node of the
						// surrounding 4 × 4 block, if any.
						v, ok := sc.nearestValid(i, j, fx, fy, vals)
						if !ok {
							continue
						}
						sv, sw = v, 1
					}
					col := cm.at(sv / sw * mult)
					o := 4 * x
					row[o], row[o+1], row[o+2], row[o+3] = col.R, col.G, col.B, 255
				}
			}
		}()
	}
	wg.Wait()
}

// nearestValid returns the value of the valid node nearest to (i + fx, j + fy) within one node
// of the cell.
func (sc *scene) nearestValid(i, j int, fx, fy float64, vals []float64) (float64, bool) {
	g := sc.g
	best, bv := math.Inf(1), 0.0
	for dj := -1; dj <= 2; dj++ {
		for di := -1; di <= 2; di++ {
			ii, jj := i+di, j+dj
			if ii < 0 || jj < 0 || ii >= g.NX || jj >= g.NY {
				continue
			}
			k := jj*g.NX + ii
			if !sc.r.Field.Valid[k] {
				continue
			}
			d := (float64(di)-fx)*(float64(di)-fx) + (float64(dj)-fy)*(float64(dj)-fy)
			if d < best {
				best, bv = d, vals[k]
			}
		}
	}
	return bv, !math.IsInf(best, 1)
}

// wallLine returns points along wall w from its start to its end, at most ds apart.
func wallLine(w *mesh.Wall, ds float64) []mesh.Point {
	sp := w.Sample(ds)
	pts := make([]mesh.Point, 0, len(sp)+2)
	lo, hi := w.Range(w.X0())
	y0 := hi
	if w.Upper {
		y0 = lo
	}
	pts = append(pts, mesh.Point{X: w.X0(), Y: y0})
	for _, s := range sp {
		pts = append(pts, s.P)
	}
	pts = append(pts, mesh.Point{X: w.X1(), Y: w.Y(w.X1())})
	return pts
}

// outline returns the closed outline of a body, counter-clockwise: a polygon's own vertices,
// or samples at most ds apart.
func outline(s mesh.Shape, ds float64) []mesh.Point {
	if p, ok := s.(*mesh.Polygon); ok {
		return p.Pts
	}
	sp := s.Sample(ds)
	pts := make([]mesh.Point, len(sp))
	for i, q := range sp {
		pts[i] = q.P
	}
	return pts
}

// drawSolids draws the walls and bodies solid, with outlines from the exact geometry.
func (sc *scene) drawSolids(c *canvas, fr *frame) {
	dc := c.dc
	ds := 0.5 / fr.scale
	geo := sc.m.Geom
	beyond := 2 / fr.scale // past the plot edge, under the frame
	for _, w := range [2]*mesh.Wall{geo.Lower, geo.Upper} {
		line := wallLine(w, ds)
		edge := fr.y0 - beyond
		if w.Upper {
			edge = fr.y1 + beyond
		}
		for k, q := range line {
			x, y := fr.px(q)
			if k == 0 {
				dc.MoveTo(x, y)
			} else {
				dc.LineTo(x, y)
			}
		}
		x, y := fr.px(mesh.Point{X: line[len(line)-1].X, Y: edge})
		dc.LineTo(x, y)
		x, y = fr.px(mesh.Point{X: line[0].X, Y: edge})
		dc.LineTo(x, y)
		dc.ClosePath()
		setColour(dc, wallColour, 1)
		dc.Fill()
		dc.SetLineWidth(1.3 * c.lw)
		setColour(dc, inkColour, 1)
		c.polyline(fr, line)
	}
	for _, b := range geo.Bodies {
		pts := outline(b.Shape, ds)
		for k, q := range pts {
			x, y := fr.px(q)
			if k == 0 {
				dc.MoveTo(x, y)
			} else {
				dc.LineTo(x, y)
			}
		}
		dc.ClosePath()
		setColour(dc, bodyColour, 1)
		dc.FillPreserve()
		dc.SetLineWidth(1.3 * c.lw)
		dc.SetLineJoinRound()
		setColour(dc, inkColour, 1)
		dc.Stroke()
	}
}

// axes draws the frame, ticks and labels in metres.
func (p *fieldPic) axes() {
	fr := &p.fr
	dc := p.dc
	fs := p.fs
	tick := 0.45 * fs
	dc.SetLineWidth(p.lw)
	setColour(dc, inkColour, 1)
	dc.DrawRectangle(fr.left, fr.top, fr.width, fr.height)
	dc.Stroke()
	// x: aim for labels about 8 font sizes apart.
	xs := niceStep(fr.x1-fr.x0, max(2, int(fr.width/(8*fs))))
	xd := decimals(xs)
	bottom := fr.top + fr.height
	for _, v := range ticks(fr.x0, fr.x1, xs) {
		x, _ := fr.px(mesh.Point{X: v})
		dc.DrawLine(x, bottom, x, bottom+tick)
		dc.Stroke()
		p.text(formatNum(v, xd), x, bottom+tick+0.25*fs, 0.5, 1, faceBody, inkColour)
	}
	p.text("x (m)", fr.left+fr.width/2, bottom+tick+1.6*fs, 0.5, 1, faceBody, inkColour)
	// y: labels about 2.5 font sizes apart, over the channel's own extent.
	ys := niceStep(fr.y1-fr.y0, max(2, int(fr.height/(2.5*fs))))
	yd := decimals(ys)
	maxw := 0.0
	for _, v := range ticks(fr.y0, fr.y1, ys) {
		_, y := fr.px(mesh.Point{Y: v})
		dc.DrawLine(fr.left-tick, y, fr.left, y)
		dc.Stroke()
		s := formatNum(v, yd)
		maxw = math.Max(maxw, p.measure(s, faceBody))
		p.text(s, fr.left-tick-0.25*fs, y, 1, 0.35, faceBody, inkColour)
	}
	dc.Push()
	lx := fr.left - tick - 0.25*fs - maxw - 0.5*fs
	dc.RotateAbout(-math.Pi/2, lx, fr.top+fr.height/2)
	p.text("y (m)", lx, fr.top+fr.height/2, 0.5, 0, faceBody, inkColour)
	dc.Pop()
}

// header writes the scenario title on the left and what the picture shows on the right.
func (p *fieldPic) header(title, subject string) {
	fs := p.fs
	y := 1.85 * fs
	x := p.fr.left
	if title != "" {
		p.text(title, x, y, 0, 0, faceTitle, inkColour)
		x += p.measure(title, faceTitle) + 1.5*fs
	}
	right := p.fr.left + p.fr.width
	if w := p.measure(subject, faceBody); right-w < x {
		right = x + w // a long title pushes the subject right; it may be cut at the edge
	}
	p.text(subject, right, y, 1, 0, faceBody, mutedColour)
}

// caption writes the run's data and the ideal-flow caution at the bottom left.
func (sc *scene) caption(c *canvas, x, y float64) {
	r := sc.r
	g := sc.g
	fs := c.fs
	l1 := fmt.Sprintf("U = %s m/s   ρ = %s kg/m³   Q = %s m²/s", formatSig(r.Speed, 4), formatSig(r.Fluid.Density, 5), formatSig(r.Q, 4))
	l2 := fmt.Sprintf("grid spacing %s, %d × %d = %s cells", formatLength(g.H), g.NX-1, g.NY-1, groupDigits(g.Cells()))
	c.text(l1, x, y, 0, 0, faceSmall, inkColour)
	c.text(l2, x, y+1.3*fs, 0, 0, faceSmall, inkColour)
	c.text("ideal flow: no viscous effects", x, y+2.6*fs, 0, 0, faceSmall, inkColour)
}

// formatLength writes a length in mm below 0.1 m and in m above.
func formatLength(v float64) string {
	if v < 0.1 {
		return formatSig(v*1000, 3) + " mm"
	}
	return formatSig(v, 3) + " m"
}

// groupDigits writes n with spaces between groups of three digits (the SI style; the Go fonts
// have no thin space).
func groupDigits(n int) string {
	s := fmt.Sprint(n)
	out := ""
	for len(s) > 3 {
		out = " " + s[len(s)-3:] + out
		s = s[:len(s)-3]
	}
	return s + out
}

// scaleBar describes a colour bar: the map, its value label, and a second, dimensional scale
// dim = offset + factor·value drawn on the other side.
type scaleBar struct {
	cm              *colormap
	label           string // of the map's own values, e.g. "|V|/U"
	dimLabel        string // e.g. "m/s"
	offset, factor  float64
	extendLo, extHi bool // the data run past the ends (triangular caps)
	markZero        bool // a tick mark across the bar at value 0
}

// colourBar draws b in the footer's right half.
func (p *fieldPic) colourBar(b scaleBar) {
	fs := p.fs
	dc := p.dc
	w := float64(p.img.Rect.Dx())
	labelW := math.Max(p.measure(b.label, faceBody), p.measure(b.dimLabel, faceBody)) + 1.2*fs
	x0 := math.Max(w*0.5, p.fr.left+0.45*p.fr.width)
	x1 := p.fr.left + p.fr.width - labelW
	capW := 0.9 * fs
	bx0, bx1 := x0, x1
	if b.extendLo {
		bx0 += capW
	}
	if b.extHi {
		bx1 -= capW
	}
	y := p.footerTop + 1.8*fs
	h := 1.0 * fs
	cm := b.cm
	// The gradient, one column per pixel.
	for x := int(math.Round(bx0)); x < int(math.Round(bx1)); x++ {
		v := cm.lo + (cm.hi-cm.lo)*(float64(x)+0.5-bx0)/(bx1-bx0)
		col := cm.at(v)
		for yy := int(math.Round(y)); yy < int(math.Round(y+h)); yy++ {
			p.img.SetRGBA(x, yy, col)
		}
	}
	setColour(dc, inkColour, 1)
	dc.SetLineWidth(p.lw)
	if b.extendLo {
		setColour(dc, cm.rgba[0], 1)
		dc.MoveTo(bx0, y)
		dc.LineTo(bx0-capW, y+h/2)
		dc.LineTo(bx0, y+h)
		dc.ClosePath()
		dc.Fill()
	}
	if b.extHi {
		setColour(dc, cm.rgba[255], 1)
		dc.MoveTo(bx1, y)
		dc.LineTo(bx1+capW, y+h/2)
		dc.LineTo(bx1, y+h)
		dc.ClosePath()
		dc.Fill()
	}
	setColour(dc, inkColour, 1)
	dc.MoveTo(bx0, y)
	if b.extendLo {
		dc.LineTo(bx0-capW, y+h/2)
		dc.LineTo(bx0, y+h)
	} else {
		dc.LineTo(bx0, y+h)
	}
	if b.extHi {
		dc.LineTo(bx1, y+h)
		dc.LineTo(bx1+capW, y+h/2)
		dc.LineTo(bx1, y)
	} else {
		dc.LineTo(bx1, y+h)
		dc.LineTo(bx1, y)
	}
	dc.ClosePath()
	dc.Stroke()
	pos := func(v float64) float64 { return bx0 + (v-cm.lo)/(cm.hi-cm.lo)*(bx1-bx0) }
	tick := 0.35 * fs
	// Own values below the bar.
	n := max(2, int((bx1-bx0)/(4.5*fs)))
	st := niceStep(cm.hi-cm.lo, n)
	d := decimals(st)
	for _, v := range ticks(cm.lo, cm.hi, st) {
		x := pos(v)
		dc.DrawLine(x, y+h, x, y+h+tick)
		dc.Stroke()
		p.text(formatNum(v, d), x, y+h+tick+0.2*fs, 0.5, 1, faceSmall, inkColour)
	}
	if b.markZero && cm.lo < 0 && cm.hi > 0 {
		dc.SetLineWidth(1.5 * p.lw)
		dc.DrawLine(pos(0), y, pos(0), y+h)
		dc.Stroke()
		dc.SetLineWidth(p.lw)
	}
	p.text(b.label, bx1+capW+0.5*fs, y+h+tick+0.2*fs, 0, 1, faceBody, inkColour)
	// Dimensional values above the bar.
	if b.factor != 0 {
		dlo, dhi := b.offset+b.factor*cm.lo, b.offset+b.factor*cm.hi
		if dlo > dhi {
			dlo, dhi = dhi, dlo
		}
		st := niceStep(dhi-dlo, n)
		d := decimals(st)
		setColour(dc, mutedColour, 1)
		for _, v := range ticks(dlo, dhi, st) {
			x := pos((v - b.offset) / b.factor)
			dc.DrawLine(x, y-tick, x, y)
			dc.Stroke()
			p.text(formatNum(v, d), x, y-tick-0.25*fs, 0.5, 0, faceSmall, mutedColour)
		}
		p.text(b.dimLabel, bx1+capW+0.5*fs, y-tick-0.25*fs, 0, 0, faceBody, mutedColour)
	}
}

// robustRange returns the values of vals·mult over valid nodes at the lower and upper
// fractions qlo and qhi of their distribution (from a fine histogram), and the true extremes.
// Corner singularities of ideal flow put a handful of nodes far beyond the rest; the colour
// scale should show the field, not them.
func robustRange(vals []float64, valid []bool, mult, qlo, qhi float64) (lo, hi, min, max float64) {
	min, max = math.Inf(1), math.Inf(-1)
	n := 0
	for k, ok := range valid {
		if !ok {
			continue
		}
		v := vals[k] * mult
		if v-v != 0 { // NaN or ±Inf
			continue
		}
		if v < min {
			min = v
		}
		if v > max {
			max = v
		}
		n++
	}
	if n == 0 {
		return 0, 1, 0, 1
	}
	if !(max > min) {
		return min, max, min, max
	}
	const bins = 8192
	var hist [bins]int32
	f := (bins - 1) / (max - min)
	for k, ok := range valid {
		if !ok {
			continue
		}
		v := vals[k] * mult
		if v-v != 0 {
			continue
		}
		hist[int((v-min)*f)]++
	}
	at := func(q float64) float64 {
		target := int(q * float64(n))
		c := 0
		for b := range bins {
			c += int(hist[b])
			if c > target {
				return min + (max-min)*float64(b)/(bins-1)
			}
		}
		return max
	}
	return at(qlo), at(qhi), min, max
}

// psiStyle returns the line width (in base widths) and opacity of a streamline kind.
func psiStyle(kind int) (float64, float64) {
	switch kind {
	case psiFine:
		return 0.8, 0.75
	case psiDividing:
		return 1.6, 1
	}
	return 1.15, 1
}

// drawStreamlines strokes the stream-function contours in colour col.
func (sc *scene) drawStreamlines(c *canvas, fr *frame, col color.RGBA, mainOnly bool, alpha float64) {
	dc := c.dc
	dc.SetLineJoinRound()
	dc.SetLineCapRound()
	for _, l := range sc.streamlineLevels() {
		if mainOnly && l.kind == psiFine {
			continue
		}
		w, a := psiStyle(l.kind)
		dc.SetLineWidth(w * c.lw)
		setColour(dc, col, a*alpha)
		for _, pl := range l.lines {
			if l.kind == psiFine {
				c.fadingPolyline(fr, pl.pts, l.near, col, a*alpha)
				continue
			}
			c.polyline(fr, pl.pts)
		}
	}
}

// Robust colour-scale fractions: the top 0.2 % of nodal speeds (corner singularities) may run
// past the end of the bar.
const (
	speedQuantile = 0.998
	cpLowQuantile = 0.003
)

// speedScale returns the speed map's upper end (a round number above the 99.8 % node) and
// whether some nodes exceed it.
func (sc *scene) speedScale() (hi float64, over bool) {
	sc.speedOnce.Do(func() {
		f := sc.r.Field
		_, q, _, max := robustRange(f.Speed, f.Valid, 1/sc.r.Speed, 0, speedQuantile)
		st := niceStep(q, 5) / 2
		hi := math.Ceil(q/st-1e-9) * st
		if hi <= 0 {
			hi = 1
		}
		sc.speedHi, sc.speedOver = hi, max > hi*(1+1e-9)
	})
	return sc.speedHi, sc.speedOver
}

func (sc *scene) speedBar(cm *colormap, over bool) scaleBar {
	return scaleBar{cm: cm, label: "|V|/U", dimLabel: "m/s", factor: sc.r.Speed, extHi: over}
}

// streamlines draws streamlines.png.
func (sc *scene) streamlines() *image.RGBA {
	p := sc.newFieldPic()
	hi, over := sc.speedScale()
	cm := newColormap(&speedTable, 0, hi, 0.62)
	sc.shade(p, sc.r.Field.Speed, 1/sc.r.Speed, cm)
	sc.drawStreamlines(p.canvas, &p.fr, streamColour, false, 1)
	sc.drawSolids(p.canvas, &p.fr)
	p.axes()
	p.header(sc.title, fmt.Sprintf("streamlines every %d %% of the flow rate (Δψ = %s m²/s), over speed", 100/psiSteps, formatSig(sc.r.Q/psiSteps, 3)))
	sc.caption(p.canvas, p.fr.left, p.footerTop+0.9*p.fs)
	p.colourBar(sc.speedBar(cm, over))
	return p.img
}

// speed draws speed.png.
func (sc *scene) speed() *image.RGBA {
	p := sc.newFieldPic()
	hi, over := sc.speedScale()
	cm := newColormap(&speedTable, 0, hi, 0)
	sc.shade(p, sc.r.Field.Speed, 1/sc.r.Speed, cm)
	sc.drawStreamlines(p.canvas, &p.fr, color.RGBA{0xff, 0xff, 0xff, 0xff}, true, 0.7)
	sc.drawSolids(p.canvas, &p.fr)
	p.axes()
	p.header(sc.title, "speed |V|/U, with streamlines")
	sc.caption(p.canvas, p.fr.left, p.footerTop+0.9*p.fs)
	p.colourBar(sc.speedBar(cm, over))
	return p.img
}
