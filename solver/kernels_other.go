//go:build !amd64

package solver

// useAVX2 is false off amd64: the kernels are the scalar loops.
var useAVX2 = false

func initStepsAVX2(x, b *float64, steps int)                      { panic("solver: no AVX2") }
func smoothStepsAVX2(xm, xs, xn, b *float64, steps int)           { panic("solver: no AVX2") }
func residualStepsAVX2(r, xm, xs, xn, b *float64, steps, odd int) { panic("solver: no AVX2") }

func smoothStdStepsAVX2(x, b, m, p *float64, c *standardStencil, steps int) {
	panic("solver: no AVX2")
}
func residualStdStepsAVX2(r, x, b, m, p *float64, c *standardStencil, steps int) {
	panic("solver: no AVX2")
}
func prolongStepsAVX2(x, r0, r1 *float64, steps int)       { panic("solver: no AVX2") }
func restrictStepsAVX2(b, m, c, p *float64, steps int)     { panic("solver: no AVX2") }
func productStepsAVX2(out, xm, xs, xn *float64, steps int) { panic("solver: no AVX2") }
