package render

import (
	"image"
	"image/color"
	"math"
	"sync"

	"github.com/fogleman/gg"
	"golang.org/x/image/font"

	"phipsi/mesh"
	"phipsi/solver/flow"
)

// scene is what every picture of one result shares.
type scene struct {
	r     *flow.Result
	m     *mesh.Mesh
	g     mesh.Grid
	phi   []float64
	width int
	title string
	// ylo and yhi bound the channel (lowest lower-wall and highest upper-wall point).
	ylo, yhi float64
	// psi holds the stream-function contours shared by the pictures that draw streamlines,
	// traced once by the first picture that needs them.
	psi     []psiLevel
	psiOnce sync.Once
	// The speed colour scale, shared likewise.
	speedHi   float64
	speedOver bool
	speedOnce sync.Once
}

// Level kinds of the stream-function contours.
const (
	psiMain     = iota // an equal flow-rate increment
	psiFine            // an extra line close to a body
	psiDividing        // the streamline that meets a body: ψ equal to the body's constant
)

// psiLevel is one drawn streamline level.
type psiLevel struct {
	value float64
	kind  int
	lines []polyline
	// near is, for a fine line, the neighbourhood of its body: the line fades out toward its
	// edge instead of stopping short.
	near mesh.Box
}

// nearBody is the neighbourhood of a body in which its fine streamlines are drawn: its box
// grown by its own size on every side (they show how the flow parts and closes around it, and
// elsewhere would only thicken the dividing streamline into a rope).
func nearBody(b mesh.Box) mesh.Box {
	return b.Grow(math.Max(b.Max.X-b.Min.X, b.Max.Y-b.Min.Y))
}

// clipToBox returns the runs of pl inside box b (whole segments with both ends inside).
func clipToBox(pl polyline, b mesh.Box) []polyline {
	in := func(p mesh.Point) bool { return p.X >= b.Min.X && p.X <= b.Max.X && p.Y >= b.Min.Y && p.Y <= b.Max.Y }
	var out []polyline
	var cur []mesh.Point
	for _, p := range pl.pts {
		if in(p) {
			cur = append(cur, p)
			continue
		}
		if len(cur) > 1 {
			out = append(out, polyline{pts: cur})
		}
		cur = nil
	}
	if len(cur) > 1 {
		out = append(out, polyline{pts: cur})
	}
	return out
}

// psiSteps is the number of equal flow-rate increments between the walls: a streamline every
// 5 % of Q.
const psiSteps = 20

// fineOffsets are the extra streamlines drawn either side of a body's dividing streamline, as
// fractions of Q: they show how the flow parts in front of the body and closes behind it, where
// the 5 % lines are far apart.
var fineOffsets = []float64{0.01, 0.025}

func newScene(r *flow.Result, phi []float64, width int, title string) *scene {
	m := r.Sol.Sys.Mesh
	lo, _ := m.Geom.Lower.Extent()
	_, hi := m.Geom.Upper.Extent()
	return &scene{r: r, m: m, g: m.Grid, phi: phi, width: width, title: title, ylo: lo, yhi: hi}
}

// minFineSpacing is the least distance in pixels between a fine streamline and the dividing
// streamline for the fine line to be drawn.
const minFineSpacing = 4.0

// fineSpacing estimates the distance in pixels between body bi's dividing streamline and the
// one d·Q away, just upstream of the body: d·Q / (local speed), at the picture's scale.
func (sc *scene) fineSpacing(bi int, d float64) float64 {
	box := sc.m.Geom.Bodies[bi].Shape.Bounds()
	size := math.Max(box.Max.X-box.Min.X, box.Max.Y-box.Min.Y)
	// Look half a body size upstream, on the dividing streamline's side of the body's middle.
	p := mesh.Point{X: box.Min.X - 0.5*size, Y: 0.5 * (box.Min.Y + box.Max.Y)}
	g := sc.g
	i := int(math.Round((p.X - g.X0) / g.H))
	j := int(math.Round((p.Y - g.Y0) / g.H))
	speed := sc.r.Speed
	if i >= 0 && j >= 0 && i < g.NX && j < g.NY {
		if k := g.Index(i, j); sc.r.Field.Valid[k] && sc.r.Field.Speed[k] > 0 {
			// Upstream of a stagnation point the speed dips; the streamlines part at about the
			// speed of the stream around the body, so take the larger.
			speed = math.Max(speed, sc.r.Field.Speed[k])
		}
	}
	fr, _, _ := sc.layout()
	return d * sc.r.Q / speed * fr.scale
}

// streamlineLevels returns the traced streamlines, tracing them on first use.
func (sc *scene) streamlineLevels() []psiLevel {
	sc.psiOnce.Do(sc.psiContours)
	return sc.psi
}

// psiContours traces the streamlines: every 5 % of Q, each body's dividing streamline and the
// fine lines beside it.
func (sc *scene) psiContours() {
	q := sc.r.Q
	type lv struct {
		v    float64
		kind int
		body int // the body a fine line belongs to
	}
	var lvs []lv
	for k := 1; k < psiSteps; k++ {
		lvs = append(lvs, lv{q * float64(k) / psiSteps, psiMain, -1})
	}
	near := func(v float64) int {
		for i, l := range lvs {
			if math.Abs(l.v-v) < 1e-6*q {
				return i
			}
		}
		return -1
	}
	for bi, b := range sc.r.Sol.BodyPsi {
		if !(b > 0 && b < q) {
			continue
		}
		if i := near(b); i >= 0 {
			if lvs[i].kind != psiFine {
				lvs[i].kind = psiDividing
			} else {
				lvs[i] = lv{b, psiDividing, -1}
			}
		} else {
			lvs = append(lvs, lv{b, psiDividing, -1})
		}
		for _, d := range fineOffsets {
			if sc.fineSpacing(bi, d) < minFineSpacing {
				continue // too close to its neighbours to be told apart at this size
			}
			for _, v := range [2]float64{b - d*q, b + d*q} {
				if v > 0 && v < q && near(v) < 0 {
					lvs = append(lvs, lv{v, psiFine, bi})
				}
			}
		}
	}
	// Sort by value for the contour pass.
	for i := 1; i < len(lvs); i++ {
		for j := i; j > 0 && lvs[j].v < lvs[j-1].v; j-- {
			lvs[j], lvs[j-1] = lvs[j-1], lvs[j]
		}
	}
	values := make([]float64, len(lvs))
	for i, l := range lvs {
		values[i] = l.v
	}
	f := &nodeField{g: sc.g, v: sc.r.Sol.Psi, m: sc.m, boundary: func(id int) float64 { return boundaryPsi(sc.r, id) }}
	cs := f.contours(values)
	sc.psi = make([]psiLevel, len(lvs))
	for i, l := range lvs {
		lines := cs[i].lines
		var box mesh.Box
		if l.kind == psiFine {
			box = nearBody(sc.m.Geom.Bodies[l.body].Shape.Bounds())
			var kept []polyline
			for _, pl := range lines {
				kept = append(kept, clipToBox(pl, box)...)
			}
			lines = kept
		}
		sc.psi[i] = psiLevel{value: l.v, kind: l.kind, lines: lines, near: box}
	}
}

// frame maps metres to pixels with equal scales.
type frame struct {
	x0, x1, y0, y1           float64 // world extent of the plot, m
	left, top, width, height float64 // plot rectangle, px
	scale                    float64 // px per m
}

// px returns the pixel position of p.
func (f *frame) px(p mesh.Point) (float64, float64) {
	return f.left + (p.X-f.x0)*f.scale, f.top + (f.y1-p.Y)*f.scale
}

// world returns the position of pixel coordinates (x, y).
func (f *frame) world(x, y float64) mesh.Point {
	return mesh.Point{X: f.x0 + (x-f.left)/f.scale, Y: f.y1 - (y-f.top)/f.scale}
}

// canvas is an image with its drawing context and fonts.
type canvas struct {
	img *image.RGBA
	dc  *gg.Context
	f   *faces
	fs  float64 // body font size, px
	lw  float64 // base line width, px
}

func newCanvas(w, h int) *canvas {
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	// White, by doubling copies (much faster than a byte loop over megabytes).
	if len(img.Pix) > 0 {
		img.Pix[0] = 255
		for n := 1; n < len(img.Pix); n *= 2 {
			copy(img.Pix[n:], img.Pix[:n])
		}
	}
	fs := fontSize(w)
	return &canvas{img: img, dc: gg.NewContextForRGBA(img), f: newFaces(fs), fs: fs, lw: math.Max(1, fs/12)}
}

// Colours of the drawings (besides the maps). Solid material is grey so that it never reads as
// a value of the colour map; outlines are near-black.
var (
	inkColour     = color.RGBA{0x22, 0x25, 0x29, 0xff} // text, frame, outlines
	mutedColour   = color.RGBA{0x5c, 0x63, 0x6b, 0xff} // secondary text, ticks of the second scale
	wallColour    = color.RGBA{0xb4, 0xb8, 0xbd, 0xff} // channel walls (material beyond them)
	bodyColour    = color.RGBA{0x72, 0x78, 0x80, 0xff} // bodies
	streamColour  = color.RGBA{0x1d, 0x2b, 0x3c, 0xff} // streamlines over a light shading
	phiColour     = color.RGBA{0x9a, 0x3d, 0x12, 0xff} // equipotentials
	adverseColour = color.RGBA{0xd6, 0x45, 0x5e, 0xff} // adverse-gradient marks
	lowerColour   = color.RGBA{0x1f, 0x5f, 0x9e, 0xff} // lower wall / lower surface curves
	upperColour   = color.RGBA{0xc0, 0x6a, 0x10, 0xff} // upper wall / upper surface curves
)

func setColour(dc *gg.Context, c color.RGBA, alpha float64) {
	dc.SetRGBA(float64(c.R)/255, float64(c.G)/255, float64(c.B)/255, alpha)
}

// text draws s anchored at (x, y): ax, ay = 0 left/top, 0.5 centre, 1 right/bottom (ay is
// measured on the font's ascent, as gg does).
func (c *canvas) text(s string, x, y, ax, ay float64, face fontFace, col color.RGBA) {
	c.dc.SetFontFace(c.face(face))
	setColour(c.dc, col, 1)
	c.dc.DrawStringAnchored(s, x, y, ax, ay)
}

// measure returns the width of s in face.
func (c *canvas) measure(s string, face fontFace) float64 {
	c.dc.SetFontFace(c.face(face))
	w, _ := c.dc.MeasureString(s)
	return w
}

type fontFace int

const (
	faceBody fontFace = iota
	faceSmall
	faceTitle
)

func (c *canvas) face(f fontFace) font.Face {
	switch f {
	case faceSmall:
		return c.f.small
	case faceTitle:
		return c.f.title
	}
	return c.f.body
}

// fadingPolyline strokes pts like polyline with opacity alpha near the middle of box, fading
// to nothing at its edge over the outer 40 % (in steps of a fifth).
func (c *canvas) fadingPolyline(fr *frame, pts []mesh.Point, box mesh.Box, col color.RGBA, alpha float64) {
	cx, cy := 0.5*(box.Min.X+box.Max.X), 0.5*(box.Min.Y+box.Max.Y)
	hx, hy := 0.5*(box.Max.X-box.Min.X), 0.5*(box.Max.Y-box.Min.Y)
	const steps = 5
	band := func(p mesh.Point) int {
		t := math.Max(math.Abs(p.X-cx)/hx, math.Abs(p.Y-cy)/hy)
		f := math.Max(0, math.Min(1, (1-t)/0.4))
		return int(math.Ceil(f * steps))
	}
	start := 0
	for k := 1; k <= len(pts); k++ {
		if k < len(pts) && band(pts[k]) == band(pts[start]) {
			continue
		}
		c.dc.SetLineCapButt() // round caps would double the ink where two runs meet
		// Stroke pts[start..k] (overlapping one point with the next run so nothing is left out).
		end := min(k, len(pts)-1)
		if b := band(pts[start]); b > 0 && end > start {
			setColour(c.dc, col, alpha*float64(b)/steps)
			c.polyline(fr, pts[start:end+1])
		}
		start = k
	}
}

// polyline strokes pts (metres) through frame fr, dropping points closer than a third of a pixel
// to the last one kept.
func (c *canvas) polyline(fr *frame, pts []mesh.Point) {
	if len(pts) < 2 {
		return
	}
	dc := c.dc
	x, y := fr.px(pts[0])
	dc.MoveTo(x, y)
	lx, ly := x, y
	for k := 1; k < len(pts); k++ {
		x, y := fr.px(pts[k])
		if k < len(pts)-1 && (x-lx)*(x-lx)+(y-ly)*(y-ly) < 1.0/9 {
			continue
		}
		dc.LineTo(x, y)
		lx, ly = x, y
	}
	dc.Stroke()
}
