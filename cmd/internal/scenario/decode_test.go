package scenario

import (
	"errors"
	"io/fs"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
)

// base is a minimal valid scenario of exactly 10 lines, so that text appended
// to it starts on line 11.
const base = `name = "t"
[fluid]
density = 1000
[inflow]
speed = 1
[channel]
length = 4
height = 1
[grid]
spacing = 0.01
`

// edit returns base with old replaced by new; old must occur in base.
func edit(t *testing.T, old, new string) string {
	t.Helper()
	if !strings.Contains(base, old) {
		t.Fatalf("edit: %q is not in base", old)
	}
	return strings.Replace(base, old, new, 1)
}

// walls returns base with straight walls replaced by the given profiles on
// lines 8 and 9.
func walls(t *testing.T, lower, upper string) string {
	return edit(t, "height = 1\n", "lower = "+lower+"\nupper = "+upper+"\n")
}

// circle is an obstacle section starting on line 11 when appended to base.
const circle = `[[obstacle]]
name = "p"
shape = "circle"
center = [1, 0.5]
radius = 0.1
`

func TestParseErrors(t *testing.T) {
	const allRoot = "name, title, fluid, inflow, channel, grid, solver, obstacle, probe, output"
	const allObstacle = "name, shape, circulation, center, radius, semi_axes, angle, size, corner_radius, " +
		"points, points_file, kutta, trailing_edge, code, chord, leading_edge"
	const circleKeys = "name, shape, circulation, center, radius"
	const rectKeys = "name, shape, circulation, center, size, angle, corner_radius"
	const shapes = `"circle", "ellipse", "rectangle", "polygon", "naca4"`
	const images = `"streamlines", "speed", "pressure", "flownet", "walls", "surfaces"`
	polygon := func(body string) string {
		return base + "[[obstacle]]\nname = \"v\"\nshape = \"polygon\"\n" + body
	}
	naca := func(code string) string {
		return base + "[[obstacle]]\nname = \"v\"\nshape = \"naca4\"\ncode = " + code +
			"\nchord = 0.3\nleading_edge = [1, 0.5]\n"
	}
	tests := []struct {
		name string
		src  string
		want string
	}{
		// TOML syntax and document structure, reported by go-toml.
		{"syntax/unclosed header", base + "[solver\n", "t.toml:11:8: expected ']' to close table name"},
		{"syntax/newline in string", edit(t, `name = "t"`, `name = "t`), "t.toml:1:10: basic strings cannot have new lines"},
		{"syntax/column in characters", base + "title = \"été\" x\n", "t.toml:11:15: expected newline but got U+0078 'x'"},
		{"syntax/key twice", edit(t, "density = 1000\n", "density = 1000\ndensity = 2\n"),
			"t.toml:4:1: fluid.density: key density is already defined"},
		{"syntax/table twice", base + "[fluid]\n", "t.toml:11:2: fluid: table fluid already exists"},
		{"syntax/key twice in array table", base + circle + circle + "name = \"q\"\n",
			"t.toml:21:1: obstacle[1].name: key name is already defined"},
		{"syntax/table after array table", base + circle + "[obstacle]\n",
			"t.toml:16:2: obstacle: table obstacle already exists as an array of tables"},
		{"syntax/float out of range", edit(t, "density = 1000", "density = 1e400"),
			`t.toml:3:11: fluid.density: unable to parse float: strconv.ParseFloat: parsing "1e400": value out of range`},

		// Unknown keys.
		{"unknown/root key", "colour = 1\n" + base, "t.toml:1:1: colour: unknown key (allowed: " + allRoot + ")"},
		{"unknown/root table", base + "[fluids]\nx = 1\n", "t.toml:11:1: fluids: unknown key (allowed: " + allRoot + ")"},
		{"unknown/misspelt key", edit(t, "density = 1000", "densty = 1000"),
			"t.toml:3:1: fluid.densty: unknown key (allowed: density, vapour_pressure, sound_speed)"},
		{"unknown/dotted key", base + "fluid.x = 1\n", "t.toml:11:1: grid.fluid: unknown key (allowed: spacing, cells_across)"},
		{"unknown/quoted key", base + "\"odd key\" = 1\n", `t.toml:11:1: grid."odd key": unknown key (allowed: spacing, cells_across)`},
		{"unknown/first in file order", base + "zz = 1\naa = 2\n", "t.toml:11:1: grid.zz: unknown key (allowed: spacing, cells_across)"},
		{"unknown/inline, column in characters",
			"obstacle = [{ name = \"v\", shape = \"polygon\", points_file = \"flügel.csv\", bogus = 1 }]\n" + base,
			`t.toml:1:74: obstacle[0].bogus: unknown key (keys for shape "polygon": name, shape, circulation, points, points_file, kutta, trailing_edge)`},

		// Types.
		{"type/string for number", edit(t, "density = 1000", `density = "1000"`), `t.toml:3:11: fluid.density: must be a number, got string "1000"`},
		{"type/date for number", edit(t, "density = 1000", "density = 1979-05-27"), "t.toml:3:11: fluid.density: must be a number, got date 1979-05-27"},
		{"type/time for number", edit(t, "density = 1000", "density = 07:32:00"), "t.toml:3:11: fluid.density: must be a number, got time 07:32:00"},
		{"type/date-time for number", edit(t, "density = 1000", "density = 1979-05-27T07:32:00Z"),
			"t.toml:3:11: fluid.density: must be a number, got date-time 1979-05-27T07:32:00Z"},
		{"type/local date-time for number", edit(t, "density = 1000", "density = 1979-05-27T07:32:00"),
			"t.toml:3:11: fluid.density: must be a number, got date-time 1979-05-27T07:32:00"},
		{"type/array for number", edit(t, "density = 1000", "density = [1000]"), "t.toml:3:11: fluid.density: must be a number, got array"},
		{"type/table for number", edit(t, "density = 1000", "density = { value = 1000 }"), "t.toml:3:11: fluid.density: must be a number, got table"},
		{"type/long string shortened", edit(t, "density = 1000", `density = "`+strings.Repeat("ab", 30)+`"`),
			`t.toml:3:11: fluid.density: must be a number, got string "` + strings.Repeat("ab", 20) + `"...`},
		{"type/number for table", edit(t, "[fluid]\ndensity = 1000\n", "fluid = 5\n"), "t.toml:2:9: fluid: must be a table, got integer 5"},
		{"type/number for string", edit(t, `name = "t"`, `name = "t"`+"\ntitle = 5"), "t.toml:2:9: title: must be a string, got integer 5"},
		{"type/bool", base + "[output]\nfield_csv = 1\n", "t.toml:12:13: output.field_csv: must be true or false, got integer 1"},

		// Missing required keys.
		{"missing/name", edit(t, `name = "t"`, `title = "x"`), "t.toml: name: missing required key"},
		{"missing/density", edit(t, "density = 1000", "sound_speed = 340"), "t.toml:2:1: fluid.density: missing required key"},
		{"missing/fluid section", edit(t, "[fluid]\ndensity = 1000\n", ""), "t.toml: fluid.density: missing required key"},
		{"missing/speed", edit(t, "speed = 1", "pressure = 0"), "t.toml:4:1: inflow.speed: missing required key"},
		{"missing/length", edit(t, "length = 4\n", ""), "t.toml:6:1: channel.length: missing required key"},
		{"missing/height and profiles", edit(t, "height = 1\n", ""),
			"t.toml:6:1: channel.height: missing required key (or give wall profiles lower and upper)"},
		{"missing/upper", edit(t, "height = 1", "lower = [[0, 0], [4, 0]]"),
			"t.toml:6:1: channel.upper: missing required key: lower and upper must be given together"},
		{"missing/lower", edit(t, "height = 1", "upper = [[0, 1], [4, 1]]"),
			"t.toml:6:1: channel.lower: missing required key: lower and upper must be given together"},
		{"missing/spacing", edit(t, "spacing = 0.01\n", ""), "t.toml:9:1: grid.spacing: missing required key (or give cells_across)"},

		// Names.
		{"name/space", edit(t, `name = "t"`, `name = "a b"`), `t.toml:1:8: name: must use only letters, digits, '-' and '_', got "a b"`},
		{"name/empty", edit(t, `name = "t"`, `name = ""`), "t.toml:1:8: name: must not be empty; use letters, digits, '-' and '_'"},
		{"name/slash", edit(t, `name = "t"`, `name = "../t"`), `t.toml:1:8: name: must use only letters, digits, '-' and '_', got "../t"`},
		{"name/too long", edit(t, `name = "t"`, `name = "`+strings.Repeat("a", 129)+`"`), "t.toml:1:8: name: must be at most 128 characters, got 129"},

		// Non-finite numbers.
		{"finite/nan", edit(t, "density = 1000", "density = nan"), "t.toml:3:11: fluid.density: must be a finite number, got nan"},
		{"finite/-inf", edit(t, "speed = 1", "speed = 1\npressure = -inf"), "t.toml:6:12: inflow.pressure: must be a finite number, got -inf"},
		{"finite/+inf", edit(t, "length = 4", "length = +inf"), "t.toml:7:10: channel.length: must be a finite number, got inf"},

		// Ranges of scalars.
		{"range/density 0", edit(t, "density = 1000", "density = 0"), "t.toml:3:11: fluid.density: must be > 0, got 0"},
		{"range/density negative", edit(t, "density = 1000", "density = -0.1"), "t.toml:3:11: fluid.density: must be > 0, got -0.1"},
		{"range/vapour pressure", edit(t, "density = 1000", "density = 1000\nvapour_pressure = -1"),
			"t.toml:4:19: fluid.vapour_pressure: must be >= 0, got -1"},
		{"range/sound speed", edit(t, "density = 1000", "density = 1000\nsound_speed = 0"), "t.toml:4:15: fluid.sound_speed: must be > 0, got 0"},
		{"range/speed", edit(t, "speed = 1", "speed = -1"), "t.toml:5:9: inflow.speed: must be > 0, got -1"},
		{"range/length", edit(t, "length = 4", "length = 0"), "t.toml:7:10: channel.length: must be > 0, got 0"},
		{"range/height", edit(t, "height = 1", "height = -1"), "t.toml:8:10: channel.height: must be > 0, got -1"},
		{"range/spacing", edit(t, "spacing = 0.01", "spacing = 0"), "t.toml:10:11: grid.spacing: must be > 0, got 0"},
		{"range/cells_across", edit(t, "spacing = 0.01", "cells_across = 1"), "t.toml:10:16: grid.cells_across: must be >= 2, got 1"},
		{"range/cells_across fraction", edit(t, "spacing = 0.01", "cells_across = 10.5"), "t.toml:10:16: grid.cells_across: must be a whole number, got 10.5"},
		{"range/cells_across string", edit(t, "spacing = 0.01", `cells_across = "10"`), `t.toml:10:16: grid.cells_across: must be an integer, got string "10"`},
		{"range/cells_across huge", edit(t, "spacing = 0.01", "cells_across = 1e300"), "t.toml:10:16: grid.cells_across: is too large, got 1e+300"},
		{"range/cells_across nan", edit(t, "spacing = 0.01", "cells_across = nan"), "t.toml:10:16: grid.cells_across: must be a finite whole number, got nan"},
		{"range/tolerance high", base + "[solver]\ntolerance = 0.5\n", "t.toml:12:13: solver.tolerance: must be in (0, 0.1), got 0.5"},
		{"range/tolerance 0", base + "[solver]\ntolerance = 0\n", "t.toml:12:13: solver.tolerance: must be in (0, 0.1), got 0"},
		{"range/max_iterations", base + "[solver]\nmax_iterations = 0\n", "t.toml:12:18: solver.max_iterations: must be >= 1, got 0"},
		{"range/image_width low", base + "[output]\nimage_width = 100\n", "t.toml:12:15: output.image_width: must be in [200, 8000], got 100"},
		{"range/image_width high", base + "[output]\nimage_width = 9000\n", "t.toml:12:15: output.image_width: must be in [200, 8000], got 9000"},

		// Exactly one of two.
		{"one of/spacing and cells", base + "cells_across = 10\n",
			"t.toml:11:1: grid.cells_across: cannot be given together with grid.spacing; give exactly one"},
		{"one of/height and lower", edit(t, "height = 1", "height = 1\nlower = [[0, 0], [4, 0]]"),
			"t.toml:9:1: channel.lower: cannot be given together with height; give height for straight walls, or lower and upper"},
		{"one of/height and upper", edit(t, "height = 1", "upper = [[0, 1], [4, 1]]\nheight = 1"),
			"t.toml:8:1: channel.upper: cannot be given together with height; give height for straight walls, or lower and upper"},

		// Choices.
		{"choice/profile", edit(t, "height = 1", "height = 1\nprofile = \"curvy\""),
			`t.toml:9:11: channel.profile: must be one of "straight", "smooth", got "curvy"`},
		{"choice/method", base + "[solver]\nmethod = \"gmres\"\n", `t.toml:12:10: solver.method: must be one of "auto", "mgcg", "cg", "sor", got "gmres"`},
		{"choice/image", base + "[output]\nimages = [\"speed\", \"velocity\"]\n",
			`t.toml:12:20: output.images[1]: must be one of ` + images + `, got "velocity"`},
		{"choice/image twice", base + "[output]\nimages = [\"speed\", \"speed\"]\n", `t.toml:12:20: output.images[1]: "speed" is listed twice`},
		{"choice/image not string", base + "[output]\nimages = [1]\n", "t.toml:12:11: output.images[0]: must be an image name (a string), got integer 1"},
		{"choice/images not array", base + "[output]\nimages = \"speed\"\n", `t.toml:12:10: output.images: must be an array of image names, got string "speed"`},

		// Wall profiles.
		{"wall/not array", walls(t, "5", "[[0, 1], [4, 1]]"), "t.toml:8:9: channel.lower: must be an array of points [[x, y], ...], got integer 5"},
		{"wall/one point", walls(t, "[[0, 0]]", "[[0, 1], [4, 1]]"), "t.toml:8:9: channel.lower: must have at least 2 points [x, y], got 1"},
		{"wall/three numbers", walls(t, "[[0, 0, 1], [4, 0]]", "[[0, 1], [4, 1]]"),
			"t.toml:8:10: channel.lower[0]: must be a point [x, y] (2 numbers), got 3 elements"},
		{"wall/number for point", walls(t, "[0, 4]", "[[0, 1], [4, 1]]"),
			"t.toml:8:10: channel.lower[0]: must be a point [x, y] (2 numbers), got integer 0"},
		{"wall/string coordinate", walls(t, `[[0, "a"], [4, 0]]`, "[[0, 1], [4, 1]]"),
			`t.toml:8:14: channel.lower[0][1]: must be a number, got string "a"`},
		{"wall/first x", walls(t, "[[0, 0], [4, 0]]", "[[0.1, 1], [4, 1]]"),
			"t.toml:9:10: channel.upper[0]: first point must be at the inlet, x = 0, got x = 0.1"},
		{"wall/last x", walls(t, "[[0, 0], [4, 0]]", "[[0, 1], [3.9, 1]]"),
			"t.toml:9:18: channel.upper[1]: last point must be at the outlet, x = channel.length = 4, got x = 3.9"},
		{"wall/decreasing x", walls(t, "[[0, 0], [4, 0]]", "[[0, 1], [2, 1], [1.5, 0.8], [4, 0.8]]"),
			"t.toml:9:26: channel.upper[2]: x must not decrease along the wall, got x = 1.5 after x = 2"},
		{"wall/three at one x", walls(t, "[[0, 0], [4, 0]]", "[[0, 1], [2, 1], [2, 0.8], [2, 0.6], [4, 0.6]]"),
			"t.toml:9:36: channel.upper[3]: at most two consecutive points may share an x (one vertical step), got three at x = 2"},
		{"wall/repeated point", walls(t, "[[0, 0], [4, 0]]", "[[0, 1], [2, 1], [2, 1], [4, 1]]"),
			"t.toml:9:26: channel.upper[2]: repeats the previous point [2, 1]"},
		{"wall/step at inlet", walls(t, "[[0, 0], [0, 0.1], [4, 0.1]]", "[[0, 1], [4, 1]]"),
			"t.toml:8:18: channel.lower[1]: a vertical step cannot be at the inlet (x = 0)"},
		{"wall/step at outlet", walls(t, "[[0, 0], [4, 0], [4, 0.1]]", "[[0, 1], [4, 1]]"),
			"t.toml:8:26: channel.lower[2]: a vertical step cannot be at the outlet (x = channel.length)"},
		{"wall/comment before first element", walls(t, "[ # from the inlet\n[0, 0, 0], [4, 0]]", "[[0, 1], [4, 1]]"),
			"t.toml:9:1: channel.lower[0]: must be a point [x, y] (2 numbers), got 3 elements"},
		{"wall/multi-line element", walls(t, "[\n  [0, 0],\n  [4, 0, 0],\n]", "[[0, 1], [4, 1]]"),
			"t.toml:10:3: channel.lower[1]: must be a point [x, y] (2 numbers), got 3 elements"},

		// Obstacles.
		{"obstacle/not array", "obstacle = 5\n" + base, "t.toml:1:12: obstacle: must be an array of tables ([[obstacle]] sections), got integer 5"},
		{"obstacle/single table", base + "[obstacle]\nname = \"p\"\n", "t.toml:11:1: obstacle: must be an array of tables ([[obstacle]] sections), got table"},
		{"obstacle/element not table", "obstacle = [1]\n" + base, "t.toml:1:13: obstacle[0]: must be a table, got integer 1"},
		{"obstacle/missing name", base + "[[obstacle]]\nshape = \"circle\"\n", "t.toml:11:1: obstacle[0].name: missing required key"},
		{"obstacle/missing shape", base + "[[obstacle]]\nname = \"p\"\n", "t.toml:11:1: obstacle[0].shape: missing required key"},
		{"obstacle/unknown shape", base + "[[obstacle]]\nname = \"p\"\nshape = \"square\"\n",
			`t.toml:13:9: obstacle[0].shape: must be one of ` + shapes + `, got "square"`},
		{"obstacle/unknown key, no shape", base + "[[obstacle]]\nname = \"p\"\nradiu = 1\n",
			"t.toml:13:1: obstacle[0].radiu: unknown key (allowed: " + allObstacle + ")"},
		{"obstacle/unknown key", strings.Replace(base+circle, "radius", "radiu", 1),
			`t.toml:15:1: obstacle[0].radiu: unknown key (keys for shape "circle": ` + circleKeys + ")"},
		{"obstacle/key of another shape", base + "[[obstacle]]\nname = \"p\"\nshape = \"rectangle\"\ncenter = [1, 0.5]\nsize = [0.1, 0.1]\nradius = 0.1\n",
			`t.toml:16:1: obstacle[0].radius: does not apply to shape "rectangle" (its keys: ` + rectKeys + ")"},
		{"obstacle/kutta on circle", base + circle + "kutta = true\n",
			`t.toml:16:1: obstacle[0].kutta: does not apply to shape "circle" (its keys: ` + circleKeys + ")"},
		{"obstacle/name reserved", strings.Replace(base+circle, `"p"`, `"lower"`, 1),
			`t.toml:12:8: obstacle[0].name: "lower" is reserved for the channel wall; choose another name`},
		{"obstacle/name invalid", strings.Replace(base+circle, `"p"`, `"p.1"`, 1),
			`t.toml:12:8: obstacle[0].name: must use only letters, digits, '-' and '_', got "p.1"`},
		{"obstacle/duplicate name", base + circle + strings.Replace(circle, "[1, 0.5]", "[2, 0.5]", 1),
			`t.toml:17:8: obstacle[1].name: duplicate name "p", already used by obstacle[0]`},
		{"obstacle/missing radius", strings.Replace(base+circle, "radius = 0.1\n", "", 1), "t.toml:11:1: obstacle[0].radius: missing required key"},
		{"obstacle/radius", strings.Replace(base+circle, "radius = 0.1", "radius = -0.1", 1), "t.toml:15:10: obstacle[0].radius: must be > 0, got -0.1"},
		{"obstacle/center length", strings.Replace(base+circle, "[1, 0.5]", "[1]", 1),
			"t.toml:14:10: obstacle[0].center: must be [x, y] (2 numbers), got 1 element"},
		{"obstacle/center nan", strings.Replace(base+circle, "[1, 0.5]", "[nan, 0.5]", 1),
			"t.toml:14:11: obstacle[0].center[0]: must be a finite number, got nan"},
		{"obstacle/circulation type", base + circle + "circulation = \"cw\"\n",
			`t.toml:16:15: obstacle[0].circulation: must be a number, got string "cw"`},
		{"ellipse/semi axis", base + "[[obstacle]]\nname = \"e\"\nshape = \"ellipse\"\ncenter = [1, 0.5]\nsemi_axes = [0.1, 0]\n",
			"t.toml:15:19: obstacle[0].semi_axes[1]: must be > 0, got 0"},
		{"ellipse/angle", base + "[[obstacle]]\nname = \"e\"\nshape = \"ellipse\"\ncenter = [1, 0.5]\nsemi_axes = [0.1, 0.05]\nangle = inf\n",
			"t.toml:16:9: obstacle[0].angle: must be a finite number, got inf"},
		{"rectangle/size", base + "[[obstacle]]\nname = \"r\"\nshape = \"rectangle\"\ncenter = [1, 0.5]\nsize = [0.1]\n",
			"t.toml:15:8: obstacle[0].size: must be [w, h] (2 numbers), got 1 element"},
		{"rectangle/corner too big", base + "[[obstacle]]\nname = \"r\"\nshape = \"rectangle\"\ncenter = [1, 0.5]\nsize = [0.2, 0.1]\ncorner_radius = 0.06\n",
			"t.toml:16:17: obstacle[0].corner_radius: must be in [0, min(w, h)/2] = [0, 0.05], got 0.06"},
		{"rectangle/corner negative", base + "[[obstacle]]\nname = \"r\"\nshape = \"rectangle\"\ncenter = [1, 0.5]\nsize = [0.2, 0.1]\ncorner_radius = -0.01\n",
			"t.toml:16:17: obstacle[0].corner_radius: must be in [0, min(w, h)/2] = [0, 0.05], got -0.01"},
		{"naca/three digits", naca(`"241"`), `t.toml:14:8: obstacle[0].code: must be 4 digits "MPTT" (camber, its position, thickness), got "241"`},
		{"naca/letter", naca(`"24a2"`), `t.toml:14:8: obstacle[0].code: must be 4 digits "MPTT" (camber, its position, thickness), got "24a2"`},
		{"naca/integer", naca("2412"), "t.toml:14:8: obstacle[0].code: must be a string, got integer 2412"},
		{"naca/camber without position", naca(`"2012"`),
			`t.toml:14:8: obstacle[0].code: camber digit M and its position digit P must be both zero or both non-zero, got "2012"`},
		{"naca/position without camber", naca(`"0412"`),
			`t.toml:14:8: obstacle[0].code: camber digit M and its position digit P must be both zero or both non-zero, got "0412"`},
		{"naca/zero thickness", naca(`"0000"`), `t.toml:14:8: obstacle[0].code: thickness digits TT must be between 01 and 40, got "0000"`},
		{"naca/too thick", naca(`"2441"`), `t.toml:14:8: obstacle[0].code: thickness digits TT must be between 01 and 40, got "2441"`},
		{"naca/chord", strings.Replace(naca(`"0012"`), "chord = 0.3", "chord = 0", 1), "t.toml:15:9: obstacle[0].chord: must be > 0, got 0"},
		{"naca/missing leading edge", strings.Replace(naca(`"0012"`), "leading_edge = [1, 0.5]\n", "", 1),
			"t.toml:11:1: obstacle[0].leading_edge: missing required key"},
		{"polygon/neither", polygon(""), "t.toml:11:1: obstacle[0].points: missing required key (or give points_file)"},
		{"polygon/both", polygon("points_file = \"v.csv\"\npoints = [[1, 0.4], [1.2, 0.4], [1.1, 0.5]]\n"),
			"t.toml:15:1: obstacle[0].points: cannot be given together with points_file; give exactly one"},
		{"polygon/two points", polygon("points = [[1, 0.4], [1.2, 0.4]]\n"), "t.toml:14:10: obstacle[0].points: must have at least 3 points, got 2"},
		{"polygon/bad point", polygon("points = [[1, 0.4], [1.2, 0.4], 7]\n"),
			"t.toml:14:33: obstacle[0].points[2]: must be a point [x, y] (2 numbers), got integer 7"},
		{"polygon/empty file name", polygon("points_file = \"\"\n"), "t.toml:14:15: obstacle[0].points_file: must not be empty"},
		{"polygon/missing file", polygon("points_file = \"no-such.csv\"\n"),
			`t.toml:14:15: obstacle[0].points_file: cannot read points file "no-such.csv": no such file or directory`},
		{"polygon/directory", polygon("points_file = \".\"\n"),
			`t.toml:14:15: obstacle[0].points_file: cannot read points file ".": not a regular file`},
		{"kutta/with circulation", polygon("points = [[1, 0.4], [1.2, 0.4], [1.1, 0.5]]\nkutta = true\ncirculation = 0.1\n"),
			"t.toml:16:1: obstacle[0].circulation: cannot be given together with kutta = true: the Kutta condition sets the circulation"},
		{"kutta/trailing edge without", polygon("points = [[1, 0.4], [1.2, 0.4], [1.1, 0.5]]\ntrailing_edge = [1.2, 0.4]\n"),
			"t.toml:15:1: obstacle[0].trailing_edge: needs kutta = true: it is where the Kutta condition is applied"},
		{"kutta/trailing edge with false", polygon("points = [[1, 0.4], [1.2, 0.4], [1.1, 0.5]]\nkutta = false\ntrailing_edge = [1.2, 0.4]\n"),
			"t.toml:16:1: obstacle[0].trailing_edge: needs kutta = true: it is where the Kutta condition is applied"},
		{"kutta/type", polygon("points = [[1, 0.4], [1.2, 0.4], [1.1, 0.5]]\nkutta = \"yes\"\n"),
			`t.toml:15:9: obstacle[0].kutta: must be true or false, got string "yes"`},
		{"kutta/trailing edge type", polygon("points = [[1, 0.4], [1.2, 0.4], [1.1, 0.5]]\nkutta = true\ntrailing_edge = 1.2\n"),
			"t.toml:16:17: obstacle[0].trailing_edge: must be [x, y] (2 numbers), got float 1.2"},

		// Probes.
		{"probe/missing at", base + "[[probe]]\nname = \"a\"\n", "t.toml:11:1: probe[0].at: missing required key"},
		{"probe/missing name", base + "[[probe]]\nat = [1, 0.5]\n", "t.toml:11:1: probe[0].name: missing required key"},
		{"probe/unknown key", base + "[[probe]]\nname = \"a\"\nat = [1, 0.5]\nheight = 2\n",
			"t.toml:14:1: probe[0].height: unknown key (allowed: name, at)"},
		{"probe/duplicate name", base + "[[probe]]\nname = \"a\"\nat = [1, 0.5]\n[[probe]]\nname = \"a\"\nat = [2, 0.5]\n",
			`t.toml:15:8: probe[1].name: duplicate name "a", already used by probe[0]`},
		{"probe/at string", base + "[[probe]]\nname = \"a\"\nat = \"inlet\"\n", `t.toml:13:6: probe[0].at: must be [x, y] (2 numbers), got string "inlet"`},
		{"probe/inline", "probe = [{ name = \"a\", at = [1, 0.5] }, { name = \"b\", at = [1, inf] }]\n" + base,
			"t.toml:1:64: probe[1].at[1]: must be a finite number, got inf"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s, err := Parse("t.toml", []byte(tt.src))
			if err == nil {
				t.Fatalf("Parse: got no error, want %q", tt.want)
			}
			var e *Error
			if !errors.As(err, &e) {
				t.Fatalf("Parse: got error of type %T, want *Error", err)
			}
			if s != nil {
				t.Errorf("Parse: got a scenario with the error, want nil")
			}
			if got := err.Error(); got != tt.want {
				t.Errorf("Parse error:\ngot  %s\nwant %s", got, tt.want)
			}
		})
	}
}

// TestParseMinimal checks the defaults on a scenario that gives only the
// required keys.
func TestParseMinimal(t *testing.T) {
	s, err := Load(filepath.Join("testdata", "minimal.toml"))
	if err != nil {
		t.Fatal(err)
	}
	want := &Scenario{
		Path:    filepath.Join("testdata", "minimal.toml"),
		Dir:     "testdata",
		Name:    "empty-flume",
		Fluid:   Fluid{Density: 998.2, SoundSpeed: 343},
		Inflow:  Inflow{Speed: 0.8},
		Channel: Channel{Length: 6, Height: 1, Lower: [][2]float64{{0, 0}, {6, 0}}, Upper: [][2]float64{{0, 1}, {6, 1}}, Profile: "straight"},
		Grid:    Grid{CellsAcross: 100},
		Solver:  Solver{Method: "auto", Tolerance: 1e-10, MaxIterations: 20000},
		Output:  Output{Images: []string{"streamlines", "speed", "pressure", "flownet", "walls", "surfaces"}, ImageWidth: 1600},
	}
	compare(t, s, want)
}

// TestParseExamples checks every value of the example scenarios.
func TestParseExamples(t *testing.T) {
	tests := []struct {
		file string
		want Scenario
	}{
		{"pier.toml", Scenario{
			Name:    "pier-in-flume",
			Title:   "Round pier in a 1 m flume",
			Fluid:   Fluid{Density: 998.2, VapourPressure: 2339, HasVapourPressure: true, SoundSpeed: 1480},
			Inflow:  Inflow{Speed: 0.8, Pressure: 5000},
			Channel: Channel{Length: 6, Height: 1, Lower: [][2]float64{{0, 0}, {6, 0}}, Upper: [][2]float64{{0, 1}, {6, 1}}, Profile: "straight"},
			Grid:    Grid{Spacing: 0.005},
			Solver:  Solver{Method: "mgcg", Tolerance: 1e-8, MaxIterations: 500},
			Obstacles: []Obstacle{
				{Name: "pier", Shape: "circle", Center: [2]float64{2, 0.5}, Radius: 0.1, Circulation: -0.05},
			},
			Probes: []Probe{{Name: "tap-1", At: [2]float64{0.5, 0.95}}, {Name: "tap-2", At: [2]float64{3.5, 0.95}}},
			Output: Output{Images: []string{"streamlines", "pressure"}, ImageWidth: 1200, FieldCSV: true},
		}},
		{"contraction.toml", Scenario{
			Name:   "tunnel-contraction",
			Title:  "Sudden contraction with a turning vane",
			Fluid:  Fluid{Density: 1.204, SoundSpeed: 343},
			Inflow: Inflow{Speed: 12},
			Channel: Channel{Length: 6,
				Lower:   [][2]float64{{0, 0}, {6, 0}},
				Upper:   [][2]float64{{0, 1}, {2, 1}, {2, 0.6}, {6, 0.6}},
				Profile: "smooth"},
			Grid:   Grid{Spacing: 0.01},
			Solver: Solver{Method: "auto", Tolerance: 1e-10, MaxIterations: 20000},
			Obstacles: []Obstacle{
				{Name: "vane", Shape: "naca4", Code: "2412", Chord: 0.3, LeadingEdge: [2]float64{3, 0.3}, Angle: 4, Kutta: true},
				{Name: "strut", Shape: "rectangle", Center: [2]float64{4.5, 0.3}, Size: [2]float64{0.2, 0.05}, Angle: 10, CornerRadius: 0.01},
			},
			Probes: []Probe{{Name: "throat", At: [2]float64{3, 0.5}}},
			Output: Output{Images: []string{"streamlines", "speed", "pressure", "flownet", "walls", "surfaces"}, ImageWidth: 1600},
		}},
		{"vanes.toml", Scenario{
			Name:    "duct_vanes",
			Fluid:   Fluid{Density: 1.2, SoundSpeed: 343},
			Inflow:  Inflow{Speed: 5},
			Channel: Channel{Length: 4, Height: 0.8, Lower: [][2]float64{{0, 0}, {4, 0}}, Upper: [][2]float64{{0, 0.8}, {4, 0.8}}, Profile: "straight"},
			Grid:    Grid{Spacing: 0.004},
			Solver:  Solver{Method: "auto", Tolerance: 1e-10, MaxIterations: 20000},
			Obstacles: []Obstacle{
				{Name: "vane-a", Shape: "polygon", PointsFile: "vane.csv",
					Points: [][2]float64{{1, 0.4}, {1.15, 0.41}, {1.3, 0.4}, {1.15, 0.43}},
					Kutta:  true, TrailingEdge: [2]float64{1.3, 0.4}, HasTrailingEdge: true},
				{Name: "vane-b", Shape: "polygon", Points: [][2]float64{{2, 0.3}, {2.3, 0.32}, {2, 0.34}}, Circulation: 0.2},
				{Name: "pod", Shape: "ellipse", Center: [2]float64{3, 0.55}, SemiAxes: [2]float64{0.15, 0.05}, Angle: -5},
			},
			Output: Output{Images: []string{"streamlines", "speed", "pressure", "flownet", "walls", "surfaces"}, ImageWidth: 1600},
		}},
		{"quoted.toml", Scenario{
			Name:    "inline-forms",
			Fluid:   Fluid{Density: 1000, SoundSpeed: 343},
			Inflow:  Inflow{Speed: 1.5},
			Channel: Channel{Length: 3, Height: 0.5, Lower: [][2]float64{{0, 0}, {3, 0}}, Upper: [][2]float64{{0, 0.5}, {3, 0.5}}, Profile: "straight"},
			Grid:    Grid{Spacing: 0.01},
			Solver:  Solver{Method: "auto", Tolerance: 1e-10, MaxIterations: 20000},
			Obstacles: []Obstacle{
				{Name: "a", Shape: "circle", Center: [2]float64{1, 0.25}, Radius: 0.05},
				{Name: "b", Shape: "circle", Center: [2]float64{2, 0.25}, Radius: 0.05},
			},
			Output: Output{Images: []string{"streamlines", "speed", "pressure", "flownet", "walls", "surfaces"}, ImageWidth: 1600},
		}},
	}
	for _, tt := range tests {
		t.Run(tt.file, func(t *testing.T) {
			path := filepath.Join("testdata", tt.file)
			s, err := Load(path)
			if err != nil {
				t.Fatal(err)
			}
			want := tt.want
			want.Path, want.Dir = path, "testdata"
			compare(t, s, &want)
		})
	}
}

// TestParseValues checks values that are accepted in more than one form.
func TestParseValues(t *testing.T) {
	tests := []struct {
		name  string
		src   string
		check func(s *Scenario) (got, want any)
	}{
		{"whole float for integer", edit(t, "spacing = 0.01", "cells_across = 2e2"),
			func(s *Scenario) (any, any) { return s.Grid, Grid{CellsAcross: 200} }},
		{"integer for float", edit(t, "density = 1000", "density = 1_000"),
			func(s *Scenario) (any, any) { return s.Fluid.Density, 1000.0 }},
		// Ends within endTolerance·length of 0 and length are moved onto them.
		{"wall ends snapped", walls(t, "[[-1e-12, 0], [4.000000000001, 0]]", "[[1e-12, 1], [2, 1], [2, 0.5], [3.999999999999, 0.5]]"),
			func(s *Scenario) (any, any) {
				return [][][2]float64{s.Channel.Lower, s.Channel.Upper},
					[][][2]float64{{{0, 0}, {4, 0}}, {{0, 1}, {2, 1}, {2, 0.5}, {4, 0.5}}}
			}},
		{"profiles clear height", walls(t, "[[0, 0], [4, 0]]", "[[0, 1], [4, 1]]"),
			func(s *Scenario) (any, any) { return s.Channel.Height, 0.0 }},
		{"no images", base + "[output]\nimages = []\n",
			func(s *Scenario) (any, any) { return s.Output.Images, []string{} }},
		{"no obstacles", "obstacle = []\n" + base,
			func(s *Scenario) (any, any) { return len(s.Obstacles), 0 }},
		{"kutta false with circulation", base + "[[obstacle]]\nname = \"v\"\nshape = \"naca4\"\ncode = \"0012\"\nchord = 0.3\nleading_edge = [1, 0.5]\nkutta = false\ncirculation = 0.3\n",
			func(s *Scenario) (any, any) {
				o := s.Obstacles[0]
				return [2]any{o.Kutta, o.Circulation}, [2]any{false, 0.3}
			}},
		{"vapour pressure zero", edit(t, "density = 1000", "density = 1000\nvapour_pressure = 0"),
			func(s *Scenario) (any, any) {
				return s.Fluid, Fluid{Density: 1000, HasVapourPressure: true, SoundSpeed: DefaultSoundSpeed}
			}},
		{"profile with height", edit(t, "height = 1", "height = 1\nprofile = \"smooth\""),
			func(s *Scenario) (any, any) { return s.Channel.Profile, "smooth" }},
		{"CRLF line ends", strings.ReplaceAll(base, "\n", "\r\n"),
			func(s *Scenario) (any, any) { return s.Grid.Spacing, 0.01 }},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s, err := Parse("t.toml", []byte(tt.src))
			if err != nil {
				t.Fatal(err)
			}
			if got, want := tt.check(s); !reflect.DeepEqual(got, want) {
				t.Errorf("got %v, want %v", got, want)
			}
		})
	}
}

func TestParseBOM(t *testing.T) {
	const bom = "\ufeff"
	plain, err := Parse("t.toml", []byte(base))
	if err != nil {
		t.Fatal(err)
	}
	withBOM, err := Parse("t.toml", []byte(bom+base))
	if err != nil {
		t.Fatalf("with BOM: %v", err)
	}
	compare(t, withBOM, plain)
	if got := string(withBOM.Source); got != base {
		t.Errorf("Source: got %q, want the file without its BOM %q", got, base)
	}
	// Columns on the first line count from after the BOM.
	_, err = Parse("t.toml", []byte(bom+`name = "a b"`+base[len(`name = "t"`):]))
	want := `t.toml:1:8: name: must use only letters, digits, '-' and '_', got "a b"`
	if err == nil || err.Error() != want {
		t.Errorf("error after BOM: got %v, want %s", err, want)
	}
	// A BOM anywhere but at the start is not stripped.
	if _, err := Parse("t.toml", []byte(base+bom)); err == nil {
		t.Errorf("BOM at the end: got no error, want a syntax error")
	}
}

func TestLoadMissing(t *testing.T) {
	path := filepath.Join(t.TempDir(), "absent.toml")
	s, err := Load(path)
	if s != nil || err == nil {
		t.Fatalf("Load: got (%v, %v), want an error", s, err)
	}
	var e *Error
	if !errors.As(err, &e) {
		t.Fatalf("Load: got error of type %T, want *Error", err)
	}
	if !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("Load: errors.Is(err, fs.ErrNotExist) = false, want true (err %v)", err)
	}
	if got, want := err.Error(), path+": cannot read scenario file: no such file or directory"; got != want {
		t.Errorf("Load:\ngot  %s\nwant %s", got, want)
	}
}

func TestLoadDirectory(t *testing.T) {
	dir := t.TempDir()
	_, err := Load(dir)
	var e *Error
	if !errors.As(err, &e) || !strings.HasPrefix(err.Error(), dir+": cannot read scenario file: ") {
		t.Errorf("Load(directory): got %v, want *Error starting %q", err, dir+": cannot read scenario file: ")
	}
}

func TestErrorFormat(t *testing.T) {
	tests := []struct {
		e    Error
		want string
	}{
		{Error{File: "a.toml", Line: 12, Col: 10, Key: "obstacle[1].radius", Msg: "must be > 0, got -0.1"}, "a.toml:12:10: obstacle[1].radius: must be > 0, got -0.1"},
		{Error{File: "a.toml", Line: 12, Key: "k", Msg: "m"}, "a.toml:12: k: m"},
		{Error{File: "a.toml", Key: "k", Msg: "m"}, "a.toml: k: m"},
		{Error{File: "a.toml", Line: 3, Col: 1, Msg: "m"}, "a.toml:3:1: m"},
		{Error{File: "a.toml", Msg: "m"}, "a.toml: m"},
		{Error{Key: "k", Msg: "m"}, "k: m"},
		{Error{Msg: "m"}, "m"},
	}
	for _, tt := range tests {
		t.Run(tt.want, func(t *testing.T) {
			if got := tt.e.Error(); got != tt.want {
				t.Errorf("got %q, want %q", got, tt.want)
			}
		})
	}
}

func TestErrorf(t *testing.T) {
	src := base + `[[obstacle]]
name = "p"
shape = "circle"
center = [1, 0.5]
radius = 0.1
[[obstacle]]
name = "q"
shape = "polygon"
points = [
  [2, 0.4],
  [2.2, 0.4],
  [2.1, 0.5],
]
[[probe]]
name = "tap"
at = [0.5, 0.9]
obstacle_x = 1
`
	// The last key is unknown; parse without it to get a scenario.
	s, err := Parse("t.toml", []byte(strings.TrimSuffix(src, "obstacle_x = 1\n")))
	if err != nil {
		t.Fatal(err)
	}
	cause := errors.New("cause")
	tests := []struct {
		key  string
		want string
	}{
		{"obstacle[0].radius", "t.toml:15:10: obstacle[0].radius: m"},
		{"obstacle[0].center[1]", "t.toml:14:14: obstacle[0].center[1]: m"},
		{"obstacle[0]", "t.toml:11:1: obstacle[0]: m"},
		{"obstacle[0].angle", "t.toml:11:1: obstacle[0].angle: m"}, // not given: falls back to the section
		{"obstacle[1].points", "t.toml:19:10: obstacle[1].points: m"},
		{"obstacle[1].points[2]", "t.toml:22:3: obstacle[1].points[2]: m"},
		{"obstacle[1].points[2][1]", "t.toml:22:9: obstacle[1].points[2][1]: m"},
		{"obstacle[1].points[7]", "t.toml:19:10: obstacle[1].points[7]: m"},
		{"obstacle[5].radius", "t.toml:11:1: obstacle[5].radius: m"}, // falls back to the first [[obstacle]]
		{"probe[0].at", "t.toml:26:6: probe[0].at: m"},
		{"channel.upper[1]", "t.toml:6:1: channel.upper[1]: m"}, // derived from height: at [channel]
		{"channel", "t.toml:6:1: channel: m"},
		{"grid", "t.toml:9:1: grid: m"},
		{"name", "t.toml:1:8: name: m"},
		{"nothing.here", "t.toml: nothing.here: m"},
		{"", "t.toml: m"},
	}
	for _, tt := range tests {
		t.Run(tt.key, func(t *testing.T) {
			e := s.Errorf(tt.key, "m")
			if got := e.Error(); got != tt.want {
				t.Errorf("got  %s\nwant %s", got, tt.want)
			}
		})
	}
	t.Run("wrapped cause", func(t *testing.T) {
		e := s.Errorf("grid.spacing", "too fine: %w", cause)
		if !errors.Is(e, cause) {
			t.Errorf("errors.Is(Errorf(..., %%w, cause), cause) = false, want true")
		}
		if got, want := e.Error(), "t.toml:10:11: grid.spacing: too fine: cause"; got != want {
			t.Errorf("got %s, want %s", got, want)
		}
	})
	t.Run("inline tables", func(t *testing.T) {
		s, err := Load(filepath.Join("testdata", "quoted.toml"))
		if err != nil {
			t.Fatal(err)
		}
		for _, c := range []struct{ key, want string }{
			{"obstacle[1].radius", ":10:66: "},
			{"obstacle[1]", ":10:3: "},
			{"inflow.speed", ":5:16: "},
			{"channel.height", ":6:34: "},
		} {
			if got := s.Errorf(c.key, "m").Error(); !strings.Contains(got, c.want) {
				t.Errorf("Errorf(%q): got %s, want position %s", c.key, got, c.want)
			}
		}
	})
}

func TestParentKey(t *testing.T) {
	tests := []struct{ in, want string }{
		{"obstacle[1].radius", "obstacle[1]"},
		{"obstacle[1]", "obstacle"},
		{"channel.lower[3][0]", "channel.lower[3]"},
		{"channel.lower", "channel"},
		{"name", ""},
		{`grid."a.b[1]"`, "grid"},
		{`grid."a\"b.c"`, "grid"},
		{"", ""},
	}
	for _, tt := range tests {
		if got := parentKey(tt.in); got != tt.want {
			t.Errorf("parentKey(%q): got %q, want %q", tt.in, got, tt.want)
		}
	}
}

func TestLists(t *testing.T) {
	m := Methods()
	m[0] = "changed"
	if Methods()[0] != "auto" {
		t.Errorf("Methods: a caller's change showed through, got %v", Methods())
	}
	if got, want := len(Images()), 6; got != want {
		t.Errorf("Images: got %d names, want %d", got, want)
	}
	if got, want := strings.Join(Shapes(), ","), "circle,ellipse,rectangle,polygon,naca4"; got != want {
		t.Errorf("Shapes: got %s, want %s", got, want)
	}
}

// compare checks s against want, ignoring the source text and positions.
func compare(t *testing.T, s, want *Scenario) {
	t.Helper()
	got := *s
	got.Source, got.pos = nil, nil
	w := *want
	w.Source, w.pos = nil, nil
	if !reflect.DeepEqual(got, w) {
		t.Errorf("scenario:\ngot  %+v\nwant %+v", got, w)
	}
}

// TestExamplesStayValid makes sure every example under testdata parses, so
// the fuzz seeds include valid documents.
func TestExamplesStayValid(t *testing.T) {
	files, err := filepath.Glob(filepath.Join("testdata", "*.toml"))
	if err != nil || len(files) == 0 {
		t.Fatalf("no example scenarios under testdata (%v)", err)
	}
	for _, f := range files {
		t.Run(filepath.Base(f), func(t *testing.T) {
			if _, err := Load(f); err != nil {
				t.Error(err)
			}
		})
	}
	if _, err := os.Stat(filepath.Join("testdata", "vane.csv")); err != nil {
		t.Error(err)
	}
}
