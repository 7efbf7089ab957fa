package render

import (
	"bytes"
	"image"
	"image/color"
	"image/png"
	"math"
	"strings"
	"testing"

	"phipsi/solver"
)

// convSeries builds a series from f(h) on the spacings hs and studies it as converge does.
func convSeries(name string, hs []float64, f func(h float64) float64) ConvergenceSeries {
	vs := make([]float64, len(hs))
	for i, h := range hs {
		vs[i] = f(h)
	}
	return ConvergenceSeries{Name: name, Unit: "m/s", Spacings: hs, Values: vs, Study: solver.GCI(hs, vs, &solver.GCISettings{FormalOrder: 2})}
}

// countPixels counts the pixels of img inside box for which is holds.
func countPixels(img image.Image, box image.Rectangle, is func(r, g, b int) bool) int {
	n := 0
	bb := box.Intersect(img.Bounds())
	for y := bb.Min.Y; y < bb.Max.Y; y++ {
		for x := bb.Min.X; x < bb.Max.X; x++ {
			p := color.RGBAModel.Convert(img.At(x, y)).(color.RGBA)
			if is(int(p.R), int(p.G), int(p.B)) {
				n++
			}
		}
	}
	return n
}

// Hue classes that survive anti-aliasing on white (blending with white keeps the sign of
// B − G and most of R − G): the band's orange has B < G, the warning red B > G, and ink, grey
// and the blue of the values have R − G small or negative.
func isOrange(r, g, b int) bool { return r-g > 40 && g > b+20 }
func isRed(r, g, b int) bool    { return r-g > 40 && b > g+10 }

func TestConvergenceChart(t *testing.T) {
	hs := []float64{0.005, 0.01, 0.02}
	trusted := convSeries("pier.max_speed", hs, func(h float64) float64 { return 1.7 - 30*h*h })
	wobbly := convSeries("pier.lift", hs, func(h float64) float64 { return map[float64]float64{0.005: 0.01, 0.01: -0.02, 0.02: 0.015}[h] })
	if trusted.Study.Status != solver.GCIMonotone || wobbly.Study.Status != solver.GCIOscillatory {
		t.Fatalf("fixture statuses %q and %q, want monotone and oscillatory", trusted.Study.Status, wobbly.Study.Status)
	}
	const width = 900
	decode := func(t *testing.T, series []ConvergenceSeries) image.Image {
		t.Helper()
		data, err := ConvergenceChart(series, Options{Width: width, Title: "test"})
		if err != nil {
			t.Fatal(err)
		}
		img, err := png.Decode(bytes.NewReader(data))
		if err != nil {
			t.Fatal(err)
		}
		if got := img.Bounds().Dx(); got != width {
			t.Fatalf("width %d px, want %d", got, width)
		}
		return img
	}
	// The legend carries one sample of each mark, so look below it, in the panels.
	fs := fontSize(width)
	panels := func(img image.Image) image.Rectangle {
		return image.Rect(0, int((chartHeader+chartLegend)*fs), img.Bounds().Dx(), img.Bounds().Dy()-int(chartFooter*fs))
	}
	const minPixels = 20 // a band bar or a line of warning text, not a stray edge

	t.Run("trusted study shows its band", func(t *testing.T) {
		img := decode(t, []ConvergenceSeries{trusted})
		if n := countPixels(img, panels(img), isOrange); n < minPixels {
			t.Errorf("%d pixels of the band colour in the panel, want ≥ %d", n, minPixels)
		}
		if n := countPixels(img, panels(img), isRed); n > 0 {
			t.Errorf("%d pixels of the warning colour for a trusted study, want 0", n)
		}
	})
	t.Run("flagged study has no band and says so", func(t *testing.T) {
		img := decode(t, []ConvergenceSeries{wobbly})
		if n := countPixels(img, panels(img), isOrange); n > 0 {
			t.Errorf("%d pixels of the band colour for an oscillating study, want 0", n)
		}
		if n := countPixels(img, panels(img), isRed); n < minPixels {
			t.Errorf("%d pixels of the warning colour, want ≥ %d (the panel's note)", n, minPixels)
		}
	})
	t.Run("panels wrap into rows", func(t *testing.T) {
		// Two columns at this width: two panels take one row, five take three.
		two := decode(t, []ConvergenceSeries{trusted, wobbly}).Bounds().Dy()
		five := decode(t, []ConvergenceSeries{trusted, wobbly, trusted, wobbly, trusted}).Bounds().Dy()
		fixed := int(math.Ceil((chartHeader + chartLegend + chartFooter) * fs))
		if row := two - fixed; math.Abs(float64(five-fixed-3*row)) > 2 {
			t.Errorf("heights %d px (two panels) and %d px (five), want %d + 3 × %d", two, five, fixed, row)
		}
	})
	t.Run("a value that is not finite is left out", func(t *testing.T) {
		bad := ConvergenceSeries{Name: "x", Spacings: hs, Values: []float64{1, math.NaN(), 1.2}}
		bad.Study = solver.GCI(hs, bad.Values, nil)
		decode(t, []ConvergenceSeries{bad})
	})
	t.Run("round-off is drawn flat", func(t *testing.T) {
		flat := convSeries("pier.circulation", hs, func(h float64) float64 { return 1e-15 * math.Sin(1e3*h) })
		flat.Study = solver.GCI(hs, flat.Values, &solver.GCISettings{Noise: 1e-12})
		if flat.Study.Status != solver.GCIUnchanged {
			t.Fatalf("status %q, want %q", flat.Study.Status, solver.GCIUnchanged)
		}
		lo, hi := convRange(&flat, 0.02)
		spread := 2e-15
		if (hi-lo)/spread < 100 {
			t.Errorf("range %g for values spread over %g: round-off would fill the panel", hi-lo, spread)
		}
		decode(t, []ConvergenceSeries{flat})
	})
}

func TestConvergenceChartErrors(t *testing.T) {
	hs := []float64{1, 2, 4}
	good := convSeries("a", hs, func(h float64) float64 { return h })
	cases := []struct {
		name   string
		series []ConvergenceSeries
		o      Options
		want   string
	}{
		{"no series", nil, Options{}, "no quantities"},
		{"lengths", []ConvergenceSeries{{Name: "b", Spacings: hs, Values: []float64{1, 2}}}, Options{}, "b has 3 spacings and 2 values"},
		{"spacing", []ConvergenceSeries{{Name: "c", Spacings: []float64{0, 1}, Values: []float64{1, 2}}}, Options{}, "spacing 0"},
		{"width", []ConvergenceSeries{good}, Options{Width: 50}, "width must be in"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ConvergenceChart(tc.series, tc.o)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %v, want one containing %q", err, tc.want)
			}
		})
	}
}

func TestTickLabel(t *testing.T) {
	cases := []struct {
		v, step float64
		want    string
	}{
		{-0.5375, 0.0005, "−0.5375"},
		{2e-12, 1e-12, "2e−12"},
		{0, 1e-12, "0"},
		{2.15, 0.05, "2.15"},
	}
	for _, tc := range cases {
		if got := tickLabel(tc.v, tc.step, decimals(tc.step)); got != tc.want {
			t.Errorf("tickLabel(%g, step %g) = %q, want %q", tc.v, tc.step, got, tc.want)
		}
	}
}
