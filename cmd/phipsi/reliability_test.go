package main

import (
	"bytes"
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"runtime"
	"syscall"
	"testing"
	"time"
)

// timing matches the summary's wall-clock fields, the only ones allowed to differ between runs,
// and htmlTiming the same numbers in the review page.
var (
	timing     = regexp.MustCompile(`"(seconds|setup_seconds|total_seconds)": [0-9.e+-]+`)
	htmlTiming = regexp.MustCompile(`(data-key="solve\.[a-z_]*seconds">)[0-9.]+`)
)

// TestReproducible: summary.json (timing aside) and every CSV and PNG are byte-identical at
// GOMAXPROCS 1 and 2 and from run to run.
func TestReproducible(t *testing.T) {
	scenario := filepath.Join("..", "..", "scenarios", "duct-strut.toml")
	runAt := func(procs int) map[string][]byte {
		old := runtime.GOMAXPROCS(procs)
		defer runtime.GOMAXPROCS(old)
		dir := t.TempDir()
		code, _, stderr := call(t, "run", scenario, "--out", dir, "--quiet", "--spacing", "0.004")
		if code != 0 {
			t.Fatalf("exit %d: %s", code, stderr)
		}
		files, _ := filepath.Glob(filepath.Join(dir, "*"))
		out := map[string][]byte{}
		for _, f := range files {
			b, err := os.ReadFile(f)
			if err != nil {
				t.Fatal(err)
			}
			switch filepath.Base(f) {
			case "summary.json":
				b = timing.ReplaceAll(b, []byte(`"$1": 0`))
			case "report.html":
				b = htmlTiming.ReplaceAll(b, []byte(`${1}0`))
			}
			out[filepath.Base(f)] = b
		}
		return out
	}
	a, b, c := runAt(1), runAt(2), runAt(2)
	for name, want := range a {
		for i, other := range []map[string][]byte{b, c} {
			if got, ok := other[name]; !ok || !bytes.Equal(got, want) {
				t.Errorf("%s differs between GOMAXPROCS 1 and run %d at GOMAXPROCS 2", name, i+1)
			}
		}
	}
	if len(a) < 8 {
		t.Errorf("only %d output files", len(a))
	}
	var sum map[string]any
	if err := json.Unmarshal(a["summary.json"], &sum); err != nil {
		t.Fatal(err)
	}
}

// TestInterrupt: SIGINT or SIGTERM during a run stops it within two seconds with exit status
// 130 and leaves no temporary or half-written file.
func TestInterrupt(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the command and runs a large grid")
	}
	bin := filepath.Join(t.TempDir(), "phipsi")
	if out, err := exec.Command("go", "build", "-o", bin, ".").CombinedOutput(); err != nil {
		t.Fatalf("build: %v\n%s", err, out)
	}
	scenario := filepath.Join("..", "..", "scenarios", "pier-in-flume.toml")
	for _, tc := range []struct {
		sig   syscall.Signal
		after time.Duration
	}{{syscall.SIGINT, 300 * time.Millisecond}, {syscall.SIGINT, 1500 * time.Millisecond}, {syscall.SIGTERM, 3 * time.Second}} {
		dir := t.TempDir()
		cmd := exec.Command(bin, "run", scenario, "--out", dir, "--spacing", "0.0012", "--quiet")
		var stderr bytes.Buffer
		cmd.Stderr = &stderr
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		time.Sleep(tc.after)
		sent := time.Now()
		cmd.Process.Signal(tc.sig)
		err := cmd.Wait()
		latency := time.Since(sent)
		code := cmd.ProcessState.ExitCode()
		t.Logf("%v after %v: exit %d in %v", tc.sig, tc.after, code, latency.Round(time.Millisecond))
		if code == 0 {
			t.Logf("run finished before the signal; nothing to check (err %v)", err)
			continue
		}
		if code != exitInterrupted {
			t.Errorf("%v after %v: exit %d, want %d (stderr %q)", tc.sig, tc.after, code, exitInterrupted, stderr.String())
		}
		// Two seconds is the bar for stopping at any stage.
		if latency > 2*time.Second {
			t.Errorf("%v after %v: stopped %v after the signal, want ≤ 2 s", tc.sig, tc.after, latency)
		}
		left, _ := filepath.Glob(filepath.Join(dir, ".*"))
		if len(left) > 0 {
			t.Errorf("temporary files left behind: %v", left)
		}
	}
}
