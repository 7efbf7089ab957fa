package report

import (
	"bytes"
	_ "embed"
	"encoding/base64"
	"errors"
	"fmt"
	"html/template"
	"io"
	"math"
	"path/filepath"
	"strconv"
	"strings"

	"phipsi/cmd/internal/scenario"
	"phipsi/mesh"
)

// ContentSecurityPolicy is the policy the design-review page declares in a meta tag: nothing may
// be loaded from anywhere, images only from data: URIs, styles only from the page itself, and no
// script at all.
const ContentSecurityPolicy = "default-src 'none'; img-src data:; style-src 'unsafe-inline'; base-uri 'none'; form-action 'none'"

//go:embed page.html.tmpl
var pageTemplate string

//go:embed page.css
var pageCSS string

var pageTmpl = template.Must(template.New("page").Parse(pageTemplate))

// Figure is one picture on the design-review page: a PNG and the name it was rendered under
// ("streamlines", "speed", "pressure", "flownet", "walls", "surface-<body>"). It has the fields
// of render.Image, so report.Figure(im) converts one.
type Figure struct {
	Name string
	PNG  []byte
}

// HTMLInput is what the design-review page is made from.
type HTMLInput struct {
	// Summary is the summary of the run, the same value summary.json is written from. Every
	// result on the page is taken from it. Required.
	Summary *Summary
	// Scenario is the scenario that was run (with any command-line overrides applied). The page
	// echoes its inputs (fluid, inlet pressure, solver settings) and prints its Source, and the
	// polygon points read from points files, so that the run can be repeated. Required.
	Scenario *scenario.Scenario
	// Geometry, when not nil, is drawn to scale as the sketch of the passage.
	Geometry *mesh.Geometry
	// Figures are the pictures, shown in the order given.
	Figures []Figure
}

// WriteHTML writes the design-review page of a run: one self-contained HTML file with the
// pictures inline as data URIs, its own style sheet, no script, and a content-security policy
// (ContentSecurityPolicy) that forbids loading anything. It holds the warnings, the scenario,
// the key numbers, the pictures, the ideal-flow caution, the method and its references, and the
// scenario file itself with the command that repeats the run.
//
// Every result on the page is a value of in.Summary printed at a stated precision, marked with
// the summary.json key it comes from (a data-key attribute); inputs echoed from the scenario are
// marked with keys that start with "scenario.".
func WriteHTML(w io.Writer, in HTMLInput) error {
	p, err := newPage(in)
	if err != nil {
		return err
	}
	var buf bytes.Buffer
	if err := pageTmpl.Execute(&buf, p); err != nil {
		return fmt.Errorf("report: html page: %w", err)
	}
	_, err = w.Write(buf.Bytes())
	return err
}

// page is the view the template renders: every fragment is built here, escaped, with its numbers
// formatted and keyed.
type page struct {
	CSP, Heading      string
	CSS               template.CSS
	Title, Ident      template.HTML
	Warnings          []template.HTML
	Glance            []glance
	Sketch            template.HTML
	SketchNote        template.HTML
	Facts             []factGroup
	Convergence       template.HTML
	Channel           *table
	Bodies            *table
	BodyNotes         []template.HTML
	Walls             *table
	Stretches         *table
	StretchNote       template.HTML
	Probes            *table
	Cavitation        *table
	CavitationVerdict template.HTML
	CavitationAlert   bool
	// ErrorBands is the grid-error table (run --with-error), with its lead, its notes and the
	// method behind it; nil without bands.
	ErrorBands *table
	BandLead   template.HTML
	BandNotes  []template.HTML
	BandMethod string
	Figures    []figure
	Caution    template.HTML
	Version    template.HTML
	File       template.HTML
	Command    template.HTML
	Source     string
	Points     []pointsFile
}

type glance struct {
	Label, Value, Where template.HTML
	Alert               bool
}

type factGroup struct {
	Title string
	Rows  []fact
}

type fact struct {
	Label, Value template.HTML
	Wrap         bool // the value is text that may wrap
}

// table is a table of numbers: a heading row, then rows whose first cell is the row's label.
type table struct {
	Class   string
	Caption template.HTML
	Head    []template.HTML
	Rows    []trow
}

type trow struct {
	Label template.HTML
	Unit  template.HTML // shown in its own column when the table has one (Class "q")
	Cells []template.HTML
	Alert bool
}

type figure struct {
	ID      string
	Heading template.HTML
	Caption template.HTML
	Alt     string
	URI     template.URL
}

type pointsFile struct {
	Name template.HTML
	Rows string
}

// pngSignature opens every PNG file (PNG specification, section 5.2).
var pngSignature = []byte("\x89PNG\r\n\x1a\n")

func newPage(in HTMLInput) (*page, error) {
	s, sc := in.Summary, in.Scenario
	if s == nil {
		return nil, errors.New("report: html page: no summary")
	}
	if sc == nil {
		return nil, errors.New("report: html page: no scenario")
	}
	if len(s.Walls) != 2 {
		return nil, fmt.Errorf("report: html page: summary has %d walls, want lower and upper", len(s.Walls))
	}
	f := newFormatter(s)
	p := &page{CSP: ContentSecurityPolicy, CSS: template.CSS(pageCSS)}
	heading, key := s.Title, "title"
	if heading == "" {
		heading, key = s.Name, "name"
	}
	p.Heading = heading + " · ideal-flow design review"
	p.Title = f.str(key, heading)
	p.Ident = "scenario " + f.str("name", s.Name) + " · phipsi " + f.str("version", s.Version)
	p.Version = f.str("version", s.Version)
	for i, m := range s.Warnings {
		p.Warnings = append(p.Warnings, f.str(fmt.Sprintf("warnings.%d", i), m))
	}
	p.Caution = f.str("caution", s.Caution)
	p.glance(f)
	if in.Geometry != nil {
		p.Sketch = sketch(in.Geometry, s)
		p.SketchNote = "The passage to scale, seen from above: walls hatched, bodies grey, probes as open circles; the flow enters on the left."
	}
	p.scenarioFacts(f, sc)
	p.keyNumbers(f)
	p.ErrorBands, p.BandNotes, p.BandLead = errorBandsTable(f)
	if f.s.ErrorBands != nil {
		p.BandMethod = GCIMethod
	}
	for i, fig := range in.Figures {
		if !bytes.HasPrefix(fig.PNG, pngSignature) {
			return nil, fmt.Errorf("report: html page: figure %q is not a PNG", fig.Name)
		}
		heading, caption := figureText(fig.Name, s)
		p.Figures = append(p.Figures, figure{
			ID:      fmt.Sprintf("fig-%d", i),
			Heading: heading,
			Caption: caption,
			Alt:     altText(fig.Name),
			URI:     template.URL("data:image/png;base64," + base64.StdEncoding.EncodeToString(fig.PNG)),
		})
	}
	p.reproduce(f, sc)
	return p, nil
}

// glance picks the headline numbers shown under the warnings.
func (p *page) glance(f *formatter) {
	s := f.s
	p.Glance = append(p.Glance, glance{Label: "Peak speed",
		Value: f.num("flow.max_speed", s.Flow.MaxSpeed, sig(4)) + " m/s",
		Where: "at x, y = " + f.point("flow.max_speed_at", s.Flow.MaxSpeedAt) + " m"})
	// The lowest Cp on any wall or body: the summary's own pick when it made one (cavitation),
	// else the lowest of the bodies' and walls' minima.
	if c := s.Cavitation; c != nil {
		p.Glance = append(p.Glance, glance{Label: "Lowest C<sub>p</sub>",
			Value: f.num("cavitation.min_cp", c.MinCp, fixed(4)),
			Where: "on " + f.str("cavitation.min_cp_on", c.MinCpOn)})
	} else {
		key, name, v := "", "", math.Inf(1)
		for i, o := range s.Obstacles {
			if o.MinCp < v {
				key, name, v = fmt.Sprintf("obstacles.%d", i), o.Name, o.MinCp
			}
		}
		for i, w := range s.Walls {
			if w.MinCp < v {
				key, name, v = fmt.Sprintf("walls.%d", i), w.Name, w.MinCp
			}
		}
		p.Glance = append(p.Glance, glance{Label: "Lowest C<sub>p</sub>",
			Value: f.num(key+".min_cp", v, fixed(4)), Where: "on " + f.str(key+".name", name)})
	}
	if b := s.Blockage; b != nil {
		p.Glance = append(p.Glance, glance{Label: "Blockage",
			Value: f.num("blockage.ratio", b.Ratio, percent(1)) + " %",
			Where: "wall speed " + f.num("blockage.wall_increment", b.WallIncrement, signedPercent(2)) + " %"})
	}
	if c := s.Cavitation; c != nil {
		verdict := "no vapour predicted"
		if c.Margin < 0 {
			verdict = "vapour predicted"
		}
		p.Glance = append(p.Glance, glance{Label: "Cavitation margin",
			Value: f.num("cavitation.margin", c.Margin, sig(4)), Where: template.HTML(verdict), Alert: c.Margin < 0})
	}
	p.Glance = append(p.Glance, glance{Label: "Peak Mach number",
		Value: f.num("flow.max_mach", s.Flow.MaxMach, sig(2)), Alert: s.Flow.MaxMach > 0.3})
}

// scenarioFacts lists what was solved: fluid, inflow, channel, grid and solver.
func (p *page) scenarioFacts(f *formatter, sc *scenario.Scenario) {
	s := f.s
	fl := factGroup{Title: "Fluid and inflow"}
	fl.Rows = append(fl.Rows,
		fact{Label: "Density ρ", Value: f.num("scenario.fluid.density", sc.Fluid.Density, exact()) + " kg/m³"})
	if sc.Fluid.HasVapourPressure {
		fl.Rows = append(fl.Rows, fact{Label: "Vapour pressure p<sub>v</sub>", Value: f.num("scenario.fluid.vapour_pressure", sc.Fluid.VapourPressure, exact()) + " Pa"})
	}
	fl.Rows = append(fl.Rows,
		fact{Label: "Speed of sound", Value: f.num("scenario.fluid.sound_speed", sc.Fluid.SoundSpeed, exact()) + " m/s"},
		fact{Label: "Mean inlet speed U", Value: f.num("flow.inlet_speed", s.Flow.InletSpeed, sig(4).trimmed()) + " m/s"},
		fact{Label: "Inlet static pressure p<sub>in</sub>", Value: f.num("scenario.inflow.pressure", sc.Inflow.Pressure, exact()) + " Pa"},
		fact{Label: "Dynamic pressure ½ρU²", Value: f.num("flow.dynamic_pressure", s.Flow.DynamicPressure, sig(4)) + " Pa"},
		fact{Label: "Flow rate Q (per unit depth)", Value: f.num("flow.rate", s.Flow.Rate, sig(4).trimmed()) + " m²/s"},
	)
	ch := factGroup{Title: "Passage and grid"}
	ch.Rows = append(ch.Rows,
		fact{Label: "Length, inlet to outlet", Value: f.num("scenario.channel.length", sc.Channel.Length, exact()) + " m"},
		fact{Label: "Mean outlet speed", Value: f.num("flow.outlet_speed", s.Flow.OutletSpeed, sig(4).trimmed()) + " m/s"},
		fact{Label: "Grid", Value: f.num("grid.nx", float64(s.Grid.NX), integer()) + " × " + f.num("grid.ny", float64(s.Grid.NY), integer()) + " nodes"},
		fact{Label: "Spacing h", Value: f.num("grid.spacing", s.Grid.Spacing, sig(4).trimmed()) + " m"},
		fact{Label: "Cells", Value: f.num("grid.cells", float64(s.Grid.Cells), integer())},
		fact{Label: "Unknowns (fluid nodes)", Value: f.num("grid.unknowns", float64(s.Grid.Unknowns), integer())},
	)
	so := factGroup{Title: "Solver"}
	so.Rows = append(so.Rows,
		fact{Label: "Method", Value: f.str("solve.method", s.Solve.Method), Wrap: true},
		fact{Label: "Linear solves", Value: f.num("solve.solves", float64(s.Solve.Solves), integer())},
		fact{Label: "Iterations, all solves", Value: f.num("solve.iterations", float64(s.Solve.Iterations), integer()) +
			" (velocity potential " + f.num("solve.phi_iterations", float64(s.Solve.PhiIterations), integer()) + ")"},
		fact{Label: "Worst final residual (relative)", Value: f.num("solve.residual", s.Solve.Residual, sci(2))},
		fact{Label: "Requested tolerance", Value: f.num("scenario.solver.tolerance", sc.Solver.Tolerance, sci(2))},
		fact{Label: "Iteration limit per solve", Value: f.num("scenario.solver.max_iterations", float64(sc.Solver.MaxIterations), integer())},
		fact{Label: "Time: solve, set-up", Value: f.num("solve.seconds", s.Solve.Seconds, fixed(2)) + " s, " + f.num("solve.setup_seconds", s.Solve.SetupSeconds, fixed(2)) + " s"},
	)
	if m := s.Flow.PhiPsiMismatch; m != nil {
		so.Rows = append(so.Rows, fact{Label: "Cross-check, largest |V<sub>φ</sub> − V<sub>ψ</sub>|/U", Value: f.num("flow.phi_psi_mismatch", *m, percent(2)) + " % (away from walls)"})
	}
	p.Facts = []factGroup{fl, ch, so}
	switch {
	case s.Solve.Residual <= sc.Solver.Tolerance:
		p.Convergence = "Every linear solve reached the requested tolerance."
	case s.Solve.AtFloor:
		p.Convergence = "Every linear solve reached the requested tolerance or, where the grid made that impossible, the rounding floor of double-precision arithmetic (see the notes)."
	default:
		p.Convergence = "The worst final residual is above the requested tolerance: treat the numbers below with care."
	}
}

// keyNumbers builds the tables of results.
func (p *page) keyNumbers(f *formatter) {
	s := f.s
	ch := &table{Class: "q", Caption: "Whole passage", Head: []template.HTML{"", "unit", "value"}}
	ch.Rows = append(ch.Rows,
		trow{Label: "Peak speed anywhere", Unit: "m/s", Cells: []template.HTML{f.num("flow.max_speed", s.Flow.MaxSpeed, sig(4))}},
		trow{Label: "&emsp;at x, y", Unit: "m", Cells: []template.HTML{f.point("flow.max_speed_at", s.Flow.MaxSpeedAt)}},
		trow{Label: "Peak Mach number", Unit: "–", Cells: []template.HTML{f.num("flow.max_mach", s.Flow.MaxMach, sig(2))}, Alert: s.Flow.MaxMach > 0.3},
	)
	if b := s.Blockage; b != nil {
		ch.Rows = append(ch.Rows,
			trow{Label: "All bodies: largest blocked share of the section", Unit: "%", Cells: []template.HTML{f.num("blockage.ratio", b.Ratio, percent(1))}},
			trow{Label: "&emsp;at x", Unit: "m", Cells: []template.HTML{f.num("blockage.x", b.X, sig(4).trimmed())}},
			trow{Label: "&emsp;wall speed there over the empty passage", Unit: "%", Cells: []template.HTML{f.num("blockage.wall_increment", b.WallIncrement, signedPercent(2))}},
		)
	}
	p.Channel = ch

	if len(s.Obstacles) > 0 {
		bt := &table{Class: "q", Caption: "Bodies", Head: []template.HTML{"", "unit"}}
		for i, o := range s.Obstacles {
			bt.Head = append(bt.Head, f.str(fmt.Sprintf("obstacles.%d.name", i), o.Name))
		}
		each := func(label, unit template.HTML, cell func(k string, o *ObstacleInfo) template.HTML) {
			r := trow{Label: label, Unit: unit}
			for i := range s.Obstacles {
				r.Cells = append(r.Cells, cell(fmt.Sprintf("obstacles.%d.", i), &s.Obstacles[i]))
			}
			bt.Rows = append(bt.Rows, r)
		}
		each("Circulation set by", "", func(k string, o *ObstacleInfo) template.HTML {
			if o.Kutta {
				return "Kutta condition"
			}
			return "scenario value"
		})
		each("&emsp;trailing edge at x, y", "m", func(k string, o *ObstacleInfo) template.HTML {
			if o.TrailingEdge == nil {
				return f.null(k + "trailing_edge")
			}
			return f.point(k+"trailing_edge", *o.TrailingEdge)
		})
		each("Circulation Γ (counter-clockwise positive)", "m²/s", func(k string, o *ObstacleInfo) template.HTML {
			return f.num(k+"circulation", o.Circulation, sig(4).floor(f.circFloor))
		})
		each("Stream function on the body ψ", "m²/s", func(k string, o *ObstacleInfo) template.HTML { return f.num(k+"psi", o.Psi, sig(5)) })
		each("Peak surface speed V<sub>max</sub>", "m/s", func(k string, o *ObstacleInfo) template.HTML {
			return f.num(k+"max_speed", o.MaxSpeed, sig(4))
		})
		each("&emsp;at x, y", "m", func(k string, o *ObstacleInfo) template.HTML { return f.point(k+"max_speed_at", o.MaxSpeedAt) })
		each("Lowest pressure coefficient C<sub>p,min</sub>", "–", func(k string, o *ObstacleInfo) template.HTML {
			return f.num(k+"min_cp", o.MinCp, fixed(4))
		})
		each("&emsp;at x, y", "m", func(k string, o *ObstacleInfo) template.HTML { return f.point(k+"min_cp_at", o.MinCpAt) })
		each("Stagnation points x, y", "m", func(k string, o *ObstacleInfo) template.HTML {
			if len(o.StagnationPoints) == 0 {
				return "none found"
			}
			var parts []string
			for j, q := range o.StagnationPoints {
				parts = append(parts, string(f.point(fmt.Sprintf("%sstagnation_points.%d", k, j), q)))
			}
			return template.HTML(strings.Join(parts, "<br>"))
		})
		each("Pressure force F<sub>x</sub> (drag)", "N/m", func(k string, o *ObstacleInfo) template.HTML {
			return f.num(k+"force.0", o.Force[0], sig(3).floor(f.forceFloor))
		})
		each("Pressure force F<sub>y</sub> (lift)", "N/m", func(k string, o *ObstacleInfo) template.HTML {
			return f.num(k+"force.1", o.Force[1], sig(4).floor(f.forceFloor))
		})
		each("Kutta–Joukowski lift −ρUΓ", "N/m", func(k string, o *ObstacleInfo) template.HTML {
			return f.num(k+"lift_kutta_joukowski", o.LiftKuttaJoukowski, sig(4).floor(f.forceFloor))
		})
		each("Blocked share of the section", "%", func(k string, o *ObstacleInfo) template.HTML {
			return f.num(k+"blockage.ratio", o.Blockage.Ratio, percent(1))
		})
		each("&emsp;at x", "m", func(k string, o *ObstacleInfo) template.HTML {
			return f.num(k+"blockage.x", o.Blockage.X, sig(4).trimmed())
		})
		each("&emsp;frontal height, section height", "m", func(k string, o *ObstacleInfo) template.HTML {
			return f.num(k+"blockage.frontal", o.Blockage.Frontal, sig(4).trimmed()) + ", " + f.num(k+"blockage.height", o.Blockage.Height, sig(4).trimmed())
		})
		each("&emsp;speed increment, classical estimate ε", "%", func(k string, o *ObstacleInfo) template.HTML {
			if o.Blockage.ClassicalIncrement == nil {
				return f.null(k + "blockage.classical_increment")
			}
			return f.num(k+"blockage.classical_increment", *o.Blockage.ClassicalIncrement, percent(2))
		})
		each("&emsp;wall speed increment, computed", "%", func(k string, o *ObstacleInfo) template.HTML {
			return f.num(k+"blockage.wall_increment", o.Blockage.WallIncrement, signedPercent(2))
		})
		each("Narrowest gap to a wall", "m", func(k string, o *ObstacleInfo) template.HTML {
			if o.GapToWall == nil {
				return f.null(k + "gap_to_wall")
			}
			return f.num(k+"gap_to_wall", *o.GapToWall, sig(3).trimmed())
		})
		each("Narrowest gap to another body", "m", func(k string, o *ObstacleInfo) template.HTML {
			if o.GapToBody == nil {
				return f.null(k + "gap_to_body")
			}
			return f.num(k+"gap_to_body", *o.GapToBody, sig(3).trimmed())
		})
		each("Grid cells across the body", "–", func(k string, o *ObstacleInfo) template.HTML {
			return f.num(k+"cells_across", o.CellsAcross, fixed(1))
		})
		for _, o := range s.Obstacles {
			if o.CellsAcross < minCellsAcross {
				bt.Rows[len(bt.Rows)-1].Alert = true
			}
		}
		p.Bodies = bt
		p.BodyNotes = []template.HTML{
			"A closed body in ideal flow feels no drag (d’Alembert): F<sub>x</sub> measures the discretisation error of the pressure integral, not a drag.",
			"In a channel F<sub>y</sub> differs from −ρUΓ because the walls change the lift; the pressure force is the one to use.",
			"The classical estimate is the first-order solid-blockage increment for an equivalent ellipse; the computed increment is the rise of the wall speed at the body’s station over the empty passage.",
		}
	}

	wt := &table{Class: "q", Caption: "Walls", Head: []template.HTML{"", "unit"}}
	for i, w := range s.Walls {
		wt.Head = append(wt.Head, f.str(fmt.Sprintf("walls.%d.name", i), w.Name))
	}
	eachWall := func(label, unit template.HTML, cell func(k string, w *WallInfo) template.HTML) {
		r := trow{Label: label, Unit: unit}
		for i := range s.Walls {
			r.Cells = append(r.Cells, cell(fmt.Sprintf("walls.%d.", i), &s.Walls[i]))
		}
		wt.Rows = append(wt.Rows, r)
	}
	eachWall("Lowest pressure coefficient C<sub>p,min</sub>", "–", func(k string, w *WallInfo) template.HTML { return f.num(k+"min_cp", w.MinCp, fixed(4)) })
	eachWall("&emsp;at x, y", "m", func(k string, w *WallInfo) template.HTML { return f.point(k+"min_cp_at", w.MinCpAt) })
	eachWall("Highest pressure coefficient C<sub>p,max</sub>", "–", func(k string, w *WallInfo) template.HTML { return f.num(k+"max_cp", w.MaxCp, fixed(4)) })
	eachWall("&emsp;at x, y", "m", func(k string, w *WallInfo) template.HTML { return f.point(k+"max_cp_at", w.MaxCpAt) })
	eachWall("Steepest adverse gradient dC<sub>p</sub>/dx", "m⁻¹", func(k string, w *WallInfo) template.HTML {
		return f.num(k+"max_adverse_gradient", w.MaxAdverseGradient, sig(3))
	})
	eachWall("&emsp;at x, y", "m", func(k string, w *WallInfo) template.HTML {
		return f.point(k+"max_adverse_gradient_at", w.MaxAdverseGradientAt)
	})
	p.Walls = wt

	st := &table{Class: "list", Caption: "Adverse stretches",
		Head: []template.HTML{"wall", "from x<br><span class=\"unit\">m</span>", "to x<br><span class=\"unit\">m</span>",
			"C<sub>p</sub> rise<br><span class=\"unit\">–</span>", "steepest dC<sub>p</sub>/dx<br><span class=\"unit\">m⁻¹</span>"}}
	for i, w := range s.Walls {
		for j, a := range w.AdverseStretches {
			k := fmt.Sprintf("walls.%d.adverse_stretches.%d.", i, j)
			st.Rows = append(st.Rows, trow{Label: f.str(fmt.Sprintf("walls.%d.name", i), w.Name), Cells: []template.HTML{
				f.num(k+"x0", a.X0, sig(4).trimmed()), f.num(k+"x1", a.X1, sig(4).trimmed()), f.num(k+"cp_rise", a.CpRise, fixed(3)), f.num(k+"max_gradient", a.MaxGradient, sig(3))}})
		}
	}
	if len(st.Rows) > 0 {
		p.Stretches = st
	}
	p.StretchNote = "An adverse stretch is a length of wall where the pressure rises downstream faster than dC<sub>p</sub>/d(x/H) = " +
		f.num("walls.0.adverse_threshold", s.Walls[0].AdverseThreshold, sig(2).trimmed()) +
		", H the inlet height. Ideal flow cannot show whether the boundary layer separates there; a long or steep rise is where a viscous check or a model test should look first."

	if len(s.Probes) > 0 {
		pt := &table{Class: "list", Caption: "Probes", Head: []template.HTML{"probe",
			"x, y<br><span class=\"unit\">m</span>", "u<br><span class=\"unit\">m/s</span>", "v<br><span class=\"unit\">m/s</span>",
			"speed<br><span class=\"unit\">m/s</span>", "C<sub>p</sub><br><span class=\"unit\">–</span>", "p<br><span class=\"unit\">Pa</span>",
			"p<sub>in</sub> − p<br><span class=\"unit\">Pa</span>", "k = Δp/(½ρV²)<br><span class=\"unit\">–</span>"}}
		for i, q := range s.Probes {
			k := fmt.Sprintf("probes.%d.", i)
			kk := f.null(k + "k")
			if q.K != nil {
				kk = f.num(k+"k", *q.K, fixed(4))
			}
			pt.Rows = append(pt.Rows, trow{Label: f.str(k+"name", q.Name), Cells: []template.HTML{
				f.point(k+"at", q.At), f.num(k+"u", q.U, sig(4).floor(f.speedFloor)), f.num(k+"v", q.V, sig(4).floor(f.speedFloor)),
				f.num(k+"speed", q.Speed, sig(4)), f.num(k+"cp", q.Cp, fixed(4)), f.num(k+"pressure", q.Pressure, f.pressure()),
				f.num(k+"delta_p", q.DeltaP, f.pressure()), kk}})
		}
		p.Probes = pt
	}

	if c := s.Cavitation; c != nil {
		ct := &table{Class: "q", Caption: "Cavitation", Head: []template.HTML{"", "unit", "value"}}
		ct.Rows = append(ct.Rows,
			trow{Label: "Cavitation number σ = (p<sub>in</sub> − p<sub>v</sub>)/(½ρU²)", Unit: "–", Cells: []template.HTML{f.num("cavitation.sigma", c.Sigma, sig(4))}},
			trow{Label: "Lowest C<sub>p</sub> on any wall or body", Unit: "–", Cells: []template.HTML{f.num("cavitation.min_cp", c.MinCp, fixed(4))}},
			trow{Label: "&emsp;on", Cells: []template.HTML{f.str("cavitation.min_cp_on", c.MinCpOn)}},
			trow{Label: "&emsp;at x, y", Unit: "m", Cells: []template.HTML{f.point("cavitation.min_cp_at", c.MinCpAt)}},
			trow{Label: "Margin σ + C<sub>p,min</sub>", Unit: "–", Cells: []template.HTML{f.num("cavitation.margin", c.Margin, sig(4))}, Alert: c.Margin < 0},
		)
		p.Cavitation = ct
		p.CavitationAlert = c.Margin < 0
		if c.Margin < 0 {
			p.CavitationVerdict = "The margin is negative: ideal flow predicts that the local pressure falls below the vapour pressure."
		} else {
			p.CavitationVerdict = "The margin is positive: ideal flow keeps the pressure above the vapour pressure everywhere. Real inception can come earlier (turbulent pressure fluctuations, dissolved gas, roughness)."
		}
	}
}

// errorBandsTable is the table of grid-error bands that run --with-error adds to the summary:
// each key number on this grid, its Richardson extrapolation and its band (the Grid Convergence
// Index), from the run's grid and two coarser ones. Rows without an honest band are marked, and
// their reasons listed below the table. Nil when the run has no bands.
func errorBandsTable(f *formatter) (*table, []template.HTML, template.HTML) {
	e := f.s.ErrorBands
	if e == nil {
		return nil, nil, ""
	}
	t := &table{Class: "list", Caption: "Grid-error bands", Head: []template.HTML{"quantity", "unit",
		"this grid", "extrapolated", "band ±", "band<br><span class=\"unit\">%</span>", "observed order", "status"}}
	var notes []template.HTML
	for i, q := range e.Quantities {
		k := fmt.Sprintf("error_bands.quantities.%d.", i)
		opt := func(key string, v *float64, nf numFormat) template.HTML {
			if v == nil {
				return f.null(k + key)
			}
			return f.num(k+key, *v, nf)
		}
		var value template.HTML
		if len(q.Values) > 0 {
			if v := q.Values[0]; math.IsNaN(v) || math.IsInf(v, 0) {
				value = f.null(k + "values.0")
			} else {
				value = f.num(k+"values.0", v, sig(5))
			}
		}
		t.Rows = append(t.Rows, trow{Label: f.str(k+"name", q.Name), Alert: !q.Trusted(), Cells: []template.HTML{
			unitCell(f, k+"unit", q.Unit), value, opt("extrapolated", q.Extrapolated, sig(5)), opt("band", q.Band, sig(2)),
			opt("gci_fine", q.GCIFine, numFormat{kind: 'g', prec: 2, scale: 100}), opt("observed_order", q.ObservedOrder, sig(3)),
			f.str(k+"status", q.Status)}})
		if q.Note != "" {
			notes = append(notes, f.str(k+"name", q.Name)+": "+f.str(k+"note", q.Note))
		}
	}
	var hs []string
	for i, h := range e.Spacings {
		hs = append(hs, string(f.num(fmt.Sprintf("error_bands.spacings.%d", i), h, sig(4).trimmed())))
	}
	lead := "From grids of spacing " + template.HTML(strings.Join(hs, ", ")) + " m (refinement ratio " +
		f.num("error_bands.ratio", e.Ratio, sig(3).trimmed()) + "): the grid-independent value is expected within this grid’s value ± the band. How the bands are found is under Method."
	return t, notes, lead
}

// unitCell prints a unit, or a dash for a pure number.
func unitCell(f *formatter, key, unit string) template.HTML {
	if unit == "" {
		return "–"
	}
	return f.str(key, unit)
}

// reproduce fills the last section: the version, the command and the scenario file.
func (p *page) reproduce(f *formatter, sc *scenario.Scenario) {
	file := filepath.Base(sc.Path)
	if sc.Path == "" {
		file = f.s.Name + ".toml"
	}
	p.File = f.str("scenario.file", file)
	p.Command = "phipsi run " + f.str("scenario.file", file) +
		" --spacing " + f.num("grid.spacing", f.s.Grid.Spacing, roundTrip()) +
		" --method " + f.str("scenario.solver.method", sc.Solver.Method) +
		" --tolerance " + f.num("scenario.solver.tolerance", sc.Solver.Tolerance, roundTrip())
	p.Source = string(sc.Source)
	for i, o := range sc.Obstacles {
		if o.PointsFile == "" {
			continue
		}
		var b strings.Builder
		b.WriteString("x,y\n")
		for _, q := range o.Points {
			b.WriteString(num(q[0]) + "," + num(q[1]) + "\n")
		}
		p.Points = append(p.Points, pointsFile{Name: f.str(fmt.Sprintf("scenario.obstacle.%d.points_file", i), o.PointsFile), Rows: b.String()})
	}
}

// figureText returns the heading and caption of a figure by its name.
func figureText(name string, s *Summary) (heading, caption template.HTML) {
	switch name {
	case "streamlines":
		return "Streamlines", "Lines of constant stream function at equal steps of the flow rate, over a faint shading of speed. Each body’s dividing streamline is drawn heavier; lines crowd where the flow is fast."
	case "speed":
		return "Speed", "Speed relative to the mean inlet speed, |V|/U, with streamlines on top. The colour bar gives the same values in m/s above it."
	case "pressure":
		return "Pressure coefficient", "C<sub>p</sub> = (p − p<sub>in</sub>)/(½ρU²) with labelled contours: blue is suction (C<sub>p</sub> below zero), orange overpressure. The colour bar gives the pressure in Pa above it."
	case "flownet":
		return "Flow net", "Streamlines and equipotentials (lines of constant velocity potential) at equal increments. The two are solved separately; where the cells of the net are near-square they agree (Cauchy–Riemann), and distorted cells mark a local error."
	case "walls":
		return "Pressure along the walls", "C<sub>p</sub> along the lower (dashed) and upper (solid) wall against x, negative upward; broad bands mark the adverse stretches. The passage is drawn below on the same scale, with the bodies’ extents shaded."
	}
	if body, ok := strings.CutPrefix(name, "surface-"); ok {
		for i, o := range s.Obstacles {
			if o.Name == body {
				k := fmt.Sprintf("obstacles.%d.name", i)
				n := keyed(k, template.HTMLEscapeString(body))
				return "Pressure around " + n, "C<sub>p</sub> around body " + n + ", negative upward: stagnation points as open circles, the lowest C<sub>p</sub> as a dot; the thumbnail shows which side is which."
			}
		}
	}
	return template.HTML(template.HTMLEscapeString(name)), ""
}

func altText(name string) string {
	switch name {
	case "streamlines", "speed", "pressure", "flownet":
		return "Field picture: " + name
	case "walls":
		return "Chart: pressure coefficient along the walls"
	}
	if body, ok := strings.CutPrefix(name, "surface-"); ok {
		return "Chart: pressure coefficient around " + body
	}
	return name
}

// minCellsAcross is the resolution below which NewSummary warns that a body's peak speed is not
// to be trusted; the page marks the row.
const minCellsAcross = 20

// keyed wraps already-escaped text in a span that names the summary key it shows.
func keyed(key, html string) template.HTML {
	return template.HTML(`<span class="v" data-key="` + template.HTMLEscapeString(key) + `">` + html + `</span>`)
}

// formatter prints the summary's numbers, each marked with its key. A value smaller than
// roundOff times the run's own scale of its kind (Q for circulation, ½ρU²·H for forces, U for
// speeds, ½ρU² for pressures, H for lengths, H the inlet height) prints as 0, so that the lift
// of a symmetric body, a few millionths of a newton per metre left by the solver's tolerance, is
// not printed as if it meant something.
type formatter struct {
	s                                                             *Summary
	circFloor, forceFloor, speedFloor, pressureFloor, lengthFloor float64
}

// roundOff is the relative size below which a printed value is taken as zero: the linear solves
// stop at relative residuals near 1e-10, and the conditioning of the ψ problem can amplify that
// by a few orders of magnitude, so anything under a ten-millionth of the scale is noise.
const roundOff = 1e-7

func newFormatter(s *Summary) *formatter {
	u, q, qd := s.Flow.InletSpeed, s.Flow.Rate, s.Flow.DynamicPressure
	h := 0.0
	if u > 0 {
		h = q / u
	}
	return &formatter{s: s, circFloor: roundOff * q, forceFloor: roundOff * qd * h,
		speedFloor: roundOff * u, pressureFloor: roundOff * qd, lengthFloor: roundOff * h}
}

// numFormat says how a number is printed.
type numFormat struct {
	kind  byte // 'g' significant digits, 'f' fixed decimals, 'd' integer, 'e' scientific, 'r' round trip
	prec  int
	scale float64 // printed value = scale × value; 0 means 1
	plus  bool    // print a + before positive values
	zero  float64 // |value| below this prints as 0
	trim  bool    // drop trailing zeros after the decimal point (inputs and positions)
}

func sig(n int) numFormat           { return numFormat{kind: 'g', prec: n} }
func fixed(d int) numFormat         { return numFormat{kind: 'f', prec: d} }
func integer() numFormat            { return numFormat{kind: 'd'} }
func sci(n int) numFormat           { return numFormat{kind: 'e', prec: n} }
func roundTrip() numFormat          { return numFormat{kind: 'r'} }
func percent(d int) numFormat       { return numFormat{kind: 'f', prec: d, scale: 100} }
func signedPercent(d int) numFormat { return numFormat{kind: 'f', prec: d, scale: 100, plus: true} }

func (nf numFormat) floor(z float64) numFormat { nf.zero = z; return nf }

// trimmed drops trailing zeros: for values that are exact (inputs) or are places, where 2.5 reads
// better than 2.500.
func (nf numFormat) trimmed() numFormat { nf.trim = true; return nf }

// exact prints an input value as given (up to six significant digits).
func exact() numFormat { return sig(6).trimmed() }

// num prints v, the summary (or scenario) value at key, as nf says.
func (f *formatter) num(key string, v float64, nf numFormat) template.HTML {
	attr := ""
	if nf.scale != 0 && nf.scale != 1 {
		attr = ` data-scale="` + num(nf.scale) + `"`
	}
	return template.HTML(`<span class="v" data-key="` + template.HTMLEscapeString(key) + `"` + attr + `>` + formatNumber(v, nf) + `</span>`)
}

// point prints an [x, y] pair.
func (f *formatter) point(key string, p Point) template.HTML {
	nf := sig(4).trimmed().floor(f.lengthFloor)
	return f.num(key+".0", p[0], nf) + ", " + f.num(key+".1", p[1], nf)
}

// pressure is the format of pressures: to the resolution C<sub>p</sub> is printed with (four
// decimals of the dynamic pressure), so that a pressure and its C<sub>p</sub> say as much.
func (f *formatter) pressure() numFormat {
	d := 0
	if q := f.s.Flow.DynamicPressure; q > 0 {
		d = min(9, max(0, int(math.Ceil(-math.Log10(q*1e-4)-1e-9))))
	}
	return fixed(d)
}

// null prints the dash that stands for a JSON null.
func (f *formatter) null(key string) template.HTML { return keyed(key, "—") }

// str prints a string of the summary (or scenario).
func (f *formatter) str(key, s string) template.HTML { return keyed(key, template.HTMLEscapeString(s)) }

// formatNumber formats v for the page: a true minus sign, thin spaces between groups of three
// digits in long integer parts, and powers of ten as ×10 with a superscript exponent instead of
// e-notation. The round-trip form is left as strconv writes it, for pasting into a command.
func formatNumber(v float64, nf numFormat) string {
	if nf.scale != 0 {
		v *= nf.scale
	}
	if math.Abs(v) < nf.zero {
		v = 0
	}
	var s, exp string
	switch nf.kind {
	case 'r':
		return strconv.FormatFloat(v, 'g', -1, 64)
	case 'd':
		s = strconv.FormatFloat(math.Round(v), 'f', 0, 64)
	case 'f':
		s = strconv.FormatFloat(v, 'f', nf.prec, 64)
	case 'e':
		s, exp = splitExp(strconv.FormatFloat(v, 'e', nf.prec-1, 64))
		if v == 0 {
			s, exp = "0", ""
		}
	case 'g':
		if v == 0 {
			s = "0"
			break
		}
		_, e := splitExp(strconv.FormatFloat(v, 'e', nf.prec-1, 64))
		n, _ := strconv.Atoi(e)
		if n < -4 || n > 9 {
			s, exp = splitExp(strconv.FormatFloat(v, 'e', nf.prec-1, 64))
			break
		}
		s = strconv.FormatFloat(v, 'f', max(0, nf.prec-1-n), 64)
	default:
		panic("report: unknown number format " + string(nf.kind))
	}
	if nf.trim && strings.Contains(s, ".") {
		s = strings.TrimSuffix(strings.TrimRight(s, "0"), ".")
	}
	neg := strings.HasPrefix(s, "-")
	s = strings.TrimPrefix(s, "-")
	if strings.Trim(s, "0.") == "" {
		neg = false // never print −0
	}
	s = groupDigits(s)
	switch {
	case neg:
		s = "−" + s
	case nf.plus && strings.Trim(s, "0.") != "":
		s = "+" + s
	}
	if exp != "" {
		s += " × 10<sup>" + strings.Replace(exp, "-", "−", 1) + "</sup>"
	}
	return s
}

// splitExp splits strconv's e-notation into the mantissa and the exponent without a + sign or
// leading zeros.
func splitExp(s string) (mant, exp string) {
	mant, exp, _ = strings.Cut(s, "e")
	neg := strings.HasPrefix(exp, "-")
	exp = strings.TrimLeft(strings.TrimLeft(exp, "+-"), "0")
	if exp == "" {
		exp = "0"
	}
	if neg {
		exp = "-" + exp
	}
	return mant, exp
}

// groupDigits puts a narrow no-break space between groups of three digits of an integer part
// of five digits or more (as SI does), leaving four-digit numbers whole.
func groupDigits(s string) string {
	ip, frac, hasFrac := strings.Cut(s, ".")
	if len(ip) >= 5 {
		var b strings.Builder
		for i, c := range ip {
			if i > 0 && (len(ip)-i)%3 == 0 {
				b.WriteString("\u202f")
			}
			b.WriteRune(c)
		}
		ip = b.String()
	}
	if hasFrac {
		return ip + "." + frac
	}
	return ip
}

// sketch draws the passage to scale as inline SVG: the walls hatched, the bodies grey, the
// probes as open circles, with the bodies' and probes' names.
func sketch(g *mesh.Geometry, s *Summary) template.HTML {
	const (
		width = 1000.0 // viewBox width
		// The page shows the sketch at most shownWidth CSS pixels wide and shownHeight high
		// (page.css: the main column and figure.sketch svg's max-height).
		shownWidth, shownHeight = 960.0, 330.0
	)
	lo, _ := g.Lower.Extent()
	_, hi := g.Upper.Extent()
	if !(g.Length > 0) || !(hi > lo) {
		return ""
	}
	// k is user units per displayed pixel, so that text, lines and marks keep their size on
	// screen when a tall passage is shown narrower than the column.
	k := 1.0
	for range 3 { // the height depends on k through the margins: a few rounds settle it
		scale := (width - 2*16*k) / g.Length
		height := (hi-lo)*scale + 2*(22+16)*k
		k = width / math.Min(shownWidth, shownHeight*width/height)
	}
	padX, padY := 16*k, 22*k // room for labels beside, above and below
	scale := (width - 2*padX) / g.Length
	band := math.Max(8*k, math.Min(20*k, 0.08*(hi-lo)*scale)) // wall thickness drawn
	top := padY + band
	height := top + (hi-lo)*scale + band + padY
	X := func(x float64) float64 { return padX + x*scale }
	Y := func(y float64) float64 { return top + (hi-y)*scale }
	px := func(v float64) float64 { return v * k } // a length in displayed pixels
	var b strings.Builder
	fmt.Fprintf(&b, `<svg class="sketch" viewBox="0 0 %.0f %.1f" font-size="%.1f" role="img" aria-label="Plan of the passage to scale" xmlns="http://www.w3.org/2000/svg">`,
		width, height, px(13))
	fmt.Fprintf(&b, `<defs><pattern id="hatch" width="%[1]g" height="%[1]g" patternUnits="userSpaceOnUse" patternTransform="rotate(45)">`+
		`<rect width="%[1]g" height="%[1]g" fill="#e6e2d8"/><line x1="0" y1="0" x2="0" y2="%[1]g" stroke="#8f8778" stroke-width="%.2[2]f"/></pattern>`+
		`<marker id="arrow" viewBox="0 0 10 10" refX="9" refY="5" markerWidth="7" markerHeight="7" orient="auto">`+
		`<path d="M0,0 L10,5 L0,10 z" fill="#2f4b6e"/></marker></defs>`, math.Round(px(7)*10)/10, px(1.6))
	ds := g.Length / 1500
	for _, w := range []*mesh.Wall{g.Lower, g.Upper} {
		// From the wall's first point (the fluid side of a step at the inlet) to its last.
		lo0, hi0 := w.Range(w.X0())
		y0 := hi0
		if w.Upper {
			y0 = lo0
		}
		line := []mesh.Point{{X: w.X0(), Y: y0}}
		for _, q := range w.Sample(ds) {
			line = append(line, q.P)
		}
		line = append(line, mesh.Point{X: w.X1(), Y: w.Y(w.X1())})
		edge := hi + band/scale
		if !w.Upper {
			edge = lo - band/scale
		}
		var pts strings.Builder
		for _, q := range line {
			fmt.Fprintf(&pts, "%.1f,%.1f ", X(q.X), Y(q.Y))
		}
		fmt.Fprintf(&b, `<polygon points="%s%.1f,%.1f %.1f,%.1f" fill="url(#hatch)" stroke="none"/>`,
			pts.String(), X(line[len(line)-1].X), Y(edge), X(line[0].X), Y(edge))
		fmt.Fprintf(&b, `<polyline points="%s" fill="none" stroke="#1f2328" stroke-width="%.2f"/>`, strings.TrimSpace(pts.String()), px(1.6))
	}
	// Inlet and outlet: thin dashed lines closing the passage; and the arrow of the stream.
	for _, x := range []float64{0, g.Length} {
		fmt.Fprintf(&b, `<line x1="%.1f" y1="%.1f" x2="%.1f" y2="%.1f" stroke="#5b6470" stroke-width="%.2f" stroke-dasharray="%.1f %.1f"/>`,
			X(x), Y(g.Lower.Y(x)), X(x), Y(g.Upper.Y(x)), px(1), px(4), px(3))
	}
	yMid := 0.5 * (g.Lower.Y(0) + g.Upper.Y(0))
	arrow := math.Min(px(60), 0.4*g.Length*scale)
	fmt.Fprintf(&b, `<line x1="%.1f" y1="%.1f" x2="%.1f" y2="%.1f" stroke="#2f4b6e" stroke-width="%.2f" marker-end="url(#arrow)"/>`,
		X(0)+px(6), Y(yMid), X(0)+px(6)+arrow, Y(yMid), px(2))
	fmt.Fprintf(&b, `<text x="%.1f" y="%.1f" class="lbl">U</text>`, X(0)+px(6)+arrow/2, Y(yMid)-px(6))
	for _, body := range g.Bodies {
		var pts strings.Builder
		if poly, ok := body.Shape.(*mesh.Polygon); ok {
			for _, q := range poly.Pts {
				fmt.Fprintf(&pts, "%.2f,%.2f ", X(q.X), Y(q.Y))
			}
		} else {
			for _, q := range body.Shape.Sample(ds) {
				fmt.Fprintf(&pts, "%.2f,%.2f ", X(q.P.X), Y(q.P.Y))
			}
		}
		fmt.Fprintf(&b, `<polygon points="%s" fill="#9aa0a8" stroke="#1f2328" stroke-width="%.2f" stroke-linejoin="round"/>`,
			strings.TrimSpace(pts.String()), px(1.2))
		key := ""
		for i, o := range s.Obstacles {
			if o.Name == body.Name {
				key = fmt.Sprintf("obstacles.%d.name", i)
			}
		}
		if key == "" {
			continue
		}
		// The name goes above the body, or below it when the upper wall is too close.
		box := body.Shape.Bounds()
		cx := 0.5 * (box.Min.X + box.Max.X)
		ly, base := Y(box.Max.Y)-px(5), "auto"
		if Y(box.Max.Y)-Y(g.Upper.Y(cx)) < px(16) {
			ly, base = Y(box.Min.Y)+px(5), "hanging"
		}
		fmt.Fprintf(&b, `<text x="%.1f" y="%.1f" text-anchor="middle" dominant-baseline="%s" class="lbl v" data-key="%s">%s</text>`,
			X(cx), ly, base, key, template.HTMLEscapeString(body.Name))
	}
	for i, q := range s.Probes {
		x, y := X(q.At[0]), Y(q.At[1])
		fmt.Fprintf(&b, `<circle cx="%.1f" cy="%.1f" r="%.1f" fill="#fff" stroke="#b0441c" stroke-width="%.2f"/>`, x, y, px(4), px(1.8))
		// The name to the right of the marker (to the left near the outlet), above it (below it
		// near the upper wall).
		anchor, dx := "start", px(7)
		if x > 0.8*width {
			anchor, dx = "end", -px(7)
		}
		ty, base := y-px(6), "auto"
		if y-Y(g.Upper.Y(q.At[0])) < px(18) {
			ty, base = y+px(6), "hanging"
		}
		fmt.Fprintf(&b, `<text x="%.1f" y="%.1f" text-anchor="%s" dominant-baseline="%s" class="lbl probe v" data-key="probes.%d.name">%s</text>`,
			x+dx, ty, anchor, base, i, template.HTMLEscapeString(q.Name))
	}
	b.WriteString(`</svg>`)
	return template.HTML(b.String())
}
