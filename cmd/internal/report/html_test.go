package report

import (
	"bytes"
	"context"
	"encoding/base64"
	"encoding/json"
	"encoding/xml"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"

	"phipsi/cmd/internal/render"
	"phipsi/cmd/internal/scenario"
	"phipsi/mesh"
	"phipsi/solver"
	"phipsi/solver/flow"
)

// fixture is a scenario run through the whole pipeline, as `phipsi run` does it, with what the
// page is made from and summary.json as WriteJSON writes it.
type fixture struct {
	in   HTMLInput
	json []byte
	page []byte
}

var fixtures = map[string]*fixture{}

// solveFixture runs testdata/<file>, its text changed by edit (nil: as is), and writes its page.
// Results are cached by key: the cases are small, but several tests share them.
func solveFixture(t testing.TB, key, file string, edit func(string) string) *fixture {
	t.Helper()
	if f, ok := fixtures[key]; ok {
		return f
	}
	input, m := solveInput(t, file, edit)
	sc, res, phi := input.Scenario, input.Result, input.Phi
	sum, err := NewSummary(input)
	if err != nil {
		t.Fatal(err)
	}
	imgs, err := render.Render(res, phi.Phi, render.Options{Width: sc.Output.ImageWidth, Title: sc.Title, Images: sc.Output.Images})
	if err != nil {
		t.Fatal(err)
	}
	in := HTMLInput{Summary: sum, Scenario: sc, Geometry: m.Geom}
	for _, im := range imgs {
		in.Figures = append(in.Figures, Figure(im))
	}
	return writeFixture(t, key, in)
}

// solveInput runs testdata/<file>, its text changed by edit (nil: as is), through the solves and
// returns what NewSummary takes, with the mesh.
func solveInput(t testing.TB, file string, edit func(string) string) (Input, *mesh.Mesh) {
	t.Helper()
	path := filepath.Join("testdata", file)
	src, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if edit != nil {
		src = []byte(edit(string(src)))
	}
	sc, err := scenario.Parse(path, src)
	if err != nil {
		t.Fatal(err)
	}
	plan, err := sc.Plan(0)
	if err != nil {
		t.Fatal(err)
	}
	m, set, err := plan.Build()
	if err != nil {
		t.Fatal(err)
	}
	sys, err := solver.AssemblePsi(m, set)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	settings := &solver.Settings{Tolerance: sc.Solver.Tolerance, MaxIterations: sc.Solver.MaxIterations}
	sol, err := solver.SolvePsi(ctx, sys, sc.Solver.Method, settings)
	if err != nil {
		t.Fatal(err)
	}
	res, err := flow.Derive(sol, flow.Fluid{Density: sc.Fluid.Density, Pressure: sc.Inflow.Pressure})
	if err != nil {
		t.Fatal(err)
	}
	phiSys, err := solver.AssemblePhi(m, set, sol.Circulation, nil)
	if err != nil {
		t.Fatal(err)
	}
	phi, err := solver.SolvePhi(ctx, phiSys, sc.Solver.Method, settings)
	if err != nil {
		t.Fatal(err)
	}
	mismatch, err := flow.MismatchAt(res, phi)
	if err != nil {
		t.Fatal(err)
	}
	var probes []flow.ProbeValue
	for _, p := range sc.Probes {
		v, err := res.Probe(p.Name, mesh.Point{X: p.At[0], Y: p.At[1]})
		if err != nil {
			t.Fatal(err)
		}
		probes = append(probes, v)
	}
	return Input{Version: "0.0.0-test", Scenario: sc, Method: sc.Solver.Method, Result: res,
		Probes: probes, Phi: phi, Mismatch: &mismatch}, m
}

// writeFixture writes the summary and the page of in and caches them under key.
func writeFixture(t testing.TB, key string, in HTMLInput) *fixture {
	t.Helper()
	var js, page bytes.Buffer
	if err := WriteJSON(&js, in.Summary); err != nil {
		t.Fatal(err)
	}
	if err := WriteHTML(&page, in); err != nil {
		t.Fatal(err)
	}
	f := &fixture{in: in, json: js.Bytes(), page: page.Bytes()}
	fixtures[key] = f
	return f
}

// The fixtures: review.toml (three bodies, one with the Kutta condition and one from a points
// file, two probes, cavitation, warnings, every picture, markup in the title and comments);
// the same with an inlet pressure low enough for a negative cavitation margin; and plain.toml
// (an empty contraction: no bodies, probes, vapour pressure or pictures).
func reviewFixture(t testing.TB) *fixture { return solveFixture(t, "review", "review.toml", nil) }

func cavitatingFixture(t testing.TB) *fixture {
	return solveFixture(t, "cavitating", "review.toml", func(s string) string {
		return strings.Replace(s, "pressure = 30000", "pressure = 2600", 1)
	})
}

func plainFixture(t testing.TB) *fixture { return solveFixture(t, "plain", "plain.toml", nil) }

// bandsFixture is the review run with grid-error bands as run --with-error adds them, studied
// on made-up values on grids 2 and 4 times coarser around the run's own numbers: one quantity
// converging at second order, one oscillating, one diverging.
func bandsFixture(t testing.TB) *fixture {
	if f, ok := fixtures["bands"]; ok {
		return f
	}
	base := reviewFixture(t)
	sum := *base.in.Summary
	h := sum.Grid.Spacing
	hs := []float64{h, 2 * h, 4 * h}
	e := &ErrorBands{Ratio: 2, Spacings: hs}
	for _, q := range []struct {
		name, unit string
		f1         float64
		d21, d32   float64 // f2 − f1 and f3 − f2
	}{
		{"pier.max_speed", "m/s", sum.Obstacles[0].MaxSpeed, -0.01, -0.04}, // ratio 4 at r = 2: order 2
		{"pier.min_cp", "", sum.Obstacles[0].MinCp, 0.02, -0.03},
		{"probe.tap-1.speed", "m/s", sum.Probes[0].Speed, 0.04, 0.01},
	} {
		vals := []float64{q.f1, q.f1 + q.d21, q.f1 + q.d21 + q.d32}
		e.Quantities = append(e.Quantities, NewQuantityStudy(q.name, q.unit, vals, solver.GCI(hs, vals, nil)))
	}
	sum.ErrorBands = e
	in := base.in
	in.Summary = &sum
	return writeFixture(t, "bands", in)
}

func allFixtures(t *testing.T) map[string]*fixture {
	return map[string]*fixture{"review": reviewFixture(t), "cavitating": cavitatingFixture(t), "plain": plainFixture(t), "bands": bandsFixture(t)}
}

// node is an element or a text of a parsed page.
type node struct {
	tag    string // "" for text
	attr   map[string]string
	text   string
	kids   []*node
	parent *node
}

// parsePage parses HTML with encoding/xml in its lenient HTML mode (void elements closed
// automatically, HTML entities known), which is enough for the regular markup WriteHTML writes.
func parsePage(t testing.TB, page []byte) *node {
	t.Helper()
	d := xml.NewDecoder(bytes.NewReader(page))
	d.Strict = false
	d.AutoClose = xml.HTMLAutoClose
	d.Entity = xml.HTMLEntity
	root := &node{tag: "#root"}
	cur := root
	for {
		tok, err := d.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("parsing the page: %v", err)
		}
		switch tok := tok.(type) {
		case xml.StartElement:
			n := &node{tag: strings.ToLower(tok.Name.Local), attr: map[string]string{}, parent: cur}
			for _, a := range tok.Attr {
				name := a.Name.Local
				if a.Name.Space != "" && a.Name.Space != "xmlns" {
					name = a.Name.Space + ":" + name
				}
				n.attr[strings.ToLower(name)] = a.Value
			}
			cur.kids = append(cur.kids, n)
			cur = n
		case xml.EndElement:
			if cur.parent != nil {
				cur = cur.parent
			}
		case xml.CharData:
			cur.kids = append(cur.kids, &node{text: string(tok), parent: cur})
		}
	}
	return root
}

// walk calls f on n and its descendants in document order; f returns false to skip a subtree.
func (n *node) walk(f func(*node) bool) {
	if !f(n) {
		return
	}
	for _, k := range n.kids {
		k.walk(f)
	}
}

func (n *node) textContent() string {
	var b strings.Builder
	n.walk(func(m *node) bool {
		if m.tag == "" {
			b.WriteString(m.text)
		}
		return true
	})
	return b.String()
}

func (n *node) find(pred func(*node) bool) []*node {
	var out []*node
	n.walk(func(m *node) bool {
		if m.tag != "" && pred(m) {
			out = append(out, m)
		}
		return true
	})
	return out
}

func (n *node) byID(id string) *node {
	if f := n.find(func(m *node) bool { return m.attr["id"] == id }); len(f) > 0 {
		return f[0]
	}
	return nil
}

func (n *node) inside(id string) bool {
	for p := n; p != nil; p = p.parent {
		if p.attr["id"] == id {
			return true
		}
	}
	return false
}

// lookup resolves a dotted key ("obstacles.0.force.1") in decoded JSON.
func lookup(v any, key string) (any, bool) {
	for _, part := range strings.Split(key, ".") {
		switch x := v.(type) {
		case map[string]any:
			var ok bool
			if v, ok = x[part]; !ok {
				return nil, false
			}
		case []any:
			i, err := strconv.Atoi(part)
			if err != nil || i < 0 || i >= len(x) {
				return nil, false
			}
			v = x[i]
		default:
			return nil, false
		}
	}
	return v, true
}

// scenarioValues are the inputs the page may echo from the scenario, by their keys on the page.
func scenarioValues(sc *scenario.Scenario) map[string]any {
	m := map[string]any{
		"scenario.fluid.density":         sc.Fluid.Density,
		"scenario.fluid.sound_speed":     sc.Fluid.SoundSpeed,
		"scenario.inflow.pressure":       sc.Inflow.Pressure,
		"scenario.channel.length":        sc.Channel.Length,
		"scenario.solver.method":         sc.Solver.Method,
		"scenario.solver.tolerance":      sc.Solver.Tolerance,
		"scenario.solver.max_iterations": float64(sc.Solver.MaxIterations),
		"scenario.file":                  filepath.Base(sc.Path),
	}
	if sc.Fluid.HasVapourPressure {
		m["scenario.fluid.vapour_pressure"] = sc.Fluid.VapourPressure
	}
	for i, o := range sc.Obstacles {
		if o.PointsFile != "" {
			m[fmt.Sprintf("scenario.obstacle.%d.points_file", i)] = o.PointsFile
		}
	}
	return m
}

// printedRE matches a number as the page prints it, once the true minus is an ASCII one and the
// digit-group spaces are gone: sign, digits, decimals, and a power of ten as ×10ⁿ or e-notation.
var printedRE = regexp.MustCompile(`^([+-]?)([0-9]+)(?:\.([0-9]+))?(?:(?:×10|e)([+-]?[0-9]+))?$`)

// parsePrinted returns the value of a printed number and the unit of its last digit.
func parsePrinted(s string) (v, ulp float64, err error) {
	s = strings.NewReplacer("\u2212", "-", "\u202f", "", " ", "").Replace(s)
	m := printedRE.FindStringSubmatch(s)
	if m == nil {
		return 0, 0, fmt.Errorf("%q is not a number", s)
	}
	v, err = strconv.ParseFloat(m[1]+m[2]+"."+m[3]+"0", 64)
	if err != nil {
		return 0, 0, err
	}
	exp := 0
	if m[4] != "" {
		exp, _ = strconv.Atoi(m[4])
	}
	p := math.Pow(10, float64(exp))
	return v * p, math.Pow(10, -float64(len(m[3]))) * p, nil
}

// checkNumbers checks every keyed value on the page against summary.json (or, for keys starting
// "scenario.", against the scenario), and that no digit appears outside a keyed value except in
// the fixed text (references, the scenario file) of the method and reproduce sections.
func checkNumbers(t *testing.T, f *fixture) (keys []string) {
	t.Helper()
	var sum map[string]any
	if err := json.Unmarshal(f.json, &sum); err != nil {
		t.Fatal(err)
	}
	inputs := scenarioValues(f.in.Scenario)
	// A bare printed 0 stands for a value under a ten-millionth of the run's scale (round-off,
	// see roundOff); anything bigger must be printed with its digits.
	s := f.in.Summary
	scale := slices.Max([]float64{s.Flow.Rate, s.Flow.InletSpeed, s.Flow.DynamicPressure, s.Flow.DynamicPressure * s.Flow.Rate / s.Flow.InletSpeed})
	zeroTol := 1e-7 * scale
	root := parsePage(t, f.page)
	var check func(n *node)
	check = func(n *node) {
		if n.tag == "" {
			if strings.ContainsAny(n.text, "0123456789") {
				t.Errorf("digits outside a keyed value: %q (in <%s>)", strings.TrimSpace(n.text), n.parent.tag)
			}
			return
		}
		switch n.tag {
		case "style", "title":
			return
		}
		for _, a := range []string{"alt", "aria-label", "title"} {
			if strings.ContainsAny(n.attr[a], "0123456789") {
				t.Errorf("<%s %s=%q>: digits in a description", n.tag, a, n.attr[a])
			}
		}
		if _, ok := n.attr["data-literal"]; ok {
			if !n.inside("method") && !n.inside("reproduce") {
				t.Errorf("<%s data-literal> outside the method and reproduce sections", n.tag)
			}
			return
		}
		key, ok := n.attr["data-key"]
		if !ok {
			for _, k := range n.kids {
				check(k)
			}
			return
		}
		keys = append(keys, key)
		if len(n.find(func(m *node) bool { _, ok := m.attr["data-key"]; return ok })) > 1 {
			t.Errorf("%s: keyed values nest", key)
		}
		text := n.textContent()
		var want any
		if strings.HasPrefix(key, "scenario.") {
			want, ok = inputs[key]
		} else {
			want, ok = lookup(sum, key)
		}
		if !ok {
			t.Errorf("%s = %q: no such key in summary.json or the scenario", key, text)
			return
		}
		switch w := want.(type) {
		case nil:
			if text != "—" {
				t.Errorf("%s = %q, want — (null)", key, text)
			}
		case string:
			if text != w {
				t.Errorf("%s = %q, want %q", key, text, w)
			}
		case float64:
			v, ulp, err := parsePrinted(text)
			if err != nil {
				t.Errorf("%s: %v", key, err)
				return
			}
			sc := 1.0
			if a, ok := n.attr["data-scale"]; ok {
				if sc, err = strconv.ParseFloat(a, 64); err != nil {
					t.Errorf("%s: data-scale %q: %v", key, a, err)
				}
			}
			// Same value at the printed precision: within half a unit of the last digit (the
			// factor allows the binary round-off of scaling and parsing).
			tol := 0.5 * ulp * (1 + 1e-9)
			if strings.Trim(text, "0") == "" {
				tol = zeroTol
			}
			if math.Abs(v-w*sc) > tol {
				t.Errorf("%s prints %q = %g, want %g (×%g) within %g", key, text, v, w, sc, tol)
			}
		default:
			t.Errorf("%s: summary.json holds %T, not a number or string", key, want)
		}
	}
	check(root)
	titles := root.find(func(m *node) bool { return m.tag == "title" })
	wantTitle := s.Title
	if wantTitle == "" {
		wantTitle = s.Name
	}
	wantTitle += " · ideal-flow design review"
	if len(titles) != 1 || titles[0].textContent() != wantTitle {
		t.Errorf("<title>: got %d titles, want one reading %q", len(titles), wantTitle)
	}
	return keys
}

// TestHTMLNumbersMatchSummary: every number and name on the page is the value summary.json (or
// the scenario) holds under the key it is marked with, at the precision printed, and no other
// number appears.
func TestHTMLNumbersMatchSummary(t *testing.T) {
	for name, f := range allFixtures(t) {
		t.Run(name, func(t *testing.T) {
			keys := checkNumbers(t, f)
			// The key numbers of a review must be on the page, not just be right when present.
			s := f.in.Summary
			want := []string{"name", "version", "caution", "grid.nx", "grid.ny", "grid.spacing", "solve.iterations",
				"solve.residual", "flow.max_speed", "flow.rate", "flow.dynamic_pressure", "flow.max_mach",
				"flow.phi_psi_mismatch", "scenario.fluid.density", "scenario.solver.tolerance"}
			for i := range s.Warnings {
				want = append(want, fmt.Sprintf("warnings.%d", i))
			}
			for i := range s.Obstacles {
				for _, k := range []string{"name", "circulation", "max_speed", "min_cp", "force.0", "force.1", "cells_across", "blockage.ratio"} {
					want = append(want, fmt.Sprintf("obstacles.%d.%s", i, k))
				}
			}
			for i := range s.Walls {
				want = append(want, fmt.Sprintf("walls.%d.min_cp", i), fmt.Sprintf("walls.%d.max_adverse_gradient", i))
			}
			for i := range s.Probes {
				for _, k := range []string{"name", "speed", "cp", "pressure", "k"} {
					want = append(want, fmt.Sprintf("probes.%d.%s", i, k))
				}
			}
			if s.Cavitation != nil {
				want = append(want, "cavitation.sigma", "cavitation.margin", "scenario.fluid.vapour_pressure")
			}
			if s.Blockage != nil {
				want = append(want, "blockage.ratio")
			}
			if e := s.ErrorBands; e != nil {
				want = append(want, "error_bands.ratio", "error_bands.spacings.2")
				for i := range e.Quantities {
					for _, k := range []string{"name", "values.0", "extrapolated", "band", "gci_fine", "observed_order", "status"} {
						want = append(want, fmt.Sprintf("error_bands.quantities.%d.%s", i, k))
					}
				}
			}
			for _, k := range want {
				if !slices.Contains(keys, k) {
					t.Errorf("%s is not on the page", k)
				}
			}
		})
	}
}

// TestHTMLSections: the sections come in the review's order, warnings first, each with its
// heading, and the warnings are those of the summary.
func TestHTMLSections(t *testing.T) {
	order := []string{"warnings", "scenario", "numbers", "pictures", "caution", "method", "reproduce"}
	for name, f := range allFixtures(t) {
		t.Run(name, func(t *testing.T) {
			root := parsePage(t, f.page)
			var got []string
			for _, s := range root.find(func(m *node) bool { return m.tag == "section" }) {
				got = append(got, s.attr["id"])
				if h := s.find(func(m *node) bool { return m.tag == "h2" }); len(h) != 1 {
					t.Errorf("section %s has %d h2 headings, want 1", s.attr["id"], len(h))
				}
			}
			if !slices.Equal(got, order) {
				t.Errorf("sections %q, want %q", got, order)
			}
			w := root.byID("warnings")
			items := w.find(func(m *node) bool { return m.tag == "li" })
			if len(items) != len(f.in.Summary.Warnings) {
				t.Fatalf("%d warnings on the page, want %d", len(items), len(f.in.Summary.Warnings))
			}
			for i, li := range items {
				if got := li.textContent(); got != f.in.Summary.Warnings[i] {
					t.Errorf("warning %d: %q, want %q", i, got, f.in.Summary.Warnings[i])
				}
			}
			if c := root.byID("caution").textContent(); !strings.Contains(c, Caution) || !strings.Contains(c, "licensed engineer") || !strings.Contains(c, "free surface") {
				t.Errorf("caution section lacks the caution, the free surface or the licensed engineer: %q", c)
			}
			if len(root.byID("scenario").find(func(m *node) bool { return m.tag == "svg" })) != 1 {
				t.Errorf("scenario section has no sketch")
			}
			src := root.find(func(m *node) bool { return m.tag == "pre" && m.attr["class"] == "src" })
			if len(src) == 0 || src[0].textContent() != string(f.in.Scenario.Source) {
				t.Errorf("the scenario file is not on the page as it was read")
			}
		})
	}
}

// TestHTMLOptionalParts: what a run lacks is left out, and alarms are marked.
func TestHTMLOptionalParts(t *testing.T) {
	count := func(f *fixture, prefix string) int {
		return len(parsePage(t, f.page).find(func(m *node) bool { return strings.HasPrefix(m.attr["data-key"], prefix) }))
	}
	plain := plainFixture(t)
	for _, p := range []string{"obstacles.", "blockage.", "cavitation.", "probes.", "scenario.fluid.vapour_pressure"} {
		if n := count(plain, p); n != 0 {
			t.Errorf("plain: %d values keyed %s*, want none", n, p)
		}
	}
	root := parsePage(t, plain.page)
	if imgs := root.find(func(m *node) bool { return m.tag == "img" }); len(imgs) != 0 {
		t.Errorf("plain: %d images, want none", len(imgs))
	}
	if !strings.Contains(root.byID("pictures").textContent(), "No pictures") {
		t.Errorf("plain: the pictures section does not say there are none")
	}
	for name, tc := range map[string]struct {
		f     *fixture
		alarm bool
	}{"review": {reviewFixture(t), false}, "cavitating": {cavitatingFixture(t), true}} {
		c := tc.f.in.Summary.Cavitation
		if c == nil || (c.Margin < 0) != tc.alarm {
			t.Fatalf("%s: cavitation %+v: the fixture no longer has the margin it was made for", name, c)
		}
		root := parsePage(t, tc.f.page)
		alerts := root.byID("numbers").find(func(m *node) bool { return strings.Contains(m.attr["class"], "alert") })
		marked := false
		for _, a := range alerts {
			marked = marked || strings.Contains(a.textContent(), "negative")
		}
		if marked != tc.alarm {
			t.Errorf("%s: negative-margin verdict marked %v, want %v", name, marked, tc.alarm)
		}
	}
}

// TestHTMLErrorBands: with bands, each studied quantity has a row, those without an honest band
// are marked and their reasons given, and the method section says how the bands are found.
func TestHTMLErrorBands(t *testing.T) {
	f := bandsFixture(t)
	e := f.in.Summary.ErrorBands
	if !e.Quantities[0].Trusted() || e.Quantities[1].Trusted() || e.Quantities[2].Trusted() {
		t.Fatalf("the fixture's studies are no longer one trusted and two without a band: %+v", e.Quantities)
	}
	root := parsePage(t, f.page)
	var rows []*node
	for _, tb := range root.byID("numbers").find(func(m *node) bool { return m.tag == "table" }) {
		if c := tb.find(func(m *node) bool { return m.tag == "caption" }); len(c) == 1 && c[0].textContent() == "Grid-error bands" {
			rows = tb.find(func(m *node) bool { return m.tag == "tr" && m.parent.tag == "tbody" })
		}
	}
	if len(rows) != len(e.Quantities) {
		t.Fatalf("%d rows of bands, want %d", len(rows), len(e.Quantities))
	}
	for i, r := range rows {
		if marked := r.attr["class"] == "alert"; marked == e.Quantities[i].Trusted() {
			t.Errorf("row %s: marked %v, want %v", e.Quantities[i].Name, marked, !e.Quantities[i].Trusted())
		}
	}
	notes := root.byID("numbers").textContent()
	for _, q := range e.Quantities[1:] {
		if !strings.Contains(notes, q.Note) {
			t.Errorf("the reason %s has no band (%q) is not given", q.Name, q.Note)
		}
	}
	if !strings.Contains(root.byID("method").textContent(), GCIMethod) {
		t.Errorf("the method section does not say how the bands are found")
	}
	if bytes.Contains(reviewFixture(t).page, []byte("Grid-error bands")) {
		t.Errorf("a run without bands shows a table of bands")
	}
}

// TestHTMLOffline: the page loads nothing. It declares the content-security policy first, holds
// no script and no element or attribute that could fetch, links only within itself, and carries
// every picture inline, byte for byte, in order.
func TestHTMLOffline(t *testing.T) {
	allowedTags := map[string]bool{}
	for _, tag := range strings.Fields(`html head meta title style body main header nav section h1 h2 h3 p a ul ol li dl dt dd
		div table caption thead tbody tr th td span sub sup strong figure figcaption img pre code br
		svg defs pattern marker rect line path polygon polyline circle text`) {
		allowedTags[tag] = true
	}
	for name, f := range allFixtures(t) {
		t.Run(name, func(t *testing.T) {
			if bytes.Contains(bytes.ToLower(f.page), []byte("<script")) {
				t.Errorf("the page contains <script")
			}
			root := parsePage(t, f.page)
			head := root.find(func(m *node) bool { return m.tag == "head" })
			if len(head) != 1 {
				t.Fatalf("%d heads", len(head))
			}
			var first []*node
			for _, k := range head[0].kids {
				if k.tag != "" {
					first = append(first, k)
				}
			}
			if len(first) < 2 || first[0].attr["charset"] != "utf-8" || first[1].attr["http-equiv"] != "Content-Security-Policy" {
				t.Fatalf("head does not open with the charset and the content-security policy")
			}
			// The policy itself: nothing by default, images from data: only, inline style, no
			// script source at all (CSP Level 3: a missing script-src falls back to default-src).
			csp := first[1].attr["content"]
			for _, want := range []string{"default-src 'none'", "img-src data:", "style-src 'unsafe-inline'"} {
				if !strings.Contains(csp, want) {
					t.Errorf("policy %q lacks %q", csp, want)
				}
			}
			for _, bad := range []string{"script-src", "http", "*", "'self'"} {
				if strings.Contains(csp, bad) {
					t.Errorf("policy %q allows %q", csp, bad)
				}
			}
			ids := map[string]bool{}
			for _, m := range root.find(func(m *node) bool { return m.attr["id"] != "" }) {
				if ids[m.attr["id"]] {
					t.Errorf("id %q twice", m.attr["id"])
				}
				ids[m.attr["id"]] = true
			}
			localURL := regexp.MustCompile(`^url\(#([A-Za-z][\w-]*)\)$`)
			var pngs [][]byte
			for _, m := range root.find(func(m *node) bool { return m != root }) {
				if !allowedTags[m.tag] {
					t.Errorf("element <%s> is not one the page may hold", m.tag)
				}
				for a, v := range m.attr {
					if m == first[1] && a == "content" {
						continue // the policy, checked above
					}
					lv := strings.ToLower(v)
					switch {
					case strings.HasPrefix(a, "on"), a == "style", a == "srcset", a == "xlink:href", a == "action", a == "background":
						t.Errorf("<%s %s>: attribute not allowed", m.tag, a)
					case a == "src":
						data, ok := strings.CutPrefix(v, "data:image/png;base64,")
						if m.tag != "img" || !ok {
							t.Errorf("<%s src=%.40q>: only inline PNG images allowed", m.tag, v)
							continue
						}
						png, err := base64.StdEncoding.DecodeString(data)
						if err != nil {
							t.Errorf("image data: %v", err)
						}
						pngs = append(pngs, png)
					case a == "href":
						if m.tag != "a" || !strings.HasPrefix(v, "#") || !ids[v[1:]] {
							t.Errorf("<%s href=%q>: only links to this page's own sections allowed", m.tag, v)
						}
					case a == "xmlns":
						if v != "http://www.w3.org/2000/svg" {
							t.Errorf("xmlns %q", v)
						}
					case strings.Contains(lv, "url("):
						if mm := localURL.FindStringSubmatch(v); mm == nil || !ids[mm[1]] {
							t.Errorf("<%s %s=%q>: only references to the page's own definitions allowed", m.tag, a, v)
						}
					case strings.Contains(lv, "//"), strings.Contains(lv, "http:"), strings.Contains(lv, "https:"), strings.Contains(lv, "file:"), strings.Contains(lv, "data:"):
						t.Errorf("<%s %s=%q>: looks like an address", m.tag, a, v)
					}
				}
				if m.tag == "style" {
					css := strings.ToLower(m.textContent())
					for _, bad := range []string{"url(", "@import", "@font-face", "http", "//"} {
						if strings.Contains(css, bad) {
							t.Errorf("style sheet contains %q", bad)
						}
					}
				}
			}
			if len(pngs) != len(f.in.Figures) {
				t.Fatalf("%d images on the page, want %d", len(pngs), len(f.in.Figures))
			}
			for i, p := range pngs {
				if !bytes.Equal(p, f.in.Figures[i].PNG) {
					t.Errorf("image %d is not figure %q byte for byte", i, f.in.Figures[i].Name)
				}
			}
		})
	}
}

// TestHTMLEscapes: markup in the scenario (title and comments) is shown as text, never obeyed.
func TestHTMLEscapes(t *testing.T) {
	f := reviewFixture(t)
	if !strings.Contains(f.in.Summary.Title, "<script>") || !strings.Contains(string(f.in.Scenario.Source), "</pre><script>") {
		t.Fatalf("the fixture has lost the markup it is meant to carry")
	}
	root := parsePage(t, f.page)
	for _, tag := range []string{"script", "i", "b"} {
		if n := root.find(func(m *node) bool { return m.tag == tag }); len(n) != 0 {
			t.Errorf("%d <%s> elements: markup from the scenario was obeyed", len(n), tag)
		}
	}
	h1 := root.find(func(m *node) bool { return m.tag == "h1" })
	if len(h1) != 1 || h1[0].textContent() != f.in.Summary.Title {
		t.Errorf("h1 is not the title as text")
	}
}

// TestHTMLDeterministic: the same input gives the same bytes.
func TestHTMLDeterministic(t *testing.T) {
	f := reviewFixture(t)
	var again bytes.Buffer
	if err := WriteHTML(&again, f.in); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(again.Bytes(), f.page) {
		t.Errorf("two pages from one input differ")
	}
}

// TestHTMLRefuses: a page without its summary or scenario, or with a picture that is not a PNG,
// is an error, not a broken page.
func TestHTMLRefuses(t *testing.T) {
	f := reviewFixture(t)
	noWalls := *f.in.Summary
	noWalls.Walls = nil
	cases := []struct {
		name string
		in   HTMLInput
		want string
	}{
		{"no summary", HTMLInput{Scenario: f.in.Scenario}, "no summary"},
		{"no scenario", HTMLInput{Summary: f.in.Summary}, "no scenario"},
		{"no walls", HTMLInput{Summary: &noWalls, Scenario: f.in.Scenario}, "walls"},
		{"not a PNG", HTMLInput{Summary: f.in.Summary, Scenario: f.in.Scenario, Figures: []Figure{{Name: "speed", PNG: []byte("GIF89a")}}}, `"speed" is not a PNG`},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			var b bytes.Buffer
			err := WriteHTML(&b, tc.in)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %v, want one containing %q", err, tc.want)
			}
			if b.Len() != 0 {
				t.Errorf("%d bytes written with the error", b.Len())
			}
		})
	}
}

// TestFormatNumber: the page's number forms.
func TestFormatNumber(t *testing.T) {
	cases := []struct {
		v    float64
		nf   numFormat
		want string
	}{
		{1.23456, sig(4), "1.235"},
		{-1.23456, sig(4), "−1.235"},
		{9.99961, sig(4), "10.00"},          // rounding carries into a new digit
		{150024.83, sig(4), "150\u202f025"}, // the integer part is never rounded away
		{2339, sig(4), "2339"},              // four digits stay whole
		{0.0012241, sig(3), "0.00122"},
		{1.2e-6, sig(4), "1.200 × 10<sup>−6</sup>"}, // small: a power of ten, not 0.000001200
		{6.2595e-11, sci(2), "6.3 × 10<sup>−11</sup>"},
		{1e-10, sci(2), "1.0 × 10<sup>−10</sup>"},
		{0, sci(2), "0"},
		{-0.00001, fixed(4), "0.0000"}, // never −0
		{-3.2125, fixed(4), "−3.2125"},
		{0.08333, percent(1), "8.3"},
		{0.045352, signedPercent(2), "+4.54"},
		{-0.00001, signedPercent(2), "0.00"},
		{535367, integer(), "535\u202f367"},
		{2.5000000001, sig(4).trimmed(), "2.5"},
		{0.005, exact(), "0.005"},
		{101325, exact(), "101\u202f325"},
		{-3.77e-15, sig(4).floor(1e-9), "0"},
		{0.002, roundTrip(), "0.002"},
		{1e-10, roundTrip(), "1e-10"},
	}
	for _, tc := range cases {
		t.Run(fmt.Sprintf("%g/%c%d", tc.v, tc.nf.kind, tc.nf.prec), func(t *testing.T) {
			if got := formatNumber(tc.v, tc.nf); got != tc.want {
				t.Errorf("got %q, want %q", got, tc.want)
			}
		})
	}
}

// TestParsePrinted checks the test's own reader of printed numbers, on which the summary check
// rests.
func TestParsePrinted(t *testing.T) {
	cases := []struct {
		s       string
		v, ulp  float64
		invalid bool
	}{
		{s: "1.235", v: 1.235, ulp: 0.001},
		{s: "−3.2125", v: -3.2125, ulp: 0.0001},
		{s: "150\u202f025", v: 150025, ulp: 1},
		{s: "+4.54", v: 4.54, ulp: 0.01},
		{s: "6.3 × 10−11", v: 6.3e-11, ulp: 1e-12},
		{s: "1e-10", v: 1e-10, ulp: 1e-10},
		{s: "—", invalid: true},
		{s: "1.2.3", invalid: true},
	}
	for _, tc := range cases {
		v, ulp, err := parsePrinted(tc.s)
		if tc.invalid {
			if err == nil {
				t.Errorf("%q: got %g, want an error", tc.s, v)
			}
			continue
		}
		// Relative tolerance: decimal values parsed and scaled by powers of ten in binary.
		const rel = 1e-12
		if err != nil || math.Abs(v-tc.v) > rel*math.Abs(tc.v) || math.Abs(ulp-tc.ulp) > rel*tc.ulp {
			t.Errorf("%q: got %g ± %g (%v), want %g ± %g", tc.s, v, ulp, err, tc.v, tc.ulp)
		}
	}
}

// TestRoundingFloorNoted: a φ solve that stopped on its rounding floor above the tolerance is
// named in a warning and marked in summary.json, and the page says so instead of "treat with
// care"; a solve above the tolerance for another reason keeps the caution.
func TestRoundingFloorNoted(t *testing.T) {
	in, m := solveInput(t, "plain.toml", nil)
	tol := in.Scenario.Solver.Tolerance
	phi := *in.Phi
	phi.Stats.Residual, phi.Stats.Floor = 3*tol, true
	in.Phi = &phi
	sum, err := NewSummary(in)
	if err != nil {
		t.Fatal(err)
	}
	if !sum.Solve.AtFloor {
		t.Error("solve.at_rounding_floor = false, want true")
	}
	if !slices.ContainsFunc(sum.Warnings, func(w string) bool { return strings.Contains(w, "rounding floor") }) {
		t.Errorf("no warning names the rounding floor: %q", sum.Warnings)
	}
	var page bytes.Buffer
	if err := WriteHTML(&page, HTMLInput{Summary: sum, Scenario: in.Scenario, Geometry: m.Geom}); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(page.String(), "rounding floor") || strings.Contains(page.String(), "treat the numbers below with care") {
		t.Error("page: want the rounding-floor sentence and no caution about convergence")
	}

	phi.Stats.Floor = false
	sum, err = NewSummary(in)
	if err != nil {
		t.Fatal(err)
	}
	if sum.Solve.AtFloor {
		t.Error("not on the floor: solve.at_rounding_floor = true")
	}
	page.Reset()
	if err := WriteHTML(&page, HTMLInput{Summary: sum, Scenario: in.Scenario, Geometry: m.Geom}); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(page.String(), "treat the numbers below with care") {
		t.Error("page: a solve above the tolerance must carry the caution")
	}
}
