package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestGeometryEdgeCases runs geometries that stress the classification and the solver: the run
// must finish with finite numbers (or be refused as invalid, exit 3, where the geometry is
// impossible), never crash.
func TestGeometryEdgeCases(t *testing.T) {
	head := "name = \"edge\"\n[fluid]\ndensity = 1000\n[inflow]\nspeed = 1\n[channel]\nlength = 4\n"
	cases := []struct {
		name, body string
		code       int
	}{
		// Circle through grid nodes: θ = 0 on every axis crossing (nodes pinned).
		{"nodes on the outline", "height = 1\n[grid]\nspacing = 0.025\n[[obstacle]]\nname = \"c\"\nshape = \"circle\"\ncenter = [2, 0.5]\nradius = 0.25\n", 0},
		// Circle a hair (1e-9 of a cell) away from nodes: θ → 0 arms.
		{"arms tending to zero", "height = 1\n[grid]\nspacing = 0.025\n[[obstacle]]\nname = \"c\"\nshape = \"circle\"\ncenter = [2, 0.5]\nradius = 0.25000000002\n", 0},
		// One cell between a body and the wall, or between two bodies: the grid cannot resolve the
		// gap, refused with the spacing that would.
		{"one-cell gap to a wall", "height = 1\n[grid]\nspacing = 0.01\n[[obstacle]]\nname = \"c\"\nshape = \"circle\"\ncenter = [2, 0.26]\nradius = 0.25\n", exitInvalid},
		{"one-cell gap between bodies", "height = 1\n[grid]\nspacing = 0.01\n[[obstacle]]\nname = \"a\"\nshape = \"circle\"\ncenter = [2, 0.35]\nradius = 0.1\n[[obstacle]]\nname = \"b\"\nshape = \"circle\"\ncenter = [2, 0.56]\nradius = 0.1\n", exitInvalid},
		// Two cells to the wall: no regular ring, circulation by surface integral, run with a
		// warning.
		{"two-cell gap to a wall", "height = 1\n[grid]\nspacing = 0.01\n[[obstacle]]\nname = \"c\"\nshape = \"circle\"\ncenter = [2, 0.2705]\nradius = 0.25\n", 0},
		// A polygon given clockwise with a repeated point.
		{"clockwise polygon, repeated point", "height = 1\n[grid]\nspacing = 0.01\n[[obstacle]]\nname = \"p\"\nshape = \"polygon\"\npoints = [[1.8, 0.4], [1.8, 0.6], [1.8, 0.6], [2.2, 0.5]]\n", 0},
		// A plate thinner than a cell, between two grid rows, with a given circulation.
		{"plate thinner than a cell", "height = 1\n[grid]\nspacing = 0.02\n[[obstacle]]\nname = \"p\"\nshape = \"polygon\"\npoints = [[1.5, 0.503], [2.5, 0.503], [2.5, 0.507], [1.5, 0.507]]\ncirculation = 0.1\n", 0},
		// A body touching the outlet plane is refused.
		{"body touching the outlet", "height = 1\n[grid]\nspacing = 0.02\n[[obstacle]]\nname = \"c\"\nshape = \"circle\"\ncenter = [3.9, 0.5]\nradius = 0.1\n", exitInvalid},
		// A wall step at the inlet is refused (the inlet height would be undefined).
		{"step at the inlet", "lower = [[0, 0], [0, 0.2], [4, 0.2]]\nupper = [[0, 1], [4, 1]]\n[grid]\nspacing = 0.02\n", exitInvalid},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			path := filepath.Join(dir, "edge.toml")
			if err := os.WriteFile(path, []byte(head+tc.body), 0o644); err != nil {
				t.Fatal(err)
			}
			out := filepath.Join(dir, "out")
			code, _, stderr := call(t, "run", path, "--out", out, "--quiet")
			if code != tc.code {
				t.Fatalf("exit %d (stderr %q), want %d", code, stderr, tc.code)
			}
			if code != 0 {
				if !strings.HasPrefix(stderr, "phipsi: ") {
					t.Errorf("stderr %q does not start with phipsi:", stderr)
				}
				if _, err := os.Stat(out); err == nil {
					t.Errorf("an invalid scenario created %s", out)
				}
				return
			}
			raw, err := os.ReadFile(filepath.Join(out, "summary.json"))
			if err != nil {
				t.Fatal(err)
			}
			var sum struct {
				Obstacles []struct {
					MaxSpeed    float64 `json:"max_speed"`
					Circulation float64 `json:"circulation"`
				} `json:"obstacles"`
			}
			if err := json.Unmarshal(raw, &sum); err != nil {
				t.Fatal(err)
			}
			for _, o := range sum.Obstacles {
				// Peak speeds of these bodies lie between 1 and 10 U; anything else is a broken fit.
				if !(o.MaxSpeed > 1 && o.MaxSpeed < 10) || math.IsNaN(o.Circulation) {
					t.Errorf("max speed %g, circulation %g: not a sane flow", o.MaxSpeed, o.Circulation)
				}
			}
		})
	}
}
