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
