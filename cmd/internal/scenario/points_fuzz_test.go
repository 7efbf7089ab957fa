package scenario

import (
	"errors"
	"math"
	"os"
	"path/filepath"
	"testing"
)

// FuzzPoints feeds the points-file reader arbitrary bytes: it must never panic, every refusal
// must be an *Error, and every accepted point must be finite.
func FuzzPoints(f *testing.F) {
	if data, err := os.ReadFile(filepath.Join("..", "..", "..", "scenarios", "duct-strut-vane.csv")); err == nil {
		f.Add(data)
	}
	f.Add([]byte("x,y\n0,0\n1,0\n0,1\n"))
	f.Add([]byte("\ufeff# comment\r\n0 , 0\r\n1,0\r\n\r\n0.5,1e300\r\n"))
	f.Add([]byte("0,0\n1,nan\n0,1\n"))
	f.Add([]byte("1,2,3\n"))
	f.Add([]byte(",\n,,\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) > 64<<10 {
			return
		}
		pts, err := parsePoints("vane.csv", "obstacle[0].points_file", data)
		if err != nil {
			var e *Error
			if !errors.As(err, &e) {
				t.Fatalf("error %v (%T) is not an *Error", err, err)
			}
			return
		}
		for _, p := range pts {
			if math.IsNaN(p[0]) || math.IsNaN(p[1]) || math.IsInf(p[0], 0) || math.IsInf(p[1], 0) {
				t.Fatalf("accepted a non-finite point %v", p)
			}
		}
	})
}
