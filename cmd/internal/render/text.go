package render

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"sync"

	"github.com/golang/freetype/truetype"
	"golang.org/x/image/font"
	"golang.org/x/image/font/gofont/gobold"
	"golang.org/x/image/font/gofont/goregular"
)

// The Go fonts (golang.org/x/image/font/gofont, BSD licence) are compiled in: no system font is
// ever looked up, so an image looks the same on every machine.
var (
	fontsOnce           sync.Once
	regularTTF, boldTTF *truetype.Font
	fontsErr            error
)

func parseFonts() error {
	fontsOnce.Do(func() {
		if regularTTF, fontsErr = truetype.Parse(goregular.TTF); fontsErr != nil {
			return
		}
		boldTTF, fontsErr = truetype.Parse(gobold.TTF)
	})
	if fontsErr != nil {
		return fmt.Errorf("render: built-in font: %w", fontsErr)
	}
	return nil
}

// faces holds the font faces of one image. A face caches glyphs and is not safe for concurrent
// use, so every image makes its own.
type faces struct {
	size               float64 // body text size, px
	title, body, small font.Face
}

// newFaces returns the faces for body text of size px.
func newFaces(px float64) *faces {
	opt := func(s float64) *truetype.Options {
		return &truetype.Options{Size: s, DPI: 72, Hinting: font.HintingNone}
	}
	return &faces{
		size:  px,
		title: truetype.NewFace(boldTTF, opt(1.3*px)),
		body:  truetype.NewFace(regularTTF, opt(px)),
		small: truetype.NewFace(regularTTF, opt(0.85*px)),
	}
}

// fontSize returns the body text size of an image w pixels wide: about 1/100 of the width,
// within limits that stay readable on a small image and modest on a huge one.
func fontSize(w int) float64 { return math.Max(10, math.Min(26, float64(w)/100)) }

// niceStep returns a step of 1, 2 or 5 times a power of ten close to span/n.
func niceStep(span float64, n int) float64 {
	if !(span > 0) || n < 1 {
		return 1
	}
	raw := span / float64(n)
	p := math.Pow(10, math.Floor(math.Log10(raw)))
	f := raw / p
	switch {
	case f < 1.5:
		return p
	case f < 3.5:
		return 2 * p
	case f < 7.5:
		return 5 * p
	}
	return 10 * p
}

// ticks returns the multiples of step in [lo, hi] (with a little slack for round-off).
func ticks(lo, hi, step float64) []float64 {
	var out []float64
	eps := 1e-9 * step
	for k := math.Ceil((lo - eps) / step); k*step <= hi+eps; k++ {
		v := k * step
		if math.Abs(v) < eps {
			v = 0
		}
		out = append(out, v)
	}
	return out
}

// decimals returns the number of decimals that shows multiples of step exactly.
func decimals(step float64) int {
	for d := 0; d < 10; d++ {
		s := step * math.Pow(10, float64(d))
		if math.Abs(s-math.Round(s)) < 1e-6*s {
			return d
		}
	}
	return 10
}

// formatNum formats v with d decimals and a true minus sign (U+2212).
func formatNum(v float64, d int) string {
	s := strconv.FormatFloat(v, 'f', d, 64)
	if strings.HasPrefix(s, "-") {
		if strings.Trim(s, "-0.") == "" {
			return s[1:] // −0.00 reads as 0.00
		}
		return "−" + s[1:]
	}
	return s
}

// formatSig formats v with at most n significant digits (trailing zeros dropped), a true minus
// sign and no exponent for everyday magnitudes.
func formatSig(v float64, n int) string {
	if v == 0 || math.IsNaN(v) || math.IsInf(v, 0) {
		return formatNum(v, 0)
	}
	e := int(math.Floor(math.Log10(math.Abs(v))))
	if e < -4 || e > 6 {
		s := strconv.FormatFloat(v, 'g', n, 64)
		return strings.Replace(s, "-", "−", 1)
	}
	d := max(0, n-1-e)
	s := formatNum(v, d)
	if strings.Contains(s, ".") {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	return s
}
