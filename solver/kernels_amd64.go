package solver

import "golang.org/x/sys/cpu"

// useAVX2 says whether the plain-run kernels take their AVX2 steps (kernels_amd64.s). Tests
// turn it off to compare with the scalar loops.
var useAVX2 = cpu.X86.HasAVX2

// initStepsAVX2 does initPlain's steps from x[0] and b[0] on, with x = b/4 at the first and
// third unknown of each step and 0 at the others.
//
//go:noescape
func initStepsAVX2(x, b *float64, steps int)

// smoothStepsAVX2 does smoothPlain's steps from xm[0] on, updating the first and third unknown
// of each; xs, xn and b start at the same unknown, xw and xe are xm's array one back and one on.
//
//go:noescape
func smoothStepsAVX2(xm, xs, xn, b *float64, steps int)

// residualStepsAVX2 does residualPlain's steps from r[0] on, with the second and fourth
// residual of each step 0 when odd is 1.
//
//go:noescape
func residualStepsAVX2(r, xm, xs, xn, b *float64, steps, odd int)

// smoothStdStepsAVX2 does smoothSpanStd's steps from x[0] on, updating the first and third
// node of each; b, m (the row below, m1) and p (the row above, p1) start at the same column.
//
//go:noescape
func smoothStdStepsAVX2(x, b, m, p *float64, c *standardStencil, steps int)

// residualStdStepsAVX2 does residualSpanStd's steps from r[0] on, x, b, m and p as for
// smoothStdStepsAVX2.
//
//go:noescape
func residualStdStepsAVX2(r, x, b, m, p *float64, c *standardStencil, steps int)

// prolongStepsAVX2 does prolongStretch's pairs, four to a step: x from an even column on, r0
// and r1 from its coarse column on.
//
//go:noescape
func prolongStepsAVX2(x, r0, r1 *float64, steps int)

// restrictStepsAVX2 does restrictRow's full weighting for coarse nodes 0 to 4·steps − 1, into
// b, from the three fine rows m, c, p (each from padded column 0).
//
//go:noescape
func restrictStepsAVX2(b, m, c, p *float64, steps int)

// productStepsAVX2 does plainProduct's rows four to a step, out from out[0] and xm, xs, xn
// from the same row on.
//
//go:noescape
func productStepsAVX2(out, xm, xs, xn *float64, steps int)
