package scenario

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"time"
	"unicode/utf8"

	"github.com/pelletier/go-toml/v2"
)

// Defaults of the optional settings.
const (
	DefaultSoundSpeed    = 343.0 // m/s, air at 20 °C
	DefaultTolerance     = 1e-10 // relative residual
	DefaultMaxIterations = 20000
	DefaultImageWidth    = 1600 // pixels
)

// Limits of the values a scenario may give.
const (
	MinImageWidth = 200  // pixels
	MaxImageWidth = 8000 // pixels
	MaxTolerance  = 0.1  // a looser tolerance is no solve at all
	MinCells      = 2    // cells across the inlet
	maxNameLen    = 128  // characters in a name; names become file names
)

// endTolerance is the relative distance (times channel.length) within which the
// first and last points of a wall profile count as being at x = 0 and
// x = length: it absorbs rounding in generated or hand-converted coordinates,
// and the points are then moved exactly onto the inlet and outlet.
const endTolerance = 1e-9

var (
	methodNames  = []string{"auto", "mgcg", "cg", "sor"}
	imageNames   = []string{"streamlines", "speed", "pressure", "flownet", "walls", "surfaces"}
	shapeNames   = []string{"circle", "ellipse", "rectangle", "polygon", "naca4"}
	profileNames = []string{"straight", "smooth"}
)

// Methods returns the solver methods a scenario may name, "auto" first.
func Methods() []string { return slices.Clone(methodNames) }

// Images returns the image names output.images accepts, in the order of the
// default list.
func Images() []string { return slices.Clone(imageNames) }

// Shapes returns the obstacle shapes a scenario may name.
func Shapes() []string { return slices.Clone(shapeNames) }

// Scenario is a decoded and value-checked scenario file. Defaults are filled
// in; the geometry (obstacles inside the channel, walls that do not cross) is
// not checked yet.
type Scenario struct {
	Path   string // the path as given
	Dir    string // directory of Path; points_file is relative to it
	Source []byte // the file bytes as read, UTF-8 BOM stripped, for reports

	Name  string // letters, digits, '-' and '_'; names the outputs
	Title string // optional, shown in reports

	Fluid     Fluid
	Inflow    Inflow
	Channel   Channel
	Grid      Grid
	Solver    Solver
	Obstacles []Obstacle
	Probes    []Probe
	Output    Output

	pos *positions // key path -> position in Source
}

// Fluid is the fluid's properties.
type Fluid struct {
	Density           float64 // kg/m³, > 0
	VapourPressure    float64 // Pa, >= 0; meaningful when HasVapourPressure
	HasVapourPressure bool    // vapour_pressure was given: report the cavitation margin
	SoundSpeed        float64 // m/s, > 0, default DefaultSoundSpeed
}

// Inflow is the uniform stream at the inlet.
type Inflow struct {
	Speed    float64 // m/s, mean speed across the inlet, > 0; the reference speed
	Pressure float64 // Pa, static pressure at the inlet, default 0
}

// Channel is the flow passage: inlet at x = 0, outlet at x = Length, walls
// below and above.
type Channel struct {
	Length float64 // m, > 0
	Height float64 // m, > 0 when given; 0 when wall profiles are given

	// Lower and Upper are the wall profiles, always filled: from Height as
	// [[0, 0], [Length, 0]] and [[0, Height], [Length, Height]], or as given.
	// Their x values do not decrease, run from exactly 0 to exactly Length,
	// and repeat at most once (a vertical step), never at the ends.
	Lower, Upper [][2]float64

	Profile string // "straight" (piecewise linear, the default) or "smooth"
}

// Grid is the grid resolution. Exactly one of the two fields is non-zero.
type Grid struct {
	Spacing     float64 // m, > 0
	CellsAcross int     // cells across the inlet, >= MinCells
}

// Solver is the linear-solver settings.
type Solver struct {
	Method        string  // auto | mgcg | cg | sor, default "auto"
	Tolerance     float64 // relative residual in (0, MaxTolerance), default DefaultTolerance
	MaxIterations int     // >= 1, default DefaultMaxIterations
}

// Obstacle is one body in the channel. Which fields are meaningful depends on
// Shape; the others are zero.
type Obstacle struct {
	Name  string // unique, letters, digits, '-' and '_'
	Shape string // circle | ellipse | rectangle | polygon | naca4

	Center       [2]float64 // circle, ellipse, rectangle
	Radius       float64    // circle, > 0
	SemiAxes     [2]float64 // ellipse [a, b], both > 0, a along the angle
	Angle        float64    // degrees counter-clockwise: ellipse, rectangle, naca4 (nose-up positive)
	Size         [2]float64 // rectangle [w, h], both > 0
	CornerRadius float64    // rectangle, in [0, min(w, h)/2], default 0

	Points     [][2]float64 // polygon: as given inline, or as read from PointsFile
	PointsFile string       // polygon: the points_file as given (relative to Scenario.Dir)

	Code        string     // naca4: 4 digits "MPTT"
	Chord       float64    // naca4, > 0
	LeadingEdge [2]float64 // naca4

	Circulation     float64    // m²/s, counter-clockwise positive, default 0
	Kutta           bool       // polygon, naca4: the circulation is set by the Kutta condition
	TrailingEdge    [2]float64 // with Kutta: the edge to apply it at
	HasTrailingEdge bool       // TrailingEdge was given (else the sharpest corner is used)
}

// Probe is a named point where the flow is reported.
type Probe struct {
	Name string // unique, letters, digits, '-' and '_'
	At   [2]float64
}

// Output is what a run writes besides the summary and surface tables.
type Output struct {
	Images     []string // names from Images(); default all of them; empty for none
	ImageWidth int      // pixels, in [MinImageWidth, MaxImageWidth], default DefaultImageWidth
	FieldCSV   bool     // also write the whole field as CSV
}

// Keys each table accepts.
var (
	rootKeys     = []string{"name", "title", "fluid", "inflow", "channel", "grid", "solver", "obstacle", "probe", "output"}
	fluidKeys    = []string{"density", "vapour_pressure", "sound_speed"}
	inflowKeys   = []string{"speed", "pressure"}
	channelKeys  = []string{"length", "height", "lower", "upper", "profile"}
	gridKeys     = []string{"spacing", "cells_across"}
	solverKeys   = []string{"method", "tolerance", "max_iterations"}
	probeKeys    = []string{"name", "at"}
	outputKeys   = []string{"images", "image_width", "field_csv"}
	obstacleKeys = []string{"name", "shape", "circulation"} // common to every shape

	// shapeKeys lists the keys each shape accepts besides obstacleKeys.
	shapeKeys = map[string][]string{
		"circle":    {"center", "radius"},
		"ellipse":   {"center", "semi_axes", "angle"},
		"rectangle": {"center", "size", "angle", "corner_radius"},
		"polygon":   {"points", "points_file", "kutta", "trailing_edge"},
		"naca4":     {"code", "chord", "leading_edge", "angle", "kutta", "trailing_edge"},
	}
)

// allObstacleKeys is the union of the keys of every shape, in a fixed order.
var allObstacleKeys = func() []string {
	keys := slices.Clone(obstacleKeys)
	for _, shape := range shapeNames {
		for _, k := range shapeKeys[shape] {
			if !slices.Contains(keys, k) {
				keys = append(keys, k)
			}
		}
	}
	return keys
}()

// Load reads and parses the scenario file at path. A missing or unreadable
// file is reported as an *Error too.
func Load(path string) (*Scenario, error) {
	data, err := readFile(path, false)
	if err != nil {
		return nil, &Error{File: path, Msg: "cannot read scenario file: " + causeText(err), Err: err}
	}
	return Parse(path, data)
}

// Parse decodes the scenario in data, read from path, checks its values and
// fills in the defaults. Polygon points files are read relative to the
// directory of path. Every error is an *Error; the first one found is
// returned.
func Parse(path string, data []byte) (*Scenario, error) {
	src := bytes.Clone(bytes.TrimPrefix(data, utf8BOM))
	if src == nil {
		src = []byte{}
	}
	s := &Scenario{Path: path, Dir: filepath.Dir(path), Source: src}
	s.pos = newPositions(src)

	var tree map[string]any
	if err := toml.Unmarshal(src, &tree); err != nil {
		return nil, s.tomlError(err)
	}
	d := decoder{s: s}
	d.root(table{m: tree})
	if d.err != nil {
		return nil, d.err
	}
	return s, nil
}

// tomlError converts an error of the TOML decoder (bad syntax, a key given
// twice, a number out of range) to an *Error with the position of the
// offending text and, where it can be told, its key path.
func (s *Scenario) tomlError(err error) *Error {
	e := &Error{File: s.Path, Msg: strings.TrimPrefix(err.Error(), "toml: "), Err: err}
	var de *toml.DecodeError
	if !errors.As(err, &de) {
		return e
	}
	line, col := de.Position()
	if off := s.pos.offsetOf(line, col); off >= 0 {
		e.Line, e.Col = s.pos.lineCol(off)
		e.Key = s.pos.at[off]
	} else if line > 0 {
		e.Line, e.Col = line, col
	}
	if e.Key == "" {
		for _, k := range de.Key() {
			e.Key = joinKey(e.Key, k)
		}
	}
	return e
}

// decoder turns the generic TOML tree into a Scenario. It keeps the first
// error and then does nothing more (every getter reports "absent").
type decoder struct {
	s   *Scenario
	err *Error
}

// table is a TOML table with its key path.
type table struct {
	path string
	m    map[string]any
}

func (t table) key(k string) string { return joinKey(t.path, k) }

func (t table) has(k string) bool {
	_, ok := t.m[k]
	return ok
}

// failf records an error positioned at the value of key.
func (d *decoder) failf(key string, format string, args ...any) {
	if d.err == nil {
		d.err = d.s.errorAt(key, false, fmt.Sprintf(format, args...), nil)
	}
}

// failKeyf records an error positioned at key itself.
func (d *decoder) failKeyf(key string, format string, args ...any) {
	if d.err == nil {
		d.err = d.s.errorAt(key, true, fmt.Sprintf(format, args...), nil)
	}
}

func (d *decoder) fail(e *Error) {
	if d.err == nil {
		d.err = e
	}
}

// get returns the value of key k in t. A missing required key is an error.
func (d *decoder) get(t table, k string, required bool) (any, bool) {
	if d.err != nil {
		return nil, false
	}
	v, ok := t.m[k]
	if !ok && required {
		d.failf(t.key(k), "missing required key")
	}
	return v, ok
}

// checkKeys reports the first key of t (in source order) that is not in
// allowed.
func (d *decoder) checkKeys(t table, allowed []string) {
	if k, bad := d.firstKeyNotIn(t, allowed); bad {
		d.failKeyf(t.key(k), "unknown key (allowed: %s)", strings.Join(allowed, ", "))
	}
}

// firstKeyNotIn returns the key of t that comes first in the source among
// those not in allowed.
func (d *decoder) firstKeyNotIn(t table, allowed []string) (string, bool) {
	if d.err != nil {
		return "", false
	}
	var first string
	found := false
	for k := range t.m {
		if slices.Contains(allowed, k) {
			continue
		}
		if !found || d.s.keyLess(t.key(k), t.key(first)) {
			first, found = k, true
		}
	}
	return first, found
}

// later returns whichever of keys a and b of t comes later in the source.
func (d *decoder) later(t table, a, b string) string {
	if d.s.keyLess(t.key(b), t.key(a)) {
		return a
	}
	return b
}

func (d *decoder) subTable(t table, k string) table {
	sub := table{path: t.key(k)}
	v, ok := d.get(t, k, false)
	if !ok {
		return sub
	}
	m, ok := v.(map[string]any)
	if !ok {
		d.failf(sub.path, "must be a table, got %s", describe(v))
		return sub
	}
	sub.m = m
	return sub
}

// tables returns the array of tables at key k ([[k]] sections).
func (d *decoder) tables(t table, k string) []table {
	v, ok := d.get(t, k, false)
	if !ok {
		return nil
	}
	key := t.key(k)
	arr, ok := v.([]any)
	if !ok {
		d.failf(key, "must be an array of tables ([[%s]] sections), got %s", k, describe(v))
		return nil
	}
	list := make([]table, len(arr))
	for i, e := range arr {
		m, ok := e.(map[string]any)
		if !ok {
			d.failf(indexKey(key, i), "must be a table, got %s", describe(e))
			return nil
		}
		list[i] = table{path: indexKey(key, i), m: m}
	}
	return list
}

func (d *decoder) str(t table, k string, required bool) (string, bool) {
	v, ok := d.get(t, k, required)
	if !ok {
		return "", false
	}
	x, ok := v.(string)
	if !ok {
		d.failf(t.key(k), "must be a string, got %s", describe(v))
	}
	return x, ok
}

// oneOf returns the string at k, which must be one of allowed; def when k
// is absent.
func (d *decoder) oneOf(t table, k string, allowed []string, def string) string {
	x, ok := d.str(t, k, false)
	if !ok {
		return def
	}
	if !slices.Contains(allowed, x) {
		d.failf(t.key(k), "must be one of %s, got %s", quoteList(allowed), quoteShort(x))
	}
	return x
}

func (d *decoder) boolean(t table, k string) (bool, bool) {
	v, ok := d.get(t, k, false)
	if !ok {
		return false, false
	}
	x, ok := v.(bool)
	if !ok {
		d.failf(t.key(k), "must be true or false, got %s", describe(v))
	}
	return x, ok
}

// number converts a TOML integer or float to a finite float64.
func (d *decoder) number(key string, v any) (float64, bool) {
	if d.err != nil {
		return 0, false
	}
	var x float64
	switch v := v.(type) {
	case int64:
		x = float64(v)
	case float64:
		x = v
	default:
		d.failf(key, "must be a number, got %s", describe(v))
		return 0, false
	}
	if math.IsNaN(x) || math.IsInf(x, 0) {
		d.failf(key, "must be a finite number, got %s", fmtNum(x))
		return 0, false
	}
	return x, true
}

func (d *decoder) float(t table, k string, required bool) (float64, bool) {
	v, ok := d.get(t, k, required)
	if !ok {
		return 0, false
	}
	return d.number(t.key(k), v)
}

// positive returns the number at k, which must be > 0.
func (d *decoder) positive(t table, k string, required bool) (float64, bool) {
	x, ok := d.float(t, k, required)
	if ok && !(x > 0) {
		d.failf(t.key(k), "must be > 0, got %s", fmtNum(x))
		return 0, false
	}
	return x, ok
}

// integer returns the whole number at k. A float with a whole value
// (2e4) is accepted.
func (d *decoder) integer(t table, k string, required bool) (int, bool) {
	v, ok := d.get(t, k, required)
	if !ok {
		return 0, false
	}
	key := t.key(k)
	switch v := v.(type) {
	case int64:
		if int64(int(v)) != v {
			d.failf(key, "is too large, got %d", v)
			return 0, false
		}
		return int(v), true
	case float64:
		switch {
		case math.IsNaN(v) || math.IsInf(v, 0):
			d.failf(key, "must be a finite whole number, got %s", fmtNum(v))
		case v != math.Trunc(v):
			d.failf(key, "must be a whole number, got %s", fmtNum(v))
		case math.Abs(v) > 1<<53:
			d.failf(key, "is too large, got %s", fmtNum(v))
		default:
			return int(v), true
		}
		return 0, false
	}
	d.failf(key, "must be an integer, got %s", describe(v))
	return 0, false
}

// pair converts v to two finite numbers; form names them in messages, as
// "[x, y]".
func (d *decoder) pair(key string, v any, form string) ([2]float64, bool) {
	var p [2]float64
	if d.err != nil {
		return p, false
	}
	arr, ok := v.([]any)
	if !ok {
		d.failf(key, "must be %s (2 numbers), got %s", form, describe(v))
		return p, false
	}
	if len(arr) != 2 {
		d.failf(key, "must be %s (2 numbers), got %d %s", form, len(arr), plural(len(arr), "element", "elements"))
		return p, false
	}
	for i, e := range arr {
		x, ok := d.number(indexKey(key, i), e)
		if !ok {
			return p, false
		}
		p[i] = x
	}
	return p, true
}

func (d *decoder) point(t table, k string, required bool) ([2]float64, bool) {
	v, ok := d.get(t, k, required)
	if !ok {
		return [2]float64{}, false
	}
	return d.pair(t.key(k), v, "[x, y]")
}

// positivePair returns the pair at k, both numbers > 0.
func (d *decoder) positivePair(t table, k string, form string) ([2]float64, bool) {
	v, ok := d.get(t, k, true)
	if !ok {
		return [2]float64{}, false
	}
	p, ok := d.pair(t.key(k), v, form)
	for i := 0; ok && i < 2; i++ {
		if !(p[i] > 0) {
			d.failf(indexKey(t.key(k), i), "must be > 0, got %s", fmtNum(p[i]))
			ok = false
		}
	}
	return p, ok
}

// pointList returns the array of points at key.
func (d *decoder) pointList(key string, v any) ([][2]float64, bool) {
	if d.err != nil {
		return nil, false
	}
	arr, ok := v.([]any)
	if !ok {
		d.failf(key, "must be an array of points [[x, y], ...], got %s", describe(v))
		return nil, false
	}
	pts := make([][2]float64, 0, len(arr))
	for i, e := range arr {
		p, ok := d.pair(indexKey(key, i), e, "a point [x, y]")
		if !ok {
			return nil, false
		}
		pts = append(pts, p)
	}
	return pts, true
}

// name returns the name at k, which must be a valid name.
func (d *decoder) name(t table, k string) string {
	x, ok := d.str(t, k, true)
	if ok {
		if msg := checkName(x); msg != "" {
			d.failf(t.key(k), "%s", msg)
		}
	}
	return x
}

// checkName says what is wrong with a name, or "" when it is fine. Names
// become parts of file names, so they are kept to a portable set.
func checkName(x string) string {
	if x == "" {
		return "must not be empty; use letters, digits, '-' and '_'"
	}
	for i := 0; i < len(x); i++ {
		c := x[i]
		if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '-' || c == '_') {
			return "must use only letters, digits, '-' and '_', got " + quoteShort(x)
		}
	}
	if len(x) > maxNameLen {
		return fmt.Sprintf("must be at most %d characters, got %d", maxNameLen, len(x))
	}
	return ""
}

func (d *decoder) root(t table) {
	s := d.s
	d.checkKeys(t, rootKeys)
	s.Name = d.name(t, "name")
	s.Title, _ = d.str(t, "title", false)
	d.fluid(d.subTable(t, "fluid"))
	d.inflow(d.subTable(t, "inflow"))
	d.channel(d.subTable(t, "channel"))
	d.grid(d.subTable(t, "grid"))
	d.solver(d.subTable(t, "solver"))
	d.obstacles(d.tables(t, "obstacle"))
	d.probes(d.tables(t, "probe"))
	d.output(d.subTable(t, "output"))
}

func (d *decoder) fluid(t table) {
	f := &d.s.Fluid
	d.checkKeys(t, fluidKeys)
	f.Density, _ = d.positive(t, "density", true)
	if x, ok := d.float(t, "vapour_pressure", false); ok {
		if x < 0 {
			d.failf(t.key("vapour_pressure"), "must be >= 0, got %s", fmtNum(x))
		}
		f.VapourPressure, f.HasVapourPressure = x, true
	}
	f.SoundSpeed = DefaultSoundSpeed
	if x, ok := d.positive(t, "sound_speed", false); ok {
		f.SoundSpeed = x
	}
}

func (d *decoder) inflow(t table) {
	in := &d.s.Inflow
	d.checkKeys(t, inflowKeys)
	in.Speed, _ = d.positive(t, "speed", true)
	in.Pressure, _ = d.float(t, "pressure", false)
}

func (d *decoder) channel(t table) {
	c := &d.s.Channel
	d.checkKeys(t, channelKeys)
	length, ok := d.positive(t, "length", true)
	if !ok {
		return
	}
	c.Length = length
	hasLower, hasUpper := t.has("lower"), t.has("upper")
	switch {
	case t.has("height") && (hasLower || hasUpper):
		k := "lower"
		if !hasLower {
			k = "upper"
		}
		d.failKeyf(t.key(k), "cannot be given together with height; give height for straight walls, or lower and upper")
	case t.has("height"):
		h, ok := d.positive(t, "height", true)
		if ok {
			c.Height = h
			c.Lower = [][2]float64{{0, 0}, {length, 0}}
			c.Upper = [][2]float64{{0, h}, {length, h}}
		}
	case hasLower != hasUpper:
		missing := "upper"
		if hasUpper {
			missing = "lower"
		}
		d.failf(t.key(missing), "missing required key: lower and upper must be given together")
	case hasLower:
		c.Lower = d.wall(t, "lower", length)
		c.Upper = d.wall(t, "upper", length)
	default:
		d.failf(t.key("height"), "missing required key (or give wall profiles lower and upper)")
	}
	c.Profile = d.oneOf(t, "profile", profileNames, "straight")
}

// wall returns the wall profile at k: at least 2 points, x not decreasing
// from 0 to length, at most two points at one x (a vertical step) and no
// step at either end.
func (d *decoder) wall(t table, k string, length float64) [][2]float64 {
	v, ok := d.get(t, k, true)
	if !ok {
		return nil
	}
	key := t.key(k)
	pts, ok := d.pointList(key, v)
	if !ok {
		return nil
	}
	n := len(pts)
	if n < 2 {
		d.failf(key, "must have at least 2 points [x, y], got %d", n)
		return nil
	}
	tol := endTolerance * length
	if math.Abs(pts[0][0]) > tol {
		d.failf(indexKey(key, 0), "first point must be at the inlet, x = 0, got x = %s", fmtNum(pts[0][0]))
		return nil
	}
	if math.Abs(pts[n-1][0]-length) > tol {
		d.failf(indexKey(key, n-1), "last point must be at the outlet, x = channel.length = %s, got x = %s",
			fmtNum(length), fmtNum(pts[n-1][0]))
		return nil
	}
	pts[0][0], pts[n-1][0] = 0, length
	for i := 1; i < n; i++ {
		x, prev := pts[i][0], pts[i-1][0]
		switch {
		case x < prev:
			d.failf(indexKey(key, i), "x must not decrease along the wall, got x = %s after x = %s", fmtNum(x), fmtNum(prev))
		case pts[i] == pts[i-1]:
			d.failf(indexKey(key, i), "repeats the previous point [%s, %s]", fmtNum(x), fmtNum(pts[i][1]))
		case x != prev:
		case i >= 2 && pts[i-2][0] == x:
			d.failf(indexKey(key, i), "at most two consecutive points may share an x (one vertical step), got three at x = %s", fmtNum(x))
		case i == 1:
			d.failf(indexKey(key, i), "a vertical step cannot be at the inlet (x = 0)")
		case i == n-1:
			d.failf(indexKey(key, i), "a vertical step cannot be at the outlet (x = channel.length)")
		}
		if d.err != nil {
			return nil
		}
	}
	return pts
}

func (d *decoder) grid(t table) {
	g := &d.s.Grid
	d.checkKeys(t, gridKeys)
	switch {
	case t.has("spacing") && t.has("cells_across"):
		k := d.later(t, "spacing", "cells_across")
		other := "cells_across"
		if k == other {
			other = "spacing"
		}
		d.failKeyf(t.key(k), "cannot be given together with %s; give exactly one", t.key(other))
	case t.has("spacing"):
		g.Spacing, _ = d.positive(t, "spacing", true)
	case t.has("cells_across"):
		n, ok := d.integer(t, "cells_across", true)
		if ok && n < MinCells {
			d.failf(t.key("cells_across"), "must be >= %d, got %d", MinCells, n)
		}
		g.CellsAcross = n
	default:
		d.failf(t.key("spacing"), "missing required key (or give cells_across)")
	}
}

func (d *decoder) solver(t table) {
	sv := &d.s.Solver
	d.checkKeys(t, solverKeys)
	sv.Method = d.oneOf(t, "method", methodNames, "auto")
	sv.Tolerance = DefaultTolerance
	if x, ok := d.float(t, "tolerance", false); ok {
		if !(x > 0 && x < MaxTolerance) {
			d.failf(t.key("tolerance"), "must be in (0, %s), got %s", fmtNum(MaxTolerance), fmtNum(x))
		}
		sv.Tolerance = x
	}
	sv.MaxIterations = DefaultMaxIterations
	if n, ok := d.integer(t, "max_iterations", false); ok {
		if n < 1 {
			d.failf(t.key("max_iterations"), "must be >= 1, got %d", n)
		}
		sv.MaxIterations = n
	}
}

func (d *decoder) obstacles(list []table) {
	seen := make(map[string]int)
	for i, t := range list {
		o := d.obstacle(t)
		if d.err != nil {
			return
		}
		if j, dup := seen[o.Name]; dup {
			d.failf(t.key("name"), "duplicate name %q, already used by obstacle[%d]", o.Name, j)
			return
		}
		seen[o.Name] = i
		d.s.Obstacles = append(d.s.Obstacles, o)
	}
}

func (d *decoder) obstacle(t table) Obstacle {
	var o Obstacle
	// Unknown keys first: a misspelt key would otherwise show up as a missing
	// one. When the shape is known, the message lists its keys.
	shape, _ := t.m["shape"].(string)
	ownKeys, shapeOK := shapeKeys[shape]
	if shapeOK {
		ownKeys = append(slices.Clone(obstacleKeys), ownKeys...)
	}
	if k, bad := d.firstKeyNotIn(t, allObstacleKeys); bad {
		if shapeOK {
			d.failKeyf(t.key(k), "unknown key (keys for shape %q: %s)", shape, strings.Join(ownKeys, ", "))
		} else {
			d.failKeyf(t.key(k), "unknown key (allowed: %s)", strings.Join(allObstacleKeys, ", "))
		}
		return o
	}
	o.Name = d.name(t, "name")
	if n := o.Name; n == "lower" || n == "upper" {
		d.failf(t.key("name"), "%q is reserved for the channel wall; choose another name", n)
	}
	o.Shape, _ = d.str(t, "shape", true)
	if d.err != nil {
		return o
	}
	if !shapeOK {
		d.failf(t.key("shape"), "must be one of %s, got %s", quoteList(shapeNames), quoteShort(o.Shape))
		return o
	}
	if k, bad := d.firstKeyNotIn(t, ownKeys); bad {
		d.failKeyf(t.key(k), "does not apply to shape %q (its keys: %s)", shape, strings.Join(ownKeys, ", "))
		return o
	}

	switch shape {
	case "circle":
		o.Center, _ = d.point(t, "center", true)
		o.Radius, _ = d.positive(t, "radius", true)
	case "ellipse":
		o.Center, _ = d.point(t, "center", true)
		o.SemiAxes, _ = d.positivePair(t, "semi_axes", "[a, b]")
		o.Angle, _ = d.float(t, "angle", false)
	case "rectangle":
		o.Center, _ = d.point(t, "center", true)
		size, ok := d.positivePair(t, "size", "[w, h]")
		o.Size = size
		o.Angle, _ = d.float(t, "angle", false)
		if r, has := d.float(t, "corner_radius", false); has && ok {
			if limit := min(size[0], size[1]) / 2; r < 0 || r > limit {
				d.failf(t.key("corner_radius"), "must be in [0, min(w, h)/2] = [0, %s], got %s", fmtNum(limit), fmtNum(r))
			}
			o.CornerRadius = r
		}
	case "polygon":
		d.polygon(t, &o)
	case "naca4":
		if code, ok := d.str(t, "code", true); ok {
			if msg := checkNACA4(code); msg != "" {
				d.failf(t.key("code"), "%s", msg)
			}
			o.Code = code
		}
		o.Chord, _ = d.positive(t, "chord", true)
		o.LeadingEdge, _ = d.point(t, "leading_edge", true)
		o.Angle, _ = d.float(t, "angle", false)
	}

	circulation, hasCirculation := d.float(t, "circulation", false)
	o.Circulation = circulation
	if slices.Contains(ownKeys, "kutta") {
		o.Kutta, _ = d.boolean(t, "kutta")
		if o.Kutta && hasCirculation {
			d.failKeyf(t.key("circulation"), "cannot be given together with kutta = true: the Kutta condition sets the circulation")
		}
		if t.has("trailing_edge") && !o.Kutta {
			d.failKeyf(t.key("trailing_edge"), "needs kutta = true: it is where the Kutta condition is applied")
		}
		o.TrailingEdge, o.HasTrailingEdge = d.point(t, "trailing_edge", false)
	}
	return o
}

func (d *decoder) polygon(t table, o *Obstacle) {
	switch {
	case t.has("points") && t.has("points_file"):
		k := d.later(t, "points", "points_file")
		other := "points_file"
		if k == other {
			other = "points"
		}
		d.failKeyf(t.key(k), "cannot be given together with %s; give exactly one", other)
	case t.has("points"):
		v, _ := d.get(t, "points", true)
		pts, ok := d.pointList(t.key("points"), v)
		if ok && len(pts) < 3 {
			d.failf(t.key("points"), "must have at least 3 points, got %d", len(pts))
		}
		o.Points = pts
	case t.has("points_file"):
		file, ok := d.str(t, "points_file", true)
		if !ok {
			return
		}
		key := t.key("points_file")
		if file == "" {
			d.failf(key, "must not be empty")
			return
		}
		o.PointsFile = file
		name := file
		if !filepath.IsAbs(name) {
			name = filepath.Join(d.s.Dir, name)
		}
		data, err := readFile(name, true)
		if err != nil {
			d.fail(d.s.errorAt(key, false, fmt.Sprintf("cannot read points file %s: %s", quoteShort(file), causeText(err)), err))
			return
		}
		pts, err := parsePoints(name, key, data)
		if err != nil {
			var e *Error
			if errors.As(err, &e) {
				d.fail(e)
			} else {
				d.failf(key, "%v", err)
			}
			return
		}
		if len(pts) < 3 {
			d.failf(key, "points file %s has %d %s, need at least 3", quoteShort(file), len(pts), plural(len(pts), "point", "points"))
		}
		o.Points = pts
	default:
		d.failf(t.key("points"), "missing required key (or give points_file)")
	}
}

// checkNACA4 says what is wrong with a NACA 4-digit code "MPTT", or "" when
// it is fine: M is the maximum camber in per cent of the chord, P its
// position in tenths of the chord, TT the thickness in per cent.
func checkNACA4(code string) string {
	if len(code) != 4 || strings.IndexFunc(code, func(r rune) bool { return r < '0' || r > '9' }) >= 0 {
		return fmt.Sprintf("must be 4 digits \"MPTT\" (camber, its position, thickness), got %s", quoteShort(code))
	}
	m, p := code[0]-'0', code[1]-'0'
	tt, _ := strconv.Atoi(code[2:])
	if (m == 0) != (p == 0) {
		return fmt.Sprintf("camber digit M and its position digit P must be both zero or both non-zero, got %q", code)
	}
	if tt < 1 || tt > 40 {
		return fmt.Sprintf("thickness digits TT must be between 01 and 40, got %q", code)
	}
	return ""
}

func (d *decoder) probes(list []table) {
	seen := make(map[string]int)
	for i, t := range list {
		d.checkKeys(t, probeKeys)
		p := Probe{Name: d.name(t, "name")}
		p.At, _ = d.point(t, "at", true)
		if d.err != nil {
			return
		}
		if j, dup := seen[p.Name]; dup {
			d.failf(t.key("name"), "duplicate name %q, already used by probe[%d]", p.Name, j)
			return
		}
		seen[p.Name] = i
		d.s.Probes = append(d.s.Probes, p)
	}
}

func (d *decoder) output(t table) {
	out := &d.s.Output
	d.checkKeys(t, outputKeys)
	out.Images = slices.Clone(imageNames)
	if v, ok := d.get(t, "images", false); ok {
		out.Images = d.images(t.key("images"), v)
	}
	out.ImageWidth = DefaultImageWidth
	if n, ok := d.integer(t, "image_width", false); ok {
		if n < MinImageWidth || n > MaxImageWidth {
			d.failf(t.key("image_width"), "must be in [%d, %d], got %d", MinImageWidth, MaxImageWidth, n)
		}
		out.ImageWidth = n
	}
	out.FieldCSV, _ = d.boolean(t, "field_csv")
}

// images returns the list of image names at key: known names, each once.
func (d *decoder) images(key string, v any) []string {
	arr, ok := v.([]any)
	if !ok {
		d.failf(key, "must be an array of image names, got %s", describe(v))
		return nil
	}
	names := make([]string, 0, len(arr))
	for i, e := range arr {
		k := indexKey(key, i)
		x, ok := e.(string)
		switch {
		case !ok:
			d.failf(k, "must be an image name (a string), got %s", describe(e))
		case !slices.Contains(imageNames, x):
			d.failf(k, "must be one of %s, got %s", quoteList(imageNames), quoteShort(x))
		case slices.Contains(names, x):
			d.failf(k, "%q is listed twice", x)
		}
		if d.err != nil {
			return nil
		}
		names = append(names, x)
	}
	return names
}

// describe names the TOML type of v and, for scalars, its value, for
// messages like "must be a number, got string \"998\"".
func describe(v any) string {
	switch v := v.(type) {
	case string:
		return "string " + quoteShort(v)
	case int64:
		return "integer " + strconv.FormatInt(v, 10)
	case float64:
		return "float " + fmtNum(v)
	case bool:
		return "boolean " + strconv.FormatBool(v)
	case []any:
		return "array"
	case map[string]any:
		return "table"
	case toml.LocalDate:
		return "date " + v.String()
	case toml.LocalTime:
		return "time " + v.String()
	case toml.LocalDateTime:
		return "date-time " + v.String()
	case time.Time:
		return "date-time " + v.Format(time.RFC3339Nano)
	}
	return fmt.Sprintf("%T", v)
}

// fmtNum formats x in its shortest round-trip form, with TOML's spelling of
// the special values.
func fmtNum(x float64) string {
	switch {
	case math.IsNaN(x):
		return "nan"
	case math.IsInf(x, 1):
		return "inf"
	case math.IsInf(x, -1):
		return "-inf"
	}
	return strconv.FormatFloat(x, 'g', -1, 64)
}

// quoteShort quotes s for a message, shortened to 40 characters.
func quoteShort(s string) string {
	const maxRunes = 40
	if utf8.RuneCountInString(s) <= maxRunes {
		return strconv.Quote(s)
	}
	r := []rune(s)
	return strconv.Quote(string(r[:maxRunes])) + "..."
}

// quoteList formats names as "a", "b", "c".
func quoteList(names []string) string {
	q := make([]string, len(names))
	for i, n := range names {
		q[i] = strconv.Quote(n)
	}
	return strings.Join(q, ", ")
}

func plural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}
