// Package mesh builds the structured grid that phipsi solves on and the exact geometry that cuts it.
//
// A Grid is a uniform node lattice: node (i, j) sits at (X0 + i·H, Y0 + j·H) and has the flat
// index j·NX + i. Geometry is a channel (a lower and an upper Wall, each a profile y(x) made of
// straight or monotone-cubic runs, with vertical steps where an x repeats) and zero or more Bodies,
// each a closed Shape: Ellipse (and circles), Polygon (also NACA 4-digit sections and any
// points file) or RoundedRect.
//
// Build classifies every node as Fluid, Solid (inside a body), Outside (beyond a wall) or Pinned
// (a fluid node that lies within ThetaMin·H of a boundary and is given that boundary's value), and
// records for every fluid node whose grid links meet a boundary the exact fraction θ of H from the
// node to the nearest crossing (its "arm") and which boundary it meets. Crossings are computed
// analytically for ellipses and circular arcs and by segment–line intersection for polygons and
// wall segments; monotone-cubic wall runs are solved for y(x) = y₀ by bisection to round-off.
// A link that crosses a thin body is cut from both ends even when both ends are fluid.
//
// The package knows no physics. Boundary numbering: 0 is the lower wall, 1 the upper wall, and
// 2+k is body k (see BodyID). Each boundary can be sampled at spacing ≤ ds (Mesh.Sample) into
// points with arc length, position, the unit normal pointing into the fluid and a quadrature
// weight, ordered by x along walls and counter-clockwise around bodies.
//
// Faces (NewFaces) gives the open fraction of every dual-cell face, computed exactly by
// intersecting each face with the boundaries, for the velocity potential's cut-face
// finite-volume form; a cell split by a body thinner than the grid gets one piece per side.
//
// Coarser grids of the same geometry (for multigrid) are built by calling Build again with
// Grid.Coarsen.
//
// References: Shortley & Weller, J. Appl. Phys. 9 (1938) for the use of the arms; NACA Report 460
// (Jacobs, Ward & Pinkerton, 1933) and Abbott & von Doenhoff, Theory of Wing Sections, eq. 6.2,
// for the 4-digit sections; Fritsch & Butland, SIAM J. Sci. Stat. Comput. 5 (1984) for the
// monotone cubic wall profiles.
package mesh
