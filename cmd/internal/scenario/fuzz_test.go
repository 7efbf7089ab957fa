package scenario

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// maxFuzzInput bounds the inputs FuzzParse tries: scenarios are small, and
// larger inputs only slow the fuzzer down.
const maxFuzzInput = 64 << 10

// FuzzParse checks that Parse never panics and always returns either a
// scenario or an *Error whose position lies inside the document. Run it with
//
//	go test -fuzz FuzzParse ./cmd/internal/scenario/
func FuzzParse(f *testing.F) {
	files, err := filepath.Glob(filepath.Join("testdata", "*.toml"))
	if err != nil {
		f.Fatal(err)
	}
	for _, file := range files {
		data, err := os.ReadFile(file)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	for _, s := range []string{
		base,
		"\ufeff" + base,
		base + circle,
		base + "[[obstacle]]\nname = \"v\"\nshape = \"polygon\"\npoints_file = \"vane.csv\"\nkutta = true\n",
		base + "[[obstacle]]\nname = \"v\"\nshape = \"naca4\"\ncode = \"2412\"\nchord = 0.3\nleading_edge = [1, 0.5]\n",
		base + "[[probe]]\nname = \"a\"\nat = [1, nan]\n",
		base + "[output]\nimages = [\"speed\", \"speed\"]\nimage_width = 1e3\n",
		strings.Replace(base, "height = 1", "lower = [[0, 0], [4, 0]]\nupper = [[0, 1], [2, 1], [2, 0.5], [4, 0.5]]", 1),
		"obstacle = [{ name = \"a\", shape = \"circle\", center = [1, 2], radius = 1 }, 5]\n",
		"a.b.c.d = [[[[[]]]]]\n[x.y]\n[[x.y.z]]\n",
		"[[obstacle]]\n[obstacle.sub]\n[[obstacle]]\n",
		"name = \"é\" # ü\n\"ké\" = 1\n",
		"x = [1, 2\n",
		"",
	} {
		f.Add([]byte(s))
	}
	// The fuzzer's path lives in testdata so that points_file = "vane.csv"
	// resolves to a real file.
	path := filepath.Join("testdata", "fuzz.toml")
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) > maxFuzzInput {
			t.Skip("input larger than maxFuzzInput")
		}
		s, err := Parse(path, data)
		if err == nil {
			if s == nil {
				t.Fatal("Parse: got neither a scenario nor an error")
			}
			return
		}
		if s != nil {
			t.Errorf("Parse: got a scenario together with error %v", err)
		}
		var e *Error
		if !errors.As(err, &e) {
			t.Fatalf("Parse: got error of type %T, want *Error: %v", err, err)
		}
		if e.Msg == "" {
			t.Errorf("Parse: got an *Error without a message: %+v", e)
		}
		if e.File != path {
			// Only a bad row of a points file names another file.
			if !strings.HasSuffix(e.Key, ".points_file") {
				t.Errorf("Parse: error names file %q, want %q: %v", e.File, path, err)
			}
			return
		}
		// The position must lie inside the document (or just past its end,
		// where go-toml reports a missing closing bracket).
		lines := strings.Split(string(data), "\n")
		if e.Line > len(lines) || e.Line < 0 || (e.Line == 0 && e.Col != 0) {
			t.Errorf("Parse: error at line %d of a %d-line document: %v", e.Line, len(lines), err)
		}
	})
}

// TestParseHostile feeds documents built to make a careless decoder slow or
// crash: deep nesting, very long dotted keys and headers, many sections.
// Each must come back with an *Error (they are all invalid scenarios).
func TestParseHostile(t *testing.T) {
	const root = "unknown key (allowed: name, title, fluid, inflow, channel, grid, solver, obstacle, probe, output)"
	tests := []struct {
		name string
		src  string
		want string
	}{
		{"nested arrays", "x = " + strings.Repeat("[", 9000) + strings.Repeat("]", 9000) + "\n", "h.toml:1:1: x: " + root},
		{"too deeply nested", "x = " + strings.Repeat("[", 20000) + strings.Repeat("]", 20000) + "\n",
			"h.toml:1:10005: arrays and inline tables are nested more than the maximum of 10000 levels deep"},
		{"nested inline tables", "x = " + strings.Repeat("{a = ", 5000) + "1" + strings.Repeat("}", 5000) + "\n", "h.toml:1:1: x: " + root},
		{"nested wall points", walls(t, strings.Repeat("[", 5000)+strings.Repeat("]", 5000), "[[0, 1], [4, 1]]"),
			"h.toml:8:10: channel.lower[0]: must be a point [x, y] (2 numbers), got 1 element"},
		{"long dotted key", strings.Repeat("a.", 20000) + "b = 1\n", "h.toml:1:1: a: " + root},
		{"long header", "[" + strings.Repeat("a.", 20000) + "b]\nc = 1\n", "h.toml:1:2: a: " + root},
		{"many array tables", base + strings.Repeat("[[obstacle]]\n", 5000), "h.toml:11:1: obstacle[0].name: missing required key"},
		{"many keys", base + func() string {
			var b strings.Builder
			for i := range 5000 {
				fmt.Fprintf(&b, "k%d = 1\n", i)
			}
			return b.String()
		}(), "h.toml:11:1: grid.k0: unknown key (allowed: spacing, cells_across)"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s, err := Parse("h.toml", []byte(tt.src))
			var e *Error
			if s != nil || !errors.As(err, &e) {
				t.Fatalf("got (%v, %v), want an *Error", s != nil, err)
			}
			if got := err.Error(); got != tt.want {
				t.Errorf("got  %s\nwant %s", got, tt.want)
			}
		})
	}
}
