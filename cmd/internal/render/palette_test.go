package render

import (
	"flag"
	"math"
	"os"
	"testing"
)

var update = flag.Bool("update", false, "rewrite the golden images and the generated palette tables")

// TestPaletteTables checks that palette_table.go is what the generator in palette.go makes;
// -update rewrites it.
func TestPaletteTables(t *testing.T) {
	want := paletteSource()
	if *update {
		if err := os.WriteFile("palette_table.go", []byte(want), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	got, err := os.ReadFile("palette_table.go")
	if err != nil {
		t.Fatal(err)
	}
	if string(got) != want {
		t.Errorf("palette_table.go differs from the generator's output; run go test -run TestPaletteTables -update")
	}
	if speedTable != buildSequential() || pressureTable != buildDiverging() {
		t.Errorf("compiled tables differ from the generator's output")
	}
}

// TestOklabRoundTrip checks the colour-space conversion: sRGB → Oklab → sRGB is the identity,
// and white is L = 1, a = b = 0 (Ottosson 2020 defines the space so; the matrices are checked
// against each other and against the white point, not against copied reference values).
func TestOklabRoundTrip(t *testing.T) {
	const tol = 1e-5 // the matrices carry 10 digits, so their product is the identity to ~1e-7, and the sRGB curve amplifies that up to 12.92 times near black
	for _, c := range [][3]float64{{1, 1, 1}, {0, 0, 0}, {1, 0, 0}, {0, 1, 0}, {0, 0, 1}, {0.2, 0.5, 0.7}, {0.9, 0.4, 0.1}} {
		lab := toOklab(c[0], c[1], c[2])
		r, g, b := lab.toSRGB()
		if math.Abs(r-c[0]) > tol || math.Abs(g-c[1]) > tol || math.Abs(b-c[2]) > tol {
			t.Errorf("round trip of %v: got %v %v %v", c, r, g, b)
		}
	}
	w := toOklab(1, 1, 1)
	if math.Abs(w.L-1) > tol || math.Abs(w.A) > tol || math.Abs(w.B) > tol {
		t.Errorf("white: got %+v, want L = 1, a = b = 0", w)
	}
}

// labOf returns the Oklab colour of a table entry.
func labOf(e [3]uint8) oklab {
	return toOklab(float64(e[0])/255, float64(e[1])/255, float64(e[2])/255)
}

// TestPaletteProperties checks what the maps promise: in gamut without clipping, monotone
// lightness (readable in greyscale and with any colour-vision deficiency), equal perceptual
// steps, hue change on the blue–yellow axis, and for the diverging map a light neutral centre
// with equal lightness at equal distance either side.
func TestPaletteProperties(t *testing.T) {
	// quantStep is the largest Oklab change 8-bit rounding can make to one entry (half a code
	// value in each channel is ≤ 0.002 in L and about as much in a, b).
	const quantStep = 0.004
	t.Run("gamut", func(t *testing.T) {
		for _, c := range []oklab{seqFrom, seqTo, divNeg, divCentre, divPos} {
			r, g, b := c.toSRGB()
			for _, v := range []float64{r, g, b} {
				if v < 0 || v > 1 {
					t.Errorf("anchor %+v is outside sRGB: %v %v %v", c, r, g, b)
				}
			}
		}
	})
	t.Run("sequential", func(t *testing.T) {
		// One step is 0.0025 in L, close to what 8-bit rounding moves, so two neighbours may
		// round to one colour; lightness must never fall and must rise over every 4 entries.
		for i := 1; i < 256; i++ {
			a, b := labOf(speedTable[i-1]), labOf(speedTable[i])
			if b.L < a.L {
				t.Errorf("lightness falls at entry %d: got %.4f after %.4f", i, b.L, a.L)
			}
			if i >= 4 {
				if c := labOf(speedTable[i-4]); b.L <= c.L {
					t.Errorf("lightness does not rise from entry %d to %d: got %.4f after %.4f", i-4, i, b.L, c.L)
				}
			}
		}
		// Over 16-entry runs the steps agree to within the rounding of their ends.
		want := labDist(seqFrom, seqTo) / 255 * 16
		for i := 0; i+16 < 256; i += 16 {
			got := labDist(labOf(speedTable[i]), labOf(speedTable[i+16]))
			if math.Abs(got-want) > 2*quantStep {
				t.Errorf("16-step difference at entry %d: got %.4f, want %.4f ± %.4f", i, got, want, 2*quantStep)
			}
		}
		// Hue change on the blue–yellow axis: b moves at least 4 times as far as a.
		if da, db := math.Abs(seqTo.A-seqFrom.A), math.Abs(seqTo.B-seqFrom.B); db < 4*da {
			t.Errorf("sequential map: |Δa| = %.3f, |Δb| = %.3f, want |Δb| ≥ 4|Δa|", da, db)
		}
	})
	t.Run("diverging", func(t *testing.T) {
		for i := 0; i < 128; i++ {
			n, p := labOf(pressureTable[i]), labOf(pressureTable[255-i])
			if math.Abs(n.L-p.L) > quantStep {
				t.Errorf("entries %d and %d: lightness %.4f and %.4f, want equal ± %.4f", i, 255-i, n.L, p.L, quantStep)
			}
			if i > 0 {
				if prev := labOf(pressureTable[i-1]); n.L <= prev.L {
					t.Errorf("negative arm: lightness not rising toward the centre at entry %d", i)
				}
			}
		}
		c := labOf(pressureTable[127])
		if c.L < 0.95 || math.Hypot(c.A, c.B) > 0.02 {
			t.Errorf("centre entry: got %+v, want light (L ≥ 0.95) and near-neutral (chroma ≤ 0.02)", c)
		}
		// Opposite hues on the blue–yellow axis: the ends have b of opposite sign.
		if n, p := labOf(pressureTable[0]), labOf(pressureTable[255]); !(n.B < -0.05 && p.B > 0.05) {
			t.Errorf("ends: b = %.3f and %.3f, want < −0.05 and > 0.05", n.B, p.B)
		}
	})
}

func labDist(a, b oklab) float64 {
	return math.Sqrt((b.L-a.L)*(b.L-a.L) + (b.A-a.A)*(b.A-a.A) + (b.B-a.B)*(b.B-a.B))
}
