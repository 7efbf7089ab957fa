package flow

import (
	"math"

	"phipsi/mesh"
	"phipsi/solver"
)

// gradient returns ∇ψ at p from the harmonic fit of solver.HarmonicStencil; with constrained the
// fit passes through the boundary value. ok is false when too few nodes can see p.
func gradient(m *mesh.Mesh, psi []float64, p, eye mesh.Point, constrained bool, value float64) (gx, gy float64, ok bool) {
	st, ok := solver.HarmonicStencil(m, p, eye, constrained)
	if !ok {
		return 0, 0, false
	}
	gx, gy = st.Gradient(psi, value)
	if math.IsNaN(gx) || math.IsNaN(gy) || math.IsInf(gx, 0) || math.IsInf(gy, 0) {
		return 0, 0, false
	}
	return gx, gy, true
}
