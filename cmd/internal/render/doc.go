// Package render draws phipsi's images: the field pictures (streamlines, speed, pressure and
// the flow net) and the charts (pressure along the walls, pressure around each body), as PNG.
// It is the only package that draws; it imports github.com/fogleman/gg for anti-aliased lines
// and text, and compiles in the Go fonts (golang.org/x/image/font/gofont), so no system font
// is ever used.
//
// Use Render with a solved result, the velocity potential if there is one, and Options naming
// the images and their width. Field pictures keep equal x and y scales, so their height follows
// the domain's aspect.
//
// # Field pictures
//
// Each shows the channel in metres with ticks, the walls and bodies drawn solid from the exact
// geometry (not from grid nodes, so their outlines are smooth at any grid spacing), a colour bar
// with the map's own values below it and the dimensional values (m/s, Pa) above it, the title,
// and a caption with U, ρ, Q, the grid and the words "ideal flow: no viscous effects".
//
//   - streamlines: ψ every 5 % of the flow rate Q, each body's dividing streamline heavier, and
//     two finer pairs (±1 %, ±2.5 % of Q) close to each body, over a faded speed shading.
//   - speed: |V|/U in the sequential map, the 5 % streamlines in white on top.
//   - pressure: Cp in the diverging map, centred on Cp = 0 with a symmetric range, and labelled
//     contours at a round step (Cp = 0 heavier).
//   - flownet: streamlines and equipotentials at the same increment Δφ = Δψ, so the net's cells
//     are near-squares (the Cauchy–Riemann relations), over a faded speed shading.
//
// Shading interpolates bilinearly among the valid nodes of each grid cell only (the weights of
// nodes inside walls and bodies are dropped and the rest renormalised), so no value from inside
// material leaks into the picture. Contours come from marching squares on the node grid, joined
// into polylines; for ψ, a link that meets a boundary is interpolated up to the exact crossing,
// where ψ takes the boundary's constant, so streamlines meet walls and bodies where they are.
// For Cp and φ, values at nodes inside material are filled from their fluid neighbours and the
// solid drawing covers what lies beyond the wall; a cell across which φ jumps by far more than
// the fastest flow allows (the branch cut of a circulating potential) is left out.
//
// Colour scales are robust: the top 0.2 % of nodal speeds and the bottom 0.3 % of nodal Cp
// (corner singularities of ideal flow) may run past the ends of a bar, which then ends in a
// triangle.
//
// # Charts
//
//   - walls: Cp along the lower (dashed) and the upper (solid) wall against x, with the
//     Cp axis negative-up (the aerodynamic convention) and the pressure in Pa on the right; the
//     stretches where Cp rises downstream faster than 0.05 per inlet height (adverse gradient)
//     are marked with a broad band, and the channel is drawn below on the same x scale, with
//     the bodies' x extents shaded across the chart.
//   - surface-<body>: Cp around one body. A slender body (length ≥ 2.5 × thickness, lying along
//     the stream) is charted like a foil, upper and lower surfaces against x/chord, the trailing
//     edge at its sharpest corner (under 60°) when it has one; any other body against the
//     angle from its front stagnation point (positive over the upper side). The stagnation
//     points (open circles) and the minimum Cp (a dot) are marked, and a thumbnail of the body
//     shows the same marks and which side is which.
//
// # Colour maps
//
// Both maps are generated from straight lines in the Oklab space (see palette.go for the
// construction, the reasons and the sources): the sequential speed map runs from a deep slate
// blue to a pale straw with monotone lightness; the diverging pressure map has a warm near-white
// centre at Cp = 0, blue for suction and burnt orange for overpressure, equal lightness at equal
// distance either side. Both carry their hue change on the blue–yellow axis, which red–green
// colour-vision deficiencies keep. The 256-entry tables live in palette_table.go, checked
// against the generator by a test.
//
// Images are drawn concurrently, one goroutine per image up to GOMAXPROCS; the result does not
// depend on the scheduling. Golden-image tests under testdata/golden compare pixels within a
// tolerance; refresh them with `go test ./cmd/internal/render -run TestGolden -update`.
package render
