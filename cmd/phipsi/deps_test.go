package main

import (
	"go/parser"
	"go/token"
	"io/fs"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// layers gives each project package its place in the one-way import order
// mesh < bc < solver < solver/flow < cmd/internal/* < cmd/phipsi: a package may import only
// packages of a lower layer (cmd/internal/report may use the scenario it reports on).
var layers = map[string]int{
	"phipsi/internal/pages":        -1,
	"phipsi/internal/par":          -1,
	"phipsi/mesh":                  0,
	"phipsi/bc":                    1,
	"phipsi/solver":                2,
	"phipsi/solver/flow":           3,
	"phipsi/cmd/internal/scenario": 4,
	"phipsi/cmd/internal/render":   5,
	"phipsi/cmd/internal/report":   5,
	"phipsi/cmd/phipsi":            6,
}

// confined lists third-party imports and the only packages allowed to use them.
var confined = map[string][]string{
	"github.com/fogleman/gg":          {"phipsi/cmd/internal/render"},
	"github.com/golang/freetype":      {"phipsi/cmd/internal/render"},
	"golang.org/x/image":              {"phipsi/cmd/internal/render"},
	"github.com/spf13/pflag":          {"phipsi/cmd/phipsi"},
	"golang.org/x/term":               {"phipsi/cmd/phipsi"},
	"github.com/pelletier/go-toml/v2": {"phipsi/cmd/internal/scenario"},
}

// TestImportDirection keeps the package layers one-way and the graphics, flag, terminal and TOML
// libraries inside the command's own packages (STYLE.md).
func TestImportDirection(t *testing.T) {
	root := filepath.Join("..", "..")
	fset := token.NewFileSet()
	err := filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.IsDir() {
			if name := d.Name(); path != root && (strings.HasPrefix(name, ".") || name == "testdata") {
				return filepath.SkipDir
			}
			return nil
		}
		if !strings.HasSuffix(path, ".go") || strings.HasSuffix(path, "_test.go") {
			return nil
		}
		rel, _ := filepath.Rel(root, filepath.Dir(path))
		pkg := "phipsi/" + filepath.ToSlash(rel)
		layer, known := layers[pkg]
		if !known {
			t.Errorf("%s: package %s has no layer in deps_test.go", path, pkg)
			return nil
		}
		f, err := parser.ParseFile(fset, path, nil, parser.ImportsOnly)
		if err != nil {
			return err
		}
		for _, imp := range f.Imports {
			ip, _ := strconv.Unquote(imp.Path.Value)
			if l, ok := layers[ip]; ok && l >= layer && ip != pkg {
				t.Errorf("%s: %s (layer %d) imports %s (layer %d): imports must go down the layers", path, pkg, layer, ip, l)
			}
			for prefix, allowed := range confined {
				if ip == prefix || strings.HasPrefix(ip, prefix+"/") {
					ok := false
					for _, a := range allowed {
						ok = ok || a == pkg
					}
					if !ok {
						t.Errorf("%s: %s imports %s, which only %v may use", path, pkg, ip, allowed)
					}
				}
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(filepath.Join(root, "go.mod")); err != nil {
		t.Fatalf("module root not found: %v", err)
	}
}
