package main

import (
	"bytes"
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"phipsi/cmd/internal/scenario"
)

// call runs the command in-process and returns its exit status and output.
func call(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	err := run(context.Background(), args, &out, &errb)
	code := exitStatus(err, &errb)
	return code, out.String(), errb.String()
}

// TestBundledScenarios runs every file in scenarios/ and checks the outputs' contract: the
// summary's keys, the surface tables' headers, and a console report with the caution.
func TestBundledScenarios(t *testing.T) {
	files, err := filepath.Glob(filepath.Join("..", "..", "scenarios", "*.toml"))
	if err != nil || len(files) < 3 {
		t.Fatalf("found %d scenarios (%v), want at least 3", len(files), err)
	}
	for _, f := range files {
		t.Run(filepath.Base(f), func(t *testing.T) {
			if testing.Short() && !strings.Contains(f, "pier") {
				t.Skip("short mode runs one scenario")
			}
			dir := t.TempDir()
			code, stdout, stderr := call(t, "run", f, "--out", dir)
			if code != 0 {
				t.Fatalf("exit %d, stderr %q", code, stderr)
			}
			if !strings.Contains(stdout, "screening aid") {
				t.Errorf("console report lacks the caution:\n%s", stdout)
			}
			raw, err := os.ReadFile(filepath.Join(dir, "summary.json"))
			if err != nil {
				t.Fatal(err)
			}
			var sum map[string]any
			if err := json.Unmarshal(raw, &sum); err != nil {
				t.Fatal(err)
			}
			for _, k := range []string{"name", "title", "grid", "solve", "flow", "obstacles", "walls", "probes", "warnings"} {
				if _, ok := sum[k]; !ok {
					t.Errorf("summary.json lacks %q", k)
				}
			}
			for _, k := range []string{"nx", "ny", "spacing", "unknowns"} {
				if _, ok := sum["grid"].(map[string]any)[k]; !ok {
					t.Errorf("summary.json grid lacks %q", k)
				}
			}
			for _, k := range []string{"rate", "inlet_speed", "outlet_speed", "dynamic_pressure", "phi_psi_mismatch"} {
				if _, ok := sum["flow"].(map[string]any)[k]; !ok {
					t.Errorf("summary.json flow lacks %q", k)
				}
			}
			// The inputs echo the scenario file.
			sc, err := scenario.Load(f)
			if err != nil {
				t.Fatal(err)
			}
			in, _ := sum["inputs"].(map[string]any)
			want := map[string]float64{"density": sc.Fluid.Density, "inlet_speed": sc.Inflow.Speed, "inlet_pressure": sc.Inflow.Pressure,
				"sound_speed": sc.Fluid.SoundSpeed, "tolerance": sc.Solver.Tolerance, "max_iterations": float64(sc.Solver.MaxIterations)}
			for k, v := range want {
				if got, ok := in[k].(float64); !ok || got != v {
					t.Errorf("summary.json inputs.%s = %v, want %v", k, in[k], v)
				}
			}
			if pv, ok := in["vapour_pressure"].(float64); sc.Fluid.HasVapourPressure && (!ok || pv != sc.Fluid.VapourPressure) ||
				!sc.Fluid.HasVapourPressure && in["vapour_pressure"] != nil {
				t.Errorf("summary.json inputs.vapour_pressure = %v, want %v (given: %v)", in["vapour_pressure"], sc.Fluid.VapourPressure, sc.Fluid.HasVapourPressure)
			}
			for _, o := range sum["obstacles"].([]any) {
				ob := o.(map[string]any)
				for _, k := range []string{"name", "psi", "circulation", "max_speed", "max_speed_at", "min_cp", "min_cp_at", "force", "stagnation_points", "cells_across"} {
					if _, ok := ob[k]; !ok {
						t.Errorf("obstacle lacks %q", k)
					}
				}
				checkCSV(t, filepath.Join(dir, "surface-"+ob["name"].(string)+".csv"))
			}
			for _, w := range []string{"lower", "upper"} {
				checkCSV(t, filepath.Join(dir, "wall-"+w+".csv"))
			}
			if bytes.Contains(raw, []byte("NaN")) {
				t.Error("summary.json contains NaN")
			}
			left, _ := filepath.Glob(filepath.Join(dir, ".*tmp*"))
			if len(left) > 0 {
				t.Errorf("temporary files left behind: %v", left)
			}
		})
	}
}

func checkCSV(t *testing.T, path string) {
	t.Helper()
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Error(err)
		return
	}
	lines := strings.Split(strings.TrimSpace(string(raw)), "\n")
	if lines[0] != "s,x,y,speed,cp,pressure" || len(lines) < 10 {
		t.Errorf("%s: header %q and %d rows, want s,x,y,speed,cp,pressure and ≥ 9 rows", path, lines[0], len(lines)-1)
	}
}

// TestExitStatuses checks the exit-code contract of DESIGN.md and that nothing is written for an
// invalid scenario.
func TestExitStatuses(t *testing.T) {
	dir := t.TempDir()
	write := func(name, body string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	good := write("good.toml", `name = "g"
[fluid]
density = 1000
[inflow]
speed = 1
[channel]
length = 2
height = 1
[grid]
spacing = 0.05
`)
	bad := write("bad.toml", `name = "b"
[fluid]
density = -1
[inflow]
speed = 1
[channel]
length = 2
height = 1
[grid]
spacing = 0.05
`)
	stall := write("stall.toml", string(mustRead(t, good))+"[solver]\nmax_iterations = 3\n[[obstacle]]\nname = \"c\"\nshape = \"circle\"\ncenter = [1, 0.5]\nradius = 0.2\n")
	huge := write("huge.toml", strings.Replace(string(mustRead(t, good)), "spacing = 0.05", "spacing = 1e-6", 1))
	out := filepath.Join(dir, "out")
	cases := []struct {
		name   string
		args   []string
		code   int
		stderr string
	}{
		{"no command", nil, exitUsage, "phipsi: no command"},
		{"unknown command", []string{"fly"}, exitUsage, "unknown command"},
		{"unknown flag", []string{"run", good, "--fast"}, exitUsage, "unknown flag"},
		{"two files", []string{"run", good, good}, exitUsage, "expected one scenario"},
		{"bad method", []string{"run", good, "--method", "magic", "--out", out}, exitUsage, "--method"},
		{"invalid scenario", []string{"run", bad, "--out", out}, exitInvalid, "bad.toml:3:11: fluid.density: must be > 0"},
		{"missing file", []string{"run", filepath.Join(dir, "none.toml"), "--out", out}, exitInvalid, "none.toml"},
		{"too large", []string{"check", huge, "--max-memory", "1GiB"}, exitInvalid, "grid.spacing"},
		{"not converged", []string{"run", stall, "--out", out, "--quiet"}, exitNotConverge, "not converged"},
		{"sor", []string{"run", good, "--out", out, "--method", "sor", "--quiet"}, 0, ""},
		{"check", []string{"check", good}, 0, ""},
		{"version", []string{"version"}, 0, ""},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			code, _, stderr := call(t, tc.args...)
			if code != tc.code || !strings.Contains(stderr, tc.stderr) {
				t.Errorf("exit %d, stderr %q; want %d and %q", code, stderr, tc.code, tc.stderr)
			}
			if tc.code == exitInvalid {
				if _, err := os.Stat(out); err == nil && tc.name == "invalid scenario" {
					t.Errorf("output folder %s was created for an invalid scenario", out)
				}
			}
		})
	}
}

func mustRead(t *testing.T, p string) []byte {
	t.Helper()
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	return b
}
