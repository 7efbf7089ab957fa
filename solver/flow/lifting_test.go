package flow

import (
	"math"
	"testing"

	"phipsi/bc"
	"phipsi/mesh"
)

// TestNACA2412Band: NACA 2412 at 4° in a channel six chords high, Kutta condition. Thin-airfoil
// theory gives C_L = 2π(α − α_L0) with α_L0 = −2.077° (Anderson, Fundamentals of Aerodynamics
// §4.8; Abbott & von Doenhoff, Theory of Wing Sections): 0.6664. Thickness raises the exact
// inviscid value (by about 1 + 0.77 t/c, from memory) and the walls change it by about a per
// cent, so the sanity band is −5 % / +15 %.
func TestNACA2412Band(t *testing.T) {
	alpha := 4 * math.Pi / 180
	foil, err := mesh.NACA4("2412", 1, mesh.Point{X: 5.5, Y: 3}, alpha, 400)
	if err != nil {
		t.Fatal(err)
	}
	geo := channel(t, 12, 0, 6, mesh.Body{Name: "foil", Shape: foil})
	r := run(t, geo, 1.0/80, []bc.Body{{Kutta: true}}, nil)
	b := r.Body(0)
	thin := 2 * math.Pi * (alpha + 2.077*math.Pi/180)
	clGamma := -2 * b.Circulation // C_L = ρUΓ_cw/(½ρU²c) with U = c = 1
	clPressure := b.Force[1] / r.Q2()
	t.Logf("C_L from Γ %.4f, from pressure %.4f, thin-airfoil %.4f (ratio %.3f)", clGamma, clPressure, thin, clGamma/thin)
	if ratio := clGamma / thin; ratio < 0.95 || ratio > 1.15 {
		t.Errorf("C_L = %.4f is %.3f × the thin-airfoil %.4f, want within −5 %% / +15 %%", clGamma, ratio, thin)
	}
	// Pressure lift and −ρUΓ agree to a few per cent in a channel six chords high (walls).
	if rel := math.Abs(clPressure/clGamma - 1); rel > 0.03 {
		t.Errorf("pressure lift %.4f and Kutta–Joukowski lift %.4f differ by %.2f %%", clPressure, clGamma, 100*rel)
	}
}

// TestTwoCylindersSymmetric: two equal cylinders placed symmetrically about the centreline of a
// channel feel equal and opposite side forces, carry no net circulation, and their stream
// functions are mirror images (ψ₁ + ψ₂ = Q): the flow is symmetric about the centreline.
func TestTwoCylindersSymmetric(t *testing.T) {
	geo := channel(t, 6, 0, 2,
		mesh.Body{Name: "low", Shape: mesh.NewCircle(mesh.Point{X: 3, Y: 0.7}, 0.2)},
		mesh.Body{Name: "high", Shape: mesh.NewCircle(mesh.Point{X: 3, Y: 1.3}, 0.2)})
	r := run(t, geo, 0.4/40, nil, nil)
	lo, hi := r.Body(0), r.Body(1)
	scale := r.Q2() * 0.4 // force scale q·d
	if d := math.Abs(lo.Force[1]+hi.Force[1]) / scale; d > 1e-3 {
		t.Errorf("side forces %.5g and %.5g N/m are not equal and opposite (sum %.2e q·d)", lo.Force[1], hi.Force[1], d)
	}
	// The 0.2 m gap between them is narrower than the 0.5 m gaps to the walls, so it runs faster
	// and (Bernoulli) the cylinders are drawn together.
	if lo.Force[1] <= 0 || hi.Force[1] >= 0 {
		t.Errorf("side forces %.4g (lower) and %.4g (upper): want the cylinders drawn together", lo.Force[1], hi.Force[1])
	}
	if g := math.Abs(lo.Circulation + hi.Circulation); g > 1e-9 {
		t.Errorf("total circulation %.3g, want 0", g)
	}
	if d := math.Abs(lo.Psi + hi.Psi - r.Q); d > 1e-6*r.Q {
		t.Errorf("ψ constants %.8f and %.8f do not mirror about Q/2 = %.4f", lo.Psi, hi.Psi, r.Q/2)
	}
}
