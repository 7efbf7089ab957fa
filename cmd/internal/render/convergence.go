package render

import (
	"bytes"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"math"

	"phipsi/solver"
)

// ConvergenceSeries is one quantity of a grid-convergence study, for ConvergenceChart.
type ConvergenceSeries struct {
	Name, Unit string
	// Spacings and Values are the grids' spacings (m) and the quantity on each, finest first.
	Spacings, Values []float64
	// Study is the estimate made from them.
	Study solver.GCIResult
}

// Layout of the convergence chart, in units of the body font size.
const (
	convPanelLeft   = 5.0  // y tick labels inside each panel
	convPanelTitle  = 2.2  // the panel's title line above its plot
	convPanelBottom = 3.4  // x ticks and the axis name below the plot
	convPanelGap    = 2.0  // between panels
	convMargin      = 1.5  // outer margin left and right
	convAspect      = 0.56 // plot height as a fraction of the panel width
	convSamples     = 64   // points along the model curve
)

// convColumns returns the number of panel columns for an image w pixels wide.
func convColumns(w, n int) int {
	cols := 1
	switch {
	case w >= 1400:
		cols = 3
	case w >= 700:
		cols = 2
	}
	return max(1, min(cols, n))
}

// ConvergenceChart draws convergence.png: one panel per quantity with its value on each grid
// against the grid spacing h (dots joined by a thin line) and, where the study is trusted, the
// Richardson model f_ext + (f1 − f_ext)(h/h1)^p through them (dashed), the extrapolated value
// at h = 0 (an open diamond) and the band of the finest value (a bar); a flagged study says in
// its panel why it has no band. o.Width and o.Title apply; o.Images is ignored.
func ConvergenceChart(series []ConvergenceSeries, o Options) ([]byte, error) {
	if len(series) == 0 {
		return nil, fmt.Errorf("render: convergence chart: no quantities")
	}
	for _, s := range series {
		if len(s.Spacings) != len(s.Values) || len(s.Values) < 2 {
			return nil, fmt.Errorf("render: convergence chart: %s has %d spacings and %d values, want equal numbers, at least 2", s.Name, len(s.Spacings), len(s.Values))
		}
		for _, h := range s.Spacings {
			if !(h > 0) || math.IsInf(h, 0) {
				return nil, fmt.Errorf("render: convergence chart: %s: spacing %g, want > 0", s.Name, h)
			}
		}
	}
	w := o.Width
	if w == 0 {
		w = DefaultWidth
	}
	if w < MinWidth || w > MaxWidth {
		return nil, fmt.Errorf("render: width must be in [%d, %d] pixels, got %d", MinWidth, MaxWidth, w)
	}
	if err := parseFonts(); err != nil {
		return nil, err
	}
	img := drawConvergence(series, w, o.Title)
	var buf bytes.Buffer
	enc := png.Encoder{CompressionLevel: png.BestSpeed}
	if err := enc.Encode(&buf, img); err != nil {
		return nil, fmt.Errorf("render: convergence chart: %w", err)
	}
	return buf.Bytes(), nil
}

// convPanel is the plotting area of one quantity: h to the right from 0, the value upwards.
type convPanel struct {
	left, top, width, height float64
	x1                       float64 // largest h shown, m
	lo, hi                   float64 // value range, bottom to top
}

func (p *convPanel) px(h, v float64) (float64, float64) {
	return p.left + h/p.x1*p.width, p.top + (p.hi-v)/(p.hi-p.lo)*p.height
}

// modelAt is the Richardson model of a trusted study at spacing h: the extrapolated value plus
// the finest grid's error scaled by (h/h1)^p.
func modelAt(s *ConvergenceSeries, h float64) float64 {
	st := &s.Study
	return st.Extrapolated + (s.Values[0]-st.Extrapolated)*math.Pow(h/s.Spacings[0], st.Order)
}

// hasModel reports whether a series has a model curve and an extrapolated value to draw.
func hasModel(s *ConvergenceSeries) bool {
	st := &s.Study
	ok := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	return st.Status.Trusted() && st.Status != solver.GCIUnchanged && ok(st.Order) && st.Order > 0 &&
		ok(st.Extrapolated) && ok(st.Band)
}

func drawConvergence(series []ConvergenceSeries, width int, title string) *image.RGBA {
	fs := fontSize(width)
	w := float64(width)
	cols := convColumns(width, len(series))
	rows := (len(series) + cols - 1) / cols
	pw := (w - 2*convMargin*fs - float64(cols-1)*convPanelGap*fs) / float64(cols)
	plotW := pw - convPanelLeft*fs
	plotH := math.Round(convAspect * plotW)
	cellH := convPanelTitle*fs + plotH + convPanelBottom*fs + convPanelGap*fs
	top := (chartHeader + chartLegend) * fs
	h := int(math.Ceil(top + float64(rows)*cellH + chartFooter*fs))
	c := newCanvas(width, h)

	// Header and legend.
	y := 1.85 * fs
	x := convMargin * fs
	if title != "" {
		c.text(title, x, y, 0, 0, faceTitle, inkColour)
	}
	c.text("grid convergence of the key numbers", w-convMargin*fs, y, 1, 0, faceBody, mutedColour)
	c.convLegend(convMargin*fs, (chartHeader+1.0)*fs)

	// A common h scale in mm below 0.1 m.
	hmax := 0.0
	for _, s := range series {
		for _, v := range s.Spacings {
			hmax = math.Max(hmax, v)
		}
	}
	unit, mult := "m", 1.0
	if hmax < 0.1 {
		unit, mult = "mm", 1000
	}
	for i := range series {
		col, row := i%cols, i/cols
		px := convMargin*fs + float64(col)*(pw+convPanelGap*fs)
		py := top + float64(row)*cellH
		p := &convPanel{left: px + convPanelLeft*fs, top: py + convPanelTitle*fs, width: plotW, height: plotH, x1: 1.08 * hmax}
		c.drawConvPanel(p, &series[i], unit, mult)
	}

	// Caption.
	fy := float64(h) - chartFooter*fs + 1.0*fs
	c.text("band: Grid Convergence Index (Roache 1994; Celik et al. 2008) from the three finest grids, safety factor "+
		formatSig(series[0].Study.SafetyFactor, 3)+", order capped at the formal one; none for oscillating or diverging values or an order outside [0.5, 4]",
		convMargin*fs, fy, 0, 0, faceSmall, inkColour)
	c.text("dashed: the Richardson model f_ext + C·h^p through the values; open diamond: f_ext, extrapolated to h = 0", convMargin*fs, fy+1.3*fs, 0, 0, faceSmall, inkColour)
	c.text("ideal flow: no viscous effects", convMargin*fs, fy+2.6*fs, 0, 0, faceSmall, inkColour)
	return c.img
}

// convLegend writes the chart's legend in a row from (x, y).
func (c *canvas) convLegend(x, y float64) {
	dc := c.dc
	fs := c.fs
	item := func(text string, draw func(x float64)) {
		draw(x)
		x += 2.7 * fs
		c.text(text, x, y, 0, 0.35, faceBody, inkColour)
		x += c.measure(text, faceBody) + 1.6*fs
	}
	item("value on each grid", func(x float64) {
		dc.SetLineWidth(1.2 * c.lw)
		setColour(dc, lowerColour, 1)
		dc.DrawLine(x, y, x+2.2*fs, y)
		dc.Stroke()
		c.dot(x+1.1*fs, y, lowerColour)
	})
	item("Richardson model", func(x float64) {
		dc.SetDash(6*c.lw, 4*c.lw)
		dc.SetLineWidth(1.4 * c.lw)
		setColour(dc, mutedColour, 1)
		dc.DrawLine(x, y, x+2.2*fs, y)
		dc.Stroke()
		dc.SetDash()
	})
	item("extrapolated to h = 0", func(x float64) { c.diamond(x+1.1*fs, y, lowerColour) })
	item("band of the finest value", func(x float64) { c.bar(x+1.1*fs, y-0.6*fs, y+0.6*fs, upperColour) })
}

// dot draws a filled marker at (x, y).
func (c *canvas) dot(x, y float64, col color.RGBA) {
	setColour(c.dc, col, 1)
	c.dc.DrawCircle(x, y, 0.38*c.fs)
	c.dc.Fill()
}

// diamond draws an open diamond at (x, y).
func (c *canvas) diamond(x, y float64, col color.RGBA) {
	dc := c.dc
	r := 0.55 * c.fs
	dc.MoveTo(x, y-r)
	dc.LineTo(x+r, y)
	dc.LineTo(x, y+r)
	dc.LineTo(x-r, y)
	dc.ClosePath()
	setColour(dc, color.RGBA{0xff, 0xff, 0xff, 0xff}, 1)
	dc.FillPreserve()
	setColour(dc, col, 1)
	dc.SetLineWidth(1.5 * c.lw)
	dc.Stroke()
}

// bar draws a vertical error bar at x from y0 to y1 with caps.
func (c *canvas) bar(x, y0, y1 float64, col color.RGBA) {
	dc := c.dc
	capW := 0.45 * c.fs
	setColour(dc, col, 1)
	dc.SetLineWidth(2.2 * c.lw)
	dc.SetLineCapButt()
	dc.DrawLine(x, y0, x, y1)
	dc.Stroke()
	dc.SetLineWidth(1.6 * c.lw)
	dc.DrawLine(x-capW, y0, x+capW, y0)
	dc.DrawLine(x-capW, y1, x+capW, y1)
	dc.Stroke()
	dc.SetLineCapRound()
}

// convRange returns the value range of a panel: the values, and for a trusted study the
// extrapolated value, the band and the model curve, with a margin.
func convRange(s *ConvergenceSeries, x1 float64) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	add := func(v float64) {
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
	}
	for _, v := range s.Values {
		add(v)
	}
	if hasModel(s) {
		add(s.Study.Extrapolated)
		add(s.Values[0] - s.Study.Band)
		add(s.Values[0] + s.Study.Band)
		add(modelAt(s, x1))
	}
	if math.IsInf(lo, 1) {
		return -1, 1
	}
	if s.Study.Status == solver.GCIUnchanged {
		// The same to within round-off: a range wide enough that the values read as one level.
		mid := 0.5 * (hi + lo)
		half := math.Max(math.Max(1e-3*math.Abs(mid), 1e3*(hi-lo)), 1e-300)
		return mid - half, mid + half
	}
	span := hi - lo
	if floor := 1e-4 * math.Max(math.Abs(hi), math.Abs(lo)); span < floor || span == 0 {
		mid := 0.5 * (hi + lo)
		half := math.Max(floor, 1e-9) / 2
		lo, hi = mid-half, mid+half
		span = hi - lo
	}
	return lo - 0.08*span, hi + 0.08*span
}

// drawConvPanel draws the panel of one quantity.
func (c *canvas) drawConvPanel(p *convPanel, s *ConvergenceSeries, unit string, mult float64) {
	dc := c.dc
	fs := c.fs
	p.lo, p.hi = convRange(s, p.x1)
	// Value ticks with faint grid lines.
	n := max(3, int(p.height/(3.2*fs)))
	st := niceStep(p.hi-p.lo, n)
	d := decimals(st)
	tick := 0.35 * fs
	dc.SetLineWidth(c.lw)
	for _, v := range ticks(p.lo, p.hi, st) {
		_, y := p.px(0, v)
		setColour(dc, color.RGBA{0xe3, 0xe5, 0xe8, 0xff}, 1)
		dc.DrawLine(p.left, y, p.left+p.width, y)
		dc.Stroke()
		setColour(dc, inkColour, 1)
		dc.DrawLine(p.left-tick, y, p.left, y)
		dc.Stroke()
		c.text(tickLabel(v, st, d), p.left-tick-0.2*fs, y, 1, 0.35, faceSmall, inkColour)
	}
	// Spacing ticks.
	hs := niceStep(p.x1*mult, 4)
	hd := decimals(hs)
	bottom := p.top + p.height
	for _, v := range ticks(0, p.x1*mult, hs) {
		x, _ := p.px(v/mult, p.lo)
		setColour(dc, inkColour, 1)
		dc.DrawLine(x, bottom, x, bottom+tick)
		dc.Stroke()
		c.text(formatNum(v, hd), x, bottom+tick+0.2*fs, 0.5, 1, faceSmall, inkColour)
	}
	c.text("grid spacing h ("+unit+")", p.left+p.width/2, bottom+tick+1.5*fs, 0.5, 1, faceSmall, mutedColour)
	setColour(dc, inkColour, 1)
	dc.SetLineWidth(c.lw)
	dc.DrawRectangle(p.left, p.top, p.width, p.height)
	dc.Stroke()

	// Title: the quantity and unit on the left, the finding on the right.
	name := s.Name
	if s.Unit != "" {
		name += " (" + s.Unit + ")"
	}
	ty := p.top - 0.7*fs
	c.text(name, p.left-convPanelLeft*fs+0.2*fs, ty, 0, 0, faceBody, inkColour)
	finding, col := convFinding(s)
	c.text(finding, p.left+p.width, ty, 1, 0, faceSmall, col)

	dc.Push()
	dc.DrawRectangle(p.left, p.top, p.width, p.height)
	dc.Clip()
	if hasModel(s) {
		dc.SetDash(6*c.lw, 4*c.lw)
		dc.SetLineWidth(1.4 * c.lw)
		setColour(dc, mutedColour, 1)
		for k := 0; k <= convSamples; k++ {
			h := p.x1 * float64(k) / convSamples
			x, y := p.px(h, modelAt(s, h))
			if k == 0 {
				dc.MoveTo(x, y)
			} else {
				dc.LineTo(x, y)
			}
		}
		dc.Stroke()
		dc.SetDash()
	}
	// The values, joined in order of spacing (a value that is not finite is left out).
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	dc.SetLineWidth(1.2 * c.lw)
	setColour(dc, lowerColour, 1)
	started := false
	for i, h := range s.Spacings {
		if !finite(s.Values[i]) {
			continue
		}
		x, y := p.px(h, s.Values[i])
		if !started {
			dc.MoveTo(x, y)
			started = true
		} else {
			dc.LineTo(x, y)
		}
	}
	dc.Stroke()
	if hasModel(s) {
		x, _ := p.px(s.Spacings[0], 0)
		_, y0 := p.px(0, s.Values[0]-s.Study.Band)
		_, y1 := p.px(0, s.Values[0]+s.Study.Band)
		// Offset a little to the left of the dot so that a narrow band still shows.
		c.bar(x-0.9*fs, y0, y1, upperColour)
	}
	for i, h := range s.Spacings {
		if finite(s.Values[i]) {
			x, y := p.px(h, s.Values[i])
			c.dot(x, y, lowerColour)
		}
	}
	dc.ResetClip()
	dc.Pop()
	if hasModel(s) {
		// On the axis, where h = 0; drawn whole over the frame.
		x, y := p.px(0, s.Study.Extrapolated)
		c.diamond(x, y, lowerColour)
	}
}

// tickLabel formats a value tick: with the decimals of the step, or with three significant
// digits when the step is so small or large that fixed decimals would be unreadable.
func tickLabel(v, step float64, d int) string {
	if d > 6 || step >= 1e6 {
		return formatSig(v, 3)
	}
	return formatNum(v, d)
}

// convFinding is the right-hand note of a panel: the order and band of a trusted study, or why
// there is none, in the colour that says which.
func convFinding(s *ConvergenceSeries) (string, color.RGBA) {
	st := &s.Study
	band := func() string {
		b := "± " + formatSig(st.Band, 2)
		if g := st.GCIFine; !math.IsNaN(g) && !math.IsInf(g, 0) {
			b += " (" + formatSig(100*g, 2) + " %)"
		}
		return b
	}
	switch st.Status {
	case solver.GCIMonotone:
		return "p = " + formatNum(st.Order, 2) + ", " + band(), mutedColour
	case solver.GCIAssumedOrder:
		return "p assumed " + formatSig(st.Order, 2) + ", " + band(), mutedColour
	case solver.GCIUnchanged:
		return "the same on every grid", mutedColour
	case solver.GCIOscillatory:
		return "oscillates: no band", adverseColour
	case solver.GCIDiverging:
		return "diverges: no band", adverseColour
	case solver.GCIOrderOutOfRange:
		if math.IsInf(st.Order, 0) || math.IsNaN(st.Order) {
			return "no order fits: no band", adverseColour
		}
		return "p = " + formatNum(st.Order, 2) + " out of range: no band", adverseColour
	}
	return string(st.Status) + ": no band", adverseColour
}
