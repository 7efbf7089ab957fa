package render

import (
	"bytes"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"phipsi/mesh"
)

// Golden-image comparison. Images are compared pixel by pixel, never by hash: anti-aliased
// edges may move by a level or two between compilers and architectures (fused multiply-add on
// arm64 changes the last bits of coverage), so a pixel passes within pixelTol per channel, and
// a picture passes while at most badFraction of its pixels fail.
const (
	pixelTol    = 8     // of 255 per channel
	badFraction = 0.002 // of all pixels
	goldenWidth = 800   // px: big enough to read, small enough to keep testdata light
)

// compareImages returns the number of pixels of got that differ from want by more than
// pixelTol in any channel, and the largest difference.
func compareImages(got, want image.Image) (bad, worst int, err error) {
	if got.Bounds() != want.Bounds() {
		return 0, 0, fmt.Errorf("size %v, want %v", got.Bounds().Size(), want.Bounds().Size())
	}
	b := got.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			g := color.RGBAModel.Convert(got.At(x, y)).(color.RGBA)
			w := color.RGBAModel.Convert(want.At(x, y)).(color.RGBA)
			d := max(absDiff(g.R, w.R), absDiff(g.G, w.G), absDiff(g.B, w.B), absDiff(g.A, w.A))
			worst = max(worst, d)
			if d > pixelTol {
				bad++
			}
		}
	}
	return bad, worst, nil
}

func absDiff(a, b uint8) int {
	if a > b {
		return int(a - b)
	}
	return int(b - a)
}

// checkGolden compares a PNG with testdata/golden/<name>.png, or writes it there with -update.
// A failing image is written next to the test's temporary files for a look.
func checkGolden(t *testing.T, name string, data []byte) {
	t.Helper()
	path := filepath.Join("testdata", "golden", name+".png")
	if *update {
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	wantData, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test -run %s -update to create it)", err, t.Name())
	}
	got, err := png.Decode(bytes.NewReader(data))
	if err != nil {
		t.Fatal(err)
	}
	want, err := png.Decode(bytes.NewReader(wantData))
	if err != nil {
		t.Fatal(err)
	}
	bad, worst, err := compareImages(got, want)
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	n := got.Bounds().Dx() * got.Bounds().Dy()
	if float64(bad) > badFraction*float64(n) {
		out := filepath.Join(os.TempDir(), "render-"+name+".png") // kept after the test, for a look
		os.WriteFile(out, data, 0o644)
		t.Errorf("%s: %d of %d pixels differ by more than %d (worst %d), want at most %.1f %%; got image kept at %s",
			name, bad, n, pixelTol, worst, 100*badFraction, out)
	}
}

// TestGolden draws one picture of each kind from analytic flows and compares it with its
// golden image.
func TestGolden(t *testing.T) {
	pier, phi := pierFlow(t, 0.0125)
	foil := foilFlow(t, 0.005)
	cases := []struct {
		golden string
		draw   func() ([]Image, error)
		image  string // the name Render gives the picture
	}{
		{"pier-streamlines", func() ([]Image, error) {
			return Render(pier, phi, Options{Width: goldenWidth, Title: "Round pier", Images: []string{Streamlines}})
		}, "streamlines"},
		{"pier-speed", func() ([]Image, error) {
			return Render(pier, phi, Options{Width: goldenWidth, Title: "Round pier", Images: []string{Speed}})
		}, "speed"},
		{"pier-pressure", func() ([]Image, error) {
			return Render(pier, phi, Options{Width: goldenWidth, Title: "Round pier", Images: []string{Pressure}})
		}, "pressure"},
		{"pier-flownet", func() ([]Image, error) {
			return Render(pier, phi, Options{Width: goldenWidth, Title: "Round pier", Images: []string{Flownet}})
		}, "flownet"},
		{"pier-walls", func() ([]Image, error) {
			return Render(pier, phi, Options{Width: goldenWidth, Title: "Round pier", Images: []string{Walls}})
		}, "walls"},
		{"pier-surface-bluff", func() ([]Image, error) {
			return Render(pier, phi, Options{Width: goldenWidth, Title: "Round pier", Images: []string{Surfaces}})
		}, "surface-pier"},
		{"vane-surface-foil", func() ([]Image, error) {
			return Render(foil, nil, Options{Width: goldenWidth, Title: "Joukowski vane", Images: []string{Surfaces}})
		}, "surface-vane"},
	}
	for _, tc := range cases {
		t.Run(tc.golden, func(t *testing.T) {
			imgs, err := tc.draw()
			if err != nil {
				t.Fatal(err)
			}
			if len(imgs) != 1 || imgs[0].Name != tc.image {
				t.Fatalf("got %d images (%v), want one named %q", len(imgs), names(imgs), tc.image)
			}
			checkGolden(t, tc.golden, imgs[0].PNG)
		})
	}
}

func names(imgs []Image) []string {
	var out []string
	for _, im := range imgs {
		out = append(out, im.Name)
	}
	return out
}

// TestRenderOptions checks which images come back for which options, their widths, and the
// errors for bad input.
func TestRenderOptions(t *testing.T) {
	pier, phi := pierFlow(t, 0.025)
	cases := []struct {
		name    string
		phi     []float64
		opt     Options
		want    []string
		wantErr error // nil: no error; errAny: some error
	}{
		{"all", phi, Options{Width: 400}, []string{"streamlines", "speed", "pressure", "flownet", "walls", "surface-pier"}, nil},
		{"all without φ", nil, Options{Width: 400}, []string{"streamlines", "speed", "pressure", "walls", "surface-pier"}, nil},
		{"none", phi, Options{Width: 400, Images: []string{}}, nil, nil},
		{"flownet without φ", nil, Options{Width: 400, Images: []string{Flownet}}, nil, nil},
		{"order of Names", phi, Options{Width: 400, Images: []string{Surfaces, Speed}}, []string{"speed", "surface-pier"}, nil},
		{"default width", nil, Options{Images: []string{Walls}}, []string{"walls"}, nil},
		{"unknown image", phi, Options{Images: []string{"vorticity"}}, nil, ErrUnknownImage},
		{"too narrow", phi, Options{Width: MinWidth - 1}, nil, errAny},
		{"too wide", phi, Options{Width: MaxWidth + 1}, nil, errAny},
		{"φ of the wrong length", phi[:10], Options{Width: 400}, nil, errAny},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			imgs, err := Render(pier, tc.phi, tc.opt)
			switch {
			case tc.wantErr == errAny && err == nil:
				t.Fatalf("got no error, want one")
			case tc.wantErr == errAny:
				return
			case tc.wantErr != nil && !errors.Is(err, tc.wantErr):
				t.Fatalf("got error %v, want %v", err, tc.wantErr)
			case tc.wantErr != nil:
				return
			case err != nil:
				t.Fatalf("got error %v, want none", err)
			}
			if got := names(imgs); !slices.Equal(got, tc.want) {
				t.Fatalf("got images %v, want %v", got, tc.want)
			}
			w := tc.opt.Width
			if w == 0 {
				w = DefaultWidth
			}
			for _, im := range imgs {
				cfg, err := png.DecodeConfig(bytes.NewReader(im.PNG))
				if err != nil {
					t.Fatalf("%s: %v", im.Name, err)
				}
				if cfg.Width != w {
					t.Errorf("%s: width %d, want %d", im.Name, cfg.Width, w)
				}
			}
		})
	}
	t.Run("no result", func(t *testing.T) {
		if _, err := Render(nil, nil, Options{}); err == nil {
			t.Errorf("got no error for a nil result, want one")
		}
	})
}

var errAny = errors.New("any error")

// TestEqualScales checks that a field picture's plot has equal x and y scales and that its
// height follows the domain: a channel twice as tall gets a plot twice as tall.
func TestEqualScales(t *testing.T) {
	if err := parseFonts(); err != nil {
		t.Fatal(err)
	}
	// relTol: pixel sizes are fractional, so only round-off separates the ratios.
	const relTol = 1e-12
	var heights []float64
	for _, H := range []float64{0.5, 1.0} {
		geo := straightChannel(t, 3, H)
		g, err := mesh.PlanGrid(3, 0, H, 0.05)
		if err != nil {
			t.Fatal(err)
		}
		m, err := mesh.Build(geo, g)
		if err != nil {
			t.Fatal(err)
		}
		r := fillResult(t, m, 1, 1000, func(p mesh.Point) float64 { return p.Y },
			func(mesh.Point) (float64, float64) { return 1, 0 }, func(mesh.Point) (float64, float64) { return 1, 0 }, nil, nil)
		p := newScene(r, nil, 1000, "").newFieldPic()
		fr := p.fr
		gotRatio := fr.height / fr.width
		wantRatio := (fr.y1 - fr.y0) / (fr.x1 - fr.x0)
		if math.Abs(gotRatio-wantRatio) > relTol*wantRatio {
			t.Errorf("H = %g: plot aspect %g, want the domain's %g", H, gotRatio, wantRatio)
		}
		heights = append(heights, fr.height-(fr.y1-fr.y0-H)*fr.scale) // the channel's own height in px
	}
	if got := heights[1] / heights[0]; math.Abs(got-2) > 1e-9 {
		t.Errorf("channel height in pixels: got ratio %g between H = 1 and H = 0.5, want 2", got)
	}
}

// TestGlyphs checks that the built-in fonts have every special character the labels use.
func TestGlyphs(t *testing.T) {
	if err := parseFonts(); err != nil {
		t.Fatal(err)
	}
	for _, r := range "ρψφΔΓ−×·½°²³|<_" {
		if regularTTF.Index(r) == 0 {
			t.Errorf("the regular font has no glyph for %q", r)
		}
	}
	if boldTTF.Index('ψ') == 0 {
		t.Errorf("the bold font has no Greek")
	}
}
