package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// summaryOf runs a scenario and returns its summary.json.
func summaryOf(t *testing.T, path string) map[string]any {
	t.Helper()
	dir := t.TempDir()
	code, _, stderr := call(t, "run", path, "--out", dir, "--quiet")
	if code != 0 {
		t.Fatalf("%s: exit %d: %s", path, code, stderr)
	}
	raw, err := os.ReadFile(filepath.Join(dir, "summary.json"))
	if err != nil {
		t.Fatal(err)
	}
	var sum map[string]any
	if err := json.Unmarshal(raw, &sum); err != nil {
		t.Fatal(err)
	}
	return sum
}

// TestWarnings: each warning is raised by a scenario made for it (a case may raise others that
// its geometry calls for: a body close to a wall also loads the wall with an adverse gradient);
// a well-posed case raises none.
func TestWarnings(t *testing.T) {
	cases := []struct{ file, want string }{
		{"warn-mach.toml", "Mach"},           // 150 m/s air past a cylinder: peak ≈ 300 m/s (common practice: Mach 0.3)
		{"warn-coarse.toml", "cells across"}, // 12 cells across
		{"warn-gap.toml", "gap of"},          // 1.5 cells between cylinder and wall
		{"warn-inlet.toml", "from the inlet"},
		{"warn-cavitation.toml", "cavitation margin"},
		{"warn-adverse.toml", "may separate"}, // a sudden 1:2 expansion
		{"warn-mismatch.toml", "ψ differ by 21.1 % of the inlet speed at (2.78, 0.35) m, near block"}, // at the acute corner
		{"quiet-pier.toml", ""},
	}
	for _, tc := range cases {
		t.Run(tc.file, func(t *testing.T) {
			sum := summaryOf(t, filepath.Join("testdata", tc.file))
			ws, _ := sum["warnings"].([]any)
			var got []string
			for _, w := range ws {
				got = append(got, w.(string))
			}
			if tc.want == "" {
				if len(got) != 0 {
					t.Errorf("warnings %q, want none", got)
				}
				return
			}
			found := false
			for _, w := range got {
				found = found || strings.Contains(w, tc.want)
			}
			if !found {
				t.Errorf("warnings %q, want one containing %q", got, tc.want)
			}
		})
	}
}

// TestCavitationWorkedCase: σ = (p_in − p_v)/(½ρU²) with the vapour pressure of water at 20 °C,
// 2339 Pa (IAPWS-IF97 saturation equation), ρ = 998.2 kg/m³ (standard tables), p_in = 101325 Pa
// and U = 1 m/s: σ = 98986/499.1 = 198.329..., and the margin is σ + Cp_min (common practice).
func TestCavitationWorkedCase(t *testing.T) {
	sum := summaryOf(t, filepath.Join("testdata", "quiet-pier.toml"))
	cav := sum["cavitation"].(map[string]any)
	want := (101325.0 - 2339) / (0.5 * 998.2 * 1 * 1)
	if got := cav["sigma"].(float64); math.Abs(got-want) > 1e-9*want {
		t.Errorf("sigma %.12g, want %.12g", got, want)
	}
	minCp := cav["min_cp"].(float64)
	if got := cav["margin"].(float64); math.Abs(got-(want+minCp)) > 1e-9*want {
		t.Errorf("margin %.12g, want sigma + min_cp = %.12g", got, want+minCp)
	}
	// The pier's Cp_min is about −3.2 (a cylinder at d/H = 0.3 has V_max ≈ 2.17 U; REFERENCES 2).
	if minCp > -3 || minCp < -3.8 {
		t.Errorf("min_cp %.4f, want about 1 − 2.167² = −3.70 … −3", minCp)
	}
}
