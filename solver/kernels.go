package solver

// The finest level's kernels on plain runs (rows of the fixed five-point stencil 4, −1, −1, −1,
// −1, whose neighbours lie at fixed offsets): scalar loops here, and on amd64 with AVX2 the
// same arithmetic four nodes at a time (kernels_amd64.s), in the same order, so that both give
// the same bits. A vector step covers four consecutive nodes, two of each colour; the scalar
// loops do the nodes before the first step and after the last. The other kernels with vector
// steps call them where they stand: plainProduct (gridruns.go), prolongStretch (mg_fine.go),
// and the coarse levels' smoothSpanStd, residualSpanStd, restrictRow and prolongPairs
// (mg_grid.go).

// initPlain sets x = b/4 on every other unknown of a plain run from q0 (0 or 1) on and 0 on the
// others, in one pass.
func initPlain(x, b []float64, q0 int) {
	b = b[:len(x)]
	q := 0
	if useAVX2 {
		if steps := (len(x) - q0) / 4; steps > 0 {
			initStepsAVX2(&x[q0], &b[q0], steps)
			initPlainGo(x[:q0], b[:q0], q0)
			q = q0 + 4*steps
		}
	}
	initPlainGo(x[q:], b[q:], (q0+q)&1)
}

// initPlainGo is initPlain in scalar code.
func initPlainGo(x, b []float64, q0 int) {
	if q0 == 1 && len(x) > 0 {
		x[0] = 0
	}
	x, b = x[min(q0, len(x)):], b[min(q0, len(b)):]
	b = b[:len(x)]
	if pairs := len(x) / 2; pairs > 0 {
		xe, xo := x[:2*pairs-1], x[1:2*pairs] // xo[q] is x[q+1]
		be := b[:len(xe)]
		xo = xo[:len(xe)]
		for q := uint(0); q < uint(len(xe)); q += 2 {
			xe[q] = be[q] / 4
			xo[q] = 0
		}
	}
	if len(x)%2 == 1 {
		x[len(x)-1] = b[len(x)-1] / 4
	}
}

// smoothPlain is a Gauss–Seidel step on the unknowns q0, q0+2, … (q0 = 0 or 1) of a plain run,
// xm = (b + xs + xw + xe + xn)/4, where xw and xe are xm's own array shifted by one: the
// unknowns updated read only unknowns of the other colour.
func smoothPlain(xm, xs, xw, xe, xn, b []float64, q0 int) {
	q := q0
	if useAVX2 {
		if steps := (len(xm) - q0) / 4; steps > 0 {
			smoothStepsAVX2(&xm[q0], &xs[q0], &xn[q0], &b[q0], steps)
			q += 4 * steps
		}
	}
	smoothPlainGo(xm, xs, xw, xe, xn, b, q)
}

// smoothPlainGo is smoothPlain in scalar code, from unknown q0 on.
func smoothPlainGo(xm, xs, xw, xe, xn, b []float64, q0 int) {
	xs, xw, xe, xn, b = xs[:len(xm)], xw[:len(xm)], xe[:len(xm)], xn[:len(xm)], b[:len(xm)]
	for q := uint(q0); q < uint(len(xm)); q += 2 {
		xm[q] = (((b[q] + xs[q]) + (xw[q] + xe[q])) + xn[q]) * 0.25
	}
}

// residualPlain writes r = b − A x for a plain run, with the product summed as productTo sums a
// plain row, and then 0 on the unknowns zero, zero+2, … (zero = 0 or 1; none for zero < 0).
func residualPlain(r, xs, xw, xm, xe, xn, b []float64, zero int) {
	q := 0
	if useAVX2 {
		// A step zeroes its second and fourth unknowns, so it starts at an unknown not zeroed.
		q0, odd := 0, 0
		if zero >= 0 {
			q0, odd = 1-zero, 1
		}
		if steps := (len(r) - q0) / 4; steps > 0 {
			residualStepsAVX2(&r[q0], &xm[q0], &xs[q0], &xn[q0], &b[q0], steps, odd)
			residualPlainGo(r[:q0], xs, xw, xm, xe, xn, b, zero)
			q = q0 + 4*steps
		}
	}
	if zero >= 0 {
		zero = (zero + q) & 1
	}
	residualPlainGo(r[q:], xs[q:], xw[q:], xm[q:], xe[q:], xn[q:], b[q:], zero)
}

// residualPlainGo is residualPlain in scalar code.
func residualPlainGo(r, xs, xw, xm, xe, xn, b []float64, zero int) {
	xs, xw, xm, xe, xn, b = xs[:len(r)], xw[:len(r)], xm[:len(r)], xe[:len(r)], xn[:len(r)], b[:len(r)]
	for q := range r {
		r[q] = b[q] - (0 - xs[q] - xw[q] + 4*xm[q] - xe[q] - xn[q])
	}
	if zero < 0 {
		return
	}
	for q := uint(zero); q < uint(len(r)); q += 2 {
		r[q] = 0
	}
}
