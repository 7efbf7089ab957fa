package render

import (
	"bytes"
	"errors"
	"fmt"
	"image"
	"image/png"
	"runtime"
	"slices"
	"strings"
	"sync"

	"phipsi/mesh"
	"phipsi/solver/flow"
)

// Image names accepted in Options.Images, in the order Render returns them.
const (
	Streamlines = "streamlines"
	Speed       = "speed"
	Pressure    = "pressure"
	Flownet     = "flownet"
	Walls       = "walls"
	Surfaces    = "surfaces" // one image per body, named "surface-<body>"
)

// Names returns the image names Options.Images accepts, in the order Render returns them.
func Names() []string { return []string{Streamlines, Speed, Pressure, Flownet, Walls, Surfaces} }

// Width limits and default, pixels.
const (
	DefaultWidth = 1600
	MinWidth     = 200
	MaxWidth     = 8000
)

// Options says which images to draw and how large. The zero value draws every image
// DefaultWidth pixels wide without a title.
type Options struct {
	// Width is the width of every image in pixels; 0 means DefaultWidth. The height of a field
	// picture follows from the domain's aspect (equal x and y scales).
	Width int
	// Title is the scenario title printed at the top of every image.
	Title string
	// Images names the images to draw (see Names); nil means all of them. "flownet" is skipped
	// when no potential is given, "surfaces" when there are no bodies.
	Images []string
}

// Image is one rendered picture.
type Image struct {
	Name string // file name without ".png": "streamlines", "walls", "surface-pier", …
	PNG  []byte
}

// ErrUnknownImage is returned for an image name Render does not know.
var ErrUnknownImage = errors.New("render: unknown image")

// Render draws the images o asks for from the result r and, for the flow net, the velocity
// potential phi (one value per node, flat row-major like r.Sol.Psi; nil skips the flow net).
// Images come back in the order of Names, surfaces in body order. The images are drawn
// concurrently; the output does not depend on the scheduling.
func Render(r *flow.Result, phi []float64, o Options) ([]Image, error) {
	if r == nil || r.Sol == nil || r.Sol.Sys == nil || r.Sol.Sys.Mesh == nil || r.Field == nil {
		return nil, fmt.Errorf("render: the result has no solution, mesh or field")
	}
	m := r.Sol.Sys.Mesh
	n := m.Grid.Len()
	if len(r.Sol.Psi) != n {
		return nil, fmt.Errorf("render: ψ has %d values for %d nodes", len(r.Sol.Psi), n)
	}
	if phi != nil && len(phi) != n {
		return nil, fmt.Errorf("render: φ has %d values for %d nodes", len(phi), n)
	}
	if len(r.Surfaces) != m.NumBoundaries() {
		return nil, fmt.Errorf("render: %d surface distributions for %d boundaries", len(r.Surfaces), m.NumBoundaries())
	}
	if !(r.Speed > 0) || !(r.Q > 0) {
		return nil, fmt.Errorf("render: reference speed and flow rate must be > 0, got %g and %g", r.Speed, r.Q)
	}
	w := o.Width
	if w == 0 {
		w = DefaultWidth
	}
	if w < MinWidth || w > MaxWidth {
		return nil, fmt.Errorf("render: width must be in [%d, %d] pixels, got %d", MinWidth, MaxWidth, w)
	}
	want := o.Images
	if want == nil {
		want = Names()
	}
	for _, name := range want {
		if !slices.Contains(Names(), name) {
			return nil, fmt.Errorf("%w %q (allowed: %s)", ErrUnknownImage, name, strings.Join(Names(), ", "))
		}
	}
	if err := parseFonts(); err != nil {
		return nil, err
	}
	sc := newScene(r, phi, w, o.Title)

	type job struct {
		name string
		draw func() *image.RGBA
		cost int // rough relative cost, to start the longest first
	}
	var jobs []job
	for _, name := range Names() {
		if !slices.Contains(want, name) {
			continue
		}
		switch name {
		case Streamlines:
			jobs = append(jobs, job{name, sc.streamlines, 2})
		case Speed:
			jobs = append(jobs, job{name, sc.speed, 2})
		case Pressure:
			jobs = append(jobs, job{name, sc.pressure, 3})
		case Flownet:
			if phi != nil {
				jobs = append(jobs, job{name, sc.flownet, 4})
			}
		case Walls:
			jobs = append(jobs, job{name, sc.walls, 1})
		case Surfaces:
			for k := range m.Geom.Bodies {
				jobs = append(jobs, job{"surface-" + m.Geom.Bodies[k].Name, func() *image.RGBA { return sc.surface(k) }, 1})
			}
		}
	}
	out := make([]Image, len(jobs))
	errs := make([]error, len(jobs))
	order := make([]int, len(jobs))
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int { return jobs[b].cost - jobs[a].cost })
	var wg sync.WaitGroup
	sem := make(chan struct{}, runtime.GOMAXPROCS(0))
	for _, i := range order {
		jb := jobs[i]
		wg.Add(1)
		sem <- struct{}{}
		go func() {
			defer wg.Done()
			defer func() { <-sem }()
			img := jb.draw()
			var buf bytes.Buffer
			enc := png.Encoder{CompressionLevel: png.BestSpeed}
			if err := enc.Encode(&buf, img); err != nil {
				errs[i] = fmt.Errorf("render: %s: %w", jb.name, err)
				return
			}
			out[i] = Image{Name: jb.name, PNG: buf.Bytes()}
		}()
	}
	wg.Wait()
	if err := errors.Join(errs...); err != nil {
		return nil, err
	}
	return out, nil
}

// boundaryPsi returns the constant ψ of boundary id: 0 and Q on the walls, the solved constant
// on a body.
func boundaryPsi(r *flow.Result, id int) float64 {
	switch id {
	case mesh.LowerWall:
		return 0
	case mesh.UpperWall:
		return r.Q
	}
	return r.Sol.BodyPsi[id-2]
}
