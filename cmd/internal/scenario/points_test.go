package scenario

import (
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
)

func TestParsePoints(t *testing.T) {
	tri := [][2]float64{{0, 0}, {1, 0}, {0.5, 1}}
	tests := []struct {
		name string
		data string
		want [][2]float64
	}{
		{"no header", "0,0\n1,0\n0.5,1\n", tri},
		{"header", "x,y\n0,0\n1,0\n0.5,1\n", tri},
		{"quoted header", "\"x\",\"y\"\n0,0\n1,0\n0.5,1\n", tri},
		{"header with units", "x (m), y (m)\n0,0\n1,0\n0.5,1", tri},
		{"comments and blank lines", "# a vane\n\nx,y # header\n0,0\n  \n# the nose\n1,0   # here\n0.5,1\n\n", tri},
		{"CRLF", "x,y\r\n0,0\r\n1,0\r\n0.5,1\r\n", tri},
		{"BOM", "\ufeffx,y\n0,0\n1,0\n0.5,1\n", tri},
		{"blanks around fields", " 0 ,\t0\n1, 0\n  0.5 ,1  \n", tri},
		{"exponents", "1e-3,-2E2\n", [][2]float64{{0.001, -200}}},
		{"empty", "", nil},
		{"only a header", "x,y\n", nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := parsePoints("v.csv", "obstacle[0].points_file", []byte(tt.data))
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(got, tt.want) {
				t.Errorf("got %v, want %v", got, tt.want)
			}
		})
	}
}

func TestParsePointsErrors(t *testing.T) {
	const k = "obstacle[0].points_file"
	tests := []struct {
		name string
		data string
		want string
	}{
		{"semicolons", "x,y\n0;0\n", "v.csv:2:1: " + k + ": row must be x,y (2 numbers), got 1 field"},
		{"three fields", "0,0\n1,0,0\n", "v.csv:2:1: " + k + ": row must be x,y (2 numbers), got 3 fields"},
		{"not a number", "0,0\n1,abc\n", `v.csv:2:3: ` + k + `: y must be a number, got "abc"`},
		{"column after blanks", "0,0\n1,   abc\n", `v.csv:2:6: ` + k + `: y must be a number, got "abc"`},
		{"non-ASCII field", "# é\n0,0 # ü\n1é,0\n", `v.csv:3:1: ` + k + `: x must be a number, got "1é"`},
		{"missing y", "0,0\n1,\n", `v.csv:2:3: ` + k + `: y must be a number, got ""`},
		{"nan", "nan,0\n", `v.csv:1:1: ` + k + `: x must be a finite number, got "nan"`},
		{"inf", "0,0\n0,-Inf\n", `v.csv:2:3: ` + k + `: y must be a finite number, got "-Inf"`},
		{"out of range", "1e999,0\n", `v.csv:1:1: ` + k + `: x must be a finite number, got "1e999" (out of range)`},
		// A first row with one number in it is data, not a header.
		{"half-numeric first row", "1.0,abc\n", `v.csv:1:5: ` + k + `: y must be a number, got "abc"`},
		// Only the first row may be a header.
		{"header later", "0,0\nx,y\n", `v.csv:2:1: ` + k + `: x must be a number, got "x"`},
		{"line numbers count blanks and comments", "x,y\n\n# c\n0,0\n\n1,0,\n", "v.csv:6:1: " + k + ": row must be x,y (2 numbers), got 3 fields"},
		{"invalid UTF-8", "0,0\n1,\xff\n", "v.csv:2: " + k + ": row is not valid UTF-8 text"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := parsePoints("v.csv", k, []byte(tt.data))
			if err == nil {
				t.Fatalf("got no error, want %s", tt.want)
			}
			var e *Error
			if !errors.As(err, &e) {
				t.Fatalf("got error of type %T, want *Error", err)
			}
			if got := err.Error(); got != tt.want {
				t.Errorf("got  %s\nwant %s", got, tt.want)
			}
		})
	}
}

// TestPointsFile checks points files read through Parse: relative to the
// scenario's directory, and errors that name the right file.
func TestPointsFile(t *testing.T) {
	dir := t.TempDir()
	write := func(name, data string) string {
		t.Helper()
		p := filepath.Join(dir, name)
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, []byte(data), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	good := write("shapes/good.csv", "x,y\n1,0.4\n1.2,0.4\n1.1,0.5\n")
	write("bad.csv", "x,y\n1,0.4\n1.2,a\n")
	write("two.csv", "1,0.4\n1.2,0.4\n")
	big := write("big.csv", "")
	if err := os.Truncate(big, maxFileBytes+1); err != nil {
		t.Fatal(err)
	}
	scenario := filepath.Join(dir, "t.toml")
	polygon := func(file string) string {
		return base + "[[obstacle]]\nname = \"v\"\nshape = \"polygon\"\npoints_file = \"" + file + "\"\n"
	}
	want := [][2]float64{{1, 0.4}, {1.2, 0.4}, {1.1, 0.5}}

	for _, file := range []string{"shapes/good.csv", filepath.ToSlash(good)} {
		t.Run("read "+file, func(t *testing.T) {
			s, err := Parse(scenario, []byte(polygon(file)))
			if err != nil {
				t.Fatal(err)
			}
			o := s.Obstacles[0]
			if !reflect.DeepEqual(o.Points, want) || o.PointsFile != file {
				t.Errorf("got points %v from %q, want %v from %q", o.Points, o.PointsFile, want, file)
			}
		})
	}

	errorTests := []struct {
		file string
		want string
	}{
		{"bad.csv", filepath.Join(dir, "bad.csv") + `:3:5: obstacle[0].points_file: y must be a number, got "a"`},
		{"two.csv", scenario + `:14:15: obstacle[0].points_file: points file "two.csv" has 2 points, need at least 3`},
		{"none.csv", scenario + `:14:15: obstacle[0].points_file: cannot read points file "none.csv": no such file or directory`},
		{"shapes", scenario + `:14:15: obstacle[0].points_file: cannot read points file "shapes": not a regular file`},
		{"/dev/null", scenario + `:14:15: obstacle[0].points_file: cannot read points file "/dev/null": not a regular file`},
		{"big.csv", scenario + `:14:15: obstacle[0].points_file: cannot read points file "big.csv": larger than 16 MiB`},
	}
	for _, tt := range errorTests {
		t.Run("error "+tt.file, func(t *testing.T) {
			if tt.file == "/dev/null" {
				if _, err := os.Stat(tt.file); err != nil {
					t.Skip("no /dev/null here")
				}
			}
			_, err := Parse(scenario, []byte(polygon(tt.file)))
			var e *Error
			if !errors.As(err, &e) {
				t.Fatalf("got %v (%T), want *Error %s", err, err, tt.want)
			}
			if got := err.Error(); got != tt.want {
				t.Errorf("got  %s\nwant %s", got, tt.want)
			}
		})
	}

	t.Run("missing file unwraps", func(t *testing.T) {
		_, err := Parse(scenario, []byte(polygon("none.csv")))
		if !errors.Is(err, os.ErrNotExist) {
			t.Errorf("errors.Is(err, os.ErrNotExist) = false, want true (err %v)", err)
		}
		if !strings.HasPrefix(err.Error(), scenario+":") {
			t.Errorf("got %v, want it to name the scenario file", err)
		}
	})
}
