package solver

import (
	"fmt"
	"math"
)

// Grid convergence: Richardson extrapolation and the Grid Convergence Index.
//
// A quantity f computed on grids of spacing h1 < h2 < h3 (finest first) behaves, once the grids
// are fine enough, like f(h) = f_ext + C·h^p. Three values fix the three unknowns; the procedure
// is that of I. B. Celik, U. Ghia, P. J. Roache, C. J. Freitas, H. Coleman and P. E. Raad,
// "Procedure for estimation and reporting of uncertainty due to discretization in CFD
// applications", J. Fluids Eng. 130 (2008) 078001, which follows P. J. Roache, "Perspective: a
// method for uniform reporting of grid refinement studies", J. Fluids Eng. 116 (1994) 405–413:
//
//	r21 = h2/h1, r32 = h3/h2, ε21 = f2 − f1, ε32 = f3 − f2, s = sign(ε32/ε21)
//	p = |ln|ε32/ε21| + q(p)| / ln r21,  q(p) = ln((r21^p − s)/(r32^p − s))   (apparent order)
//	f_ext = (r21^p f1 − f2)/(r21^p − 1)                                       (extrapolated value)
//	e_a = |(f1 − f2)/f1|,  e_ext = |(f_ext − f1)/f_ext|                       (relative errors)
//	GCI_fine = Fs·e_a/(r21^p − 1), Fs = 1.25                                  (fine-grid index)
//
// With a constant ratio q = 0 and p follows at once; otherwise p is found by fixed-point
// iteration, as Celik et al. recommend.
//
// Two cautions the formulas do not carry themselves. The absolute value in p hides divergence:
// differences that grow as the grid is refined (|ε32| < |ε21| at a constant ratio) give the same
// p as differences that shrink, so a diverging sequence would get a tidy band. GCI therefore
// solves the model equation without the absolute value, r21^p (r32^p − 1)/(r21^p − 1) =
// |ε32/ε21|, whose left side rises monotonically from ln r32/ln r21 at p = 0: a ratio below that
// has a negative root, and the study is reported as diverging. And a band is only honest in the
// asymptotic range: oscillating differences (s < 0) and observed orders far from the scheme's
// (outside [0.5, 4] by default) are flagged rather than given a band.
//
// An observed order above the scheme's formal one is itself a sign that the coarse grid is not
// yet in the asymptotic range (it usually comes from a coarse value that happens to lie far
// off), and it narrows the band. With GCISettings.FormalOrder set, the band uses the smaller of
// the two orders: common practice for a conservative band, though not part of Celik et al.'s
// procedure. The extrapolation keeps the observed order, and so stays inside the band. The
// zero value computes the band exactly as Celik et al. print it.

// GCIStatus says what a grid-convergence study found and whether its band can be trusted.
type GCIStatus string

// Outcomes of GCI. Only GCIMonotone, GCIAssumedOrder and GCIUnchanged carry a band.
const (
	// GCIMonotone: monotone convergence with an observed order inside [MinOrder, MaxOrder].
	GCIMonotone GCIStatus = "monotone"
	// GCIAssumedOrder: two grids only, so the order is assumed (GCISettings.AssumedOrder) and
	// the safety factor is 3 (Roache 1994).
	GCIAssumedOrder GCIStatus = "assumed-order"
	// GCIUnchanged: all the values agree to within GCISettings.Noise; the grid error is below
	// that level and the band is zero.
	GCIUnchanged GCIStatus = "unchanged"
	// GCIOscillatory: the differences ε21 and ε32 have opposite signs.
	GCIOscillatory GCIStatus = "oscillatory"
	// GCIDiverging: the differences grow as the grid is refined (the model's order is ≤ 0).
	GCIDiverging GCIStatus = "diverging"
	// GCIOrderOutOfRange: monotone convergence, but at an observed order outside
	// [MinOrder, MaxOrder], so the grids are not in the asymptotic range of the scheme.
	GCIOrderOutOfRange GCIStatus = "order-out-of-range"
	// GCINotFinite: a value is NaN or infinite.
	GCINotFinite GCIStatus = "not-finite"
)

// Trusted reports whether a study with status s yields an error band worth reporting.
func (s GCIStatus) Trusted() bool {
	return s == GCIMonotone || s == GCIAssumedOrder || s == GCIUnchanged
}

// Defaults of GCISettings.
const (
	DefaultSafetyFactor         = 1.25 // three or more grids (Roache 1994; Celik et al. 2008)
	DefaultTwoGridSafetyFactor  = 3.0  // two grids, order assumed (Roache 1994)
	DefaultMinOrder             = 0.5
	DefaultMaxOrder             = 4.0
	DefaultAssumedOrder         = 2.0 // the formal order of phipsi's schemes
	defaultOrderIterations      = 100
	orderTolerance              = 1e-12
	defaultRelativeNoise        = 1e-12
	maxOrderSearch              = 64.0 // |p| beyond this is reported as infinite
	bisectionSteps              = 200
	minRefinementRatioTolerance = 1e-9
)

// GCISettings adjusts GCI. The zero value (or a nil pointer) means the documented defaults; GCI
// copies the settings and never writes to them.
type GCISettings struct {
	// SafetyFactor Fs multiplies the error estimate: 0 means 1.25 with three or more grids and
	// 3 with two.
	SafetyFactor float64
	// MinOrder and MaxOrder bound the observed orders whose band is trusted: 0 means 0.5 and 4.
	MinOrder, MaxOrder float64
	// AssumedOrder is the order used with only two grids: 0 means 2.
	AssumedOrder float64
	// FormalOrder, when > 0, caps the order the band is computed with (not the extrapolation):
	// the band uses min(p, FormalOrder). 0 means no cap.
	FormalOrder float64
	// Noise is the absolute size below which a difference between two grids counts as zero
	// (round-off and solver tolerance): 0 means 1e-12 times the largest |f|.
	Noise float64
	// MaxIterations bounds the fixed-point iterations for the order: 0 means 100. Bisection on
	// the (monotone) model equation takes over when they do not settle.
	MaxIterations int
}

// GCIResult is the outcome of a grid-convergence study of one quantity. Extrapolated,
// ApproxError, ExtrapolatedError, GCIFine and Band are the formulas' values whenever the order
// is finite; they are an honest estimate only when Status.Trusted() (callers should not report
// them otherwise). Quantities that cannot be computed are NaN.
type GCIResult struct {
	Status GCIStatus
	// R21 = h2/h1 and R32 = h3/h2 are the refinement ratios (R32 is NaN with two grids).
	R21, R32 float64
	// Order is the observed order p (the assumed order with two grids; negative when the
	// values diverge; NaN when it cannot be found; +Inf when the two finest grids agree but the
	// coarsest does not).
	Order float64
	// BandOrder is the order the band was computed with: Order, or GCISettings.FormalOrder
	// when that is set and smaller.
	BandOrder float64
	// Iterations is the number of fixed-point iterations spent on the order (0 when none
	// were needed), and Bisected says the iteration failed and bisection found it.
	Iterations int
	Bisected   bool
	// Extrapolated is Richardson's extrapolation to zero spacing, f_ext.
	Extrapolated float64
	// ApproxError is e_a = |(f1 − f2)/f1| and ExtrapolatedError e_ext = |(f_ext − f1)/f_ext|,
	// both relative (0.01 = 1 %).
	ApproxError, ExtrapolatedError float64
	// GCIFine is the relative band of the finest value, Fs·e_a/(r21^p − 1), and Band the same
	// in the quantity's units, Fs·|f1 − f2|/(r21^p − 1), both with p = BandOrder: the
	// grid-independent value lies in f1 ± Band (with the confidence the safety factor is meant
	// to give, about 95 %).
	GCIFine, Band float64
	// SafetyFactor is the Fs used.
	SafetyFactor float64
	// HalfRange is half the spread (max − min)/2 of the values over all grids: no GCI, but a
	// plain measure of how much they move, for studies without a trusted band.
	HalfRange float64
}

// GCI estimates the grid error of a quantity whose values f were computed on grids of spacing
// h, finest first (h strictly increasing). The three finest grids determine the order and the
// band; further grids do not enter the estimate. With two grids the order is assumed. It panics
// if h and f differ in length, hold fewer than two values, or h is not positive and strictly
// increasing.
func GCI(h, f []float64, s *GCISettings) GCIResult {
	if len(h) != len(f) {
		panic(fmt.Sprintf("solver: GCI: %d spacings for %d values", len(h), len(f)))
	}
	if len(h) < 2 {
		panic(fmt.Sprintf("solver: GCI: need at least two grids, got %d", len(h)))
	}
	for i, v := range h {
		if !(v > 0) || math.IsInf(v, 0) {
			panic(fmt.Sprintf("solver: GCI: spacing %d must be > 0 and finite, got %g", i, v))
		}
		if i > 0 && !(v > h[i-1]*(1+minRefinementRatioTolerance)) {
			panic(fmt.Sprintf("solver: GCI: spacings must increase (finest first), got h[%d] = %g after %g", i, v, h[i-1]))
		}
	}
	set := resolveGCI(s, len(h), f)
	res := GCIResult{R21: h[1] / h[0], R32: math.NaN(), Order: math.NaN(), BandOrder: math.NaN(), SafetyFactor: set.SafetyFactor}
	res.setNaN()
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, v := range f {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			res.Status = GCINotFinite
			res.HalfRange = math.NaN()
			return res
		}
		lo, hi = math.Min(lo, v), math.Max(hi, v)
	}
	res.HalfRange = (hi - lo) / 2
	f1, f2 := f[0], f[1]
	e21 := f2 - f1
	if len(h) == 2 {
		if math.Abs(e21) <= set.Noise {
			res.unchanged(f1)
			return res
		}
		res.Status = GCIAssumedOrder
		res.Order = set.AssumedOrder
		res.estimate(f1, f2, set.FormalOrder)
		return res
	}
	res.R32 = h[2] / h[1]
	e32 := f[2] - f2
	small21, small32 := math.Abs(e21) <= set.Noise, math.Abs(e32) <= set.Noise
	switch {
	case small21 && small32:
		res.unchanged(f1)
		return res
	case small21:
		// The two finest grids agree and the coarsest does not: no finite order fits.
		res.Status = GCIOrderOutOfRange
		res.Order = math.Inf(1)
		return res
	case small32:
		// The coarse pair agrees and the fine pair does not: the differences grow.
		res.Status = GCIDiverging
		res.Order = math.Inf(-1)
		return res
	}
	rho := math.Abs(e32 / e21)
	if e32/e21 < 0 {
		res.Status = GCIOscillatory
		res.Order, res.Iterations = fixedPointOrder(res.R21, res.R32, rho, -1, set.MaxIterations)
	} else {
		res.Order, res.Iterations, res.Bisected = monotoneOrder(res.R21, res.R32, rho, set.MaxIterations)
		switch {
		case !(res.Order > 0):
			res.Status = GCIDiverging
		case res.Order < set.MinOrder || res.Order > set.MaxOrder:
			res.Status = GCIOrderOutOfRange
		default:
			res.Status = GCIMonotone
		}
	}
	if res.Status != GCIDiverging && res.Order > 0 && !math.IsInf(res.Order, 0) {
		res.estimate(f1, f2, set.FormalOrder)
	}
	return res
}

func (r *GCIResult) setNaN() {
	nan := math.NaN()
	r.Extrapolated, r.ApproxError, r.ExtrapolatedError, r.GCIFine, r.Band = nan, nan, nan, nan, nan
}

func (r *GCIResult) unchanged(f1 float64) {
	r.Status = GCIUnchanged
	r.Extrapolated, r.ApproxError, r.ExtrapolatedError, r.GCIFine, r.Band = f1, 0, 0, 0, 0
}

// estimate fills in the extrapolation and the band from the order (Celik et al.'s formulas), the
// band with the order capped at formal when that is > 0.
func (r *GCIResult) estimate(f1, f2, formal float64) {
	rp := math.Pow(r.R21, r.Order)
	r.Extrapolated = (rp*f1 - f2) / (rp - 1)
	r.ApproxError = math.Abs((f1 - f2) / f1)
	r.ExtrapolatedError = math.Abs((r.Extrapolated - f1) / r.Extrapolated)
	r.BandOrder = r.Order
	if formal > 0 && formal < r.Order {
		r.BandOrder = formal
	}
	rb := math.Pow(r.R21, r.BandOrder)
	r.GCIFine = r.SafetyFactor * r.ApproxError / (rb - 1)
	r.Band = r.SafetyFactor * math.Abs(f1-f2) / (rb - 1)
}

// resolveGCI returns a copy of s with the defaults filled in; it panics on invalid values.
func resolveGCI(s *GCISettings, levels int, f []float64) GCISettings {
	var c GCISettings
	if s != nil {
		c = *s
	}
	bad := func(name string, v float64) {
		if v < 0 || math.IsNaN(v) || math.IsInf(v, 0) {
			panic(fmt.Sprintf("solver: GCI: GCISettings.%s must be >= 0 and finite, got %g", name, v))
		}
	}
	bad("SafetyFactor", c.SafetyFactor)
	bad("MinOrder", c.MinOrder)
	bad("MaxOrder", c.MaxOrder)
	bad("AssumedOrder", c.AssumedOrder)
	bad("FormalOrder", c.FormalOrder)
	bad("Noise", c.Noise)
	if c.MaxIterations < 0 {
		panic(fmt.Sprintf("solver: GCI: GCISettings.MaxIterations must be >= 0, got %d", c.MaxIterations))
	}
	if c.SafetyFactor == 0 {
		c.SafetyFactor = DefaultSafetyFactor
		if levels == 2 {
			c.SafetyFactor = DefaultTwoGridSafetyFactor
		}
	}
	if c.MinOrder == 0 {
		c.MinOrder = DefaultMinOrder
	}
	if c.MaxOrder == 0 {
		c.MaxOrder = DefaultMaxOrder
	}
	if c.MinOrder >= c.MaxOrder {
		panic(fmt.Sprintf("solver: GCI: GCISettings.MinOrder %g must be below MaxOrder %g", c.MinOrder, c.MaxOrder))
	}
	if c.AssumedOrder == 0 {
		c.AssumedOrder = DefaultAssumedOrder
	}
	if c.Noise == 0 {
		big := 0.0
		for _, v := range f {
			if !math.IsNaN(v) && !math.IsInf(v, 0) {
				big = math.Max(big, math.Abs(v))
			}
		}
		c.Noise = defaultRelativeNoise * big
	}
	if c.MaxIterations == 0 {
		c.MaxIterations = defaultOrderIterations
	}
	return c
}

// fixedPointOrder iterates Celik et al.'s equation for the order, p ← |ln ρ + q(p)|/ln r21 with
// q(p) = ln((r21^p − s)/(r32^p − s)), from the constant-ratio value |ln ρ|/ln r21. It returns
// NaN when the iteration leaves the domain of q or does not settle. (A start at p = 0, where q
// is 0/0, moves to p = 1.)
func fixedPointOrder(r21, r32, rho, s float64, maxIter int) (float64, int) {
	l21 := math.Log(r21)
	lr := math.Log(rho)
	p := math.Abs(lr) / l21
	if p < 1e-3 {
		p = 1 // q(0) is 0/0: start from first order instead
	}
	for it := 1; it <= maxIter; it++ {
		num, den := math.Pow(r21, p)-s, math.Pow(r32, p)-s
		if !(num > 0 && den > 0) {
			return math.NaN(), it
		}
		next := math.Abs(lr+math.Log(num/den)) / l21
		if math.IsNaN(next) || math.IsInf(next, 0) {
			return math.NaN(), it
		}
		if math.Abs(next-p) <= orderTolerance*math.Max(1, next) {
			return next, it
		}
		p = next
	}
	return math.NaN(), maxIter
}

// monotoneOrder returns the order p of monotone differences (ε32/ε21 = ρ > 0): the root of the
// model equation R(p) = r21^p (r32^p − 1)/(r21^p − 1) = ρ, which is negative when the
// differences grow. A positive root is found by Celik et al.'s fixed-point iteration, with
// bisection when that does not settle; a negative one by bisection.
func monotoneOrder(r21, r32, rho float64, maxIter int) (p float64, iters int, bisected bool) {
	// R rises monotonically from R(−∞) = 0 through R(0) = ln r32/ln r21 to R(+∞) = ∞.
	rho0 := math.Log(r32) / math.Log(r21)
	switch {
	case math.Abs(rho-rho0) <= 1e-14*rho0:
		return 0, 0, false
	case rho > rho0:
		if math.Abs(r21-r32) <= minRefinementRatioTolerance*r21 {
			return math.Log(rho) / math.Log(r21), 0, false // constant ratio: q = 0
		}
		p, iters = fixedPointOrder(r21, r32, rho, 1, maxIter)
		if !math.IsNaN(p) && math.Abs(modelRatio(r21, r32, p)/rho-1) < 1e-9 {
			return p, iters, false
		}
		return bisectOrder(r21, r32, rho, 0, maxOrderSearch), iters, true
	}
	if math.Abs(r21-r32) <= minRefinementRatioTolerance*r21 {
		return math.Log(rho) / math.Log(r21), 0, false
	}
	return bisectOrder(r21, r32, rho, -maxOrderSearch, 0), 0, true
}

// modelRatio is R(p) = ε32/ε21 for f = f_ext + C h^p: r21^p (r32^p − 1)/(r21^p − 1), with its
// limit ln r32/ln r21 at p = 0.
func modelRatio(r21, r32, p float64) float64 {
	if p == 0 {
		return math.Log(r32) / math.Log(r21)
	}
	return math.Pow(r21, p) * math.Expm1(p*math.Log(r32)) / math.Expm1(p*math.Log(r21))
}

// bisectOrder finds p in [lo, hi] with modelRatio(p) = rho (modelRatio rises with p); it returns
// ±Inf when the root lies beyond the bracket.
func bisectOrder(r21, r32, rho, lo, hi float64) float64 {
	target := math.Log(rho)
	f := func(p float64) float64 { return math.Log(modelRatio(r21, r32, p)) - target }
	if f(hi) < 0 {
		return math.Inf(1)
	}
	if f(lo) > 0 {
		return math.Inf(-1)
	}
	for range bisectionSteps {
		mid := 0.5 * (lo + hi)
		if f(mid) < 0 {
			lo = mid
		} else {
			hi = mid
		}
		if hi-lo <= orderTolerance*math.Max(1, math.Abs(mid)) {
			break
		}
	}
	return 0.5 * (lo + hi)
}
