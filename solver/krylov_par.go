package solver

import "math"

// The vector and matrix kernels of CG and BiCGStab, run over the fixed row blocks of pool.go by
// the package's worker team. Each block's sums are kept apart and added in block order, so the
// results are the same bit for bit as the serial kernels' and for any number of goroutines. On
// the machines phipsi runs on, one core streams memory at about half the rate of two (STREAM
// triad: 28 against 57 GB/s), and these kernels do nothing but stream.

// krylovMinParallel is the vector length below which the kernels run on the calling goroutine:
// under it, waking a helper costs more than the work.
const krylovMinParallel = 32768

// Kernels of kernels.run.
const (
	kDot      = iota // s1 = x·y
	kMulVec          // d = A x, s1 = y·d, s2 = d·d
	kResidual        // d = y − A x, s1 = d·d
	kStep            // x += α y, d −= α z, s1 = d·d (d is r, y is p, z is q)
	kStepSave        // kStep, saving x in e first
	kStepDot         // kStep, also s2 = e·d (e is r̂)
	kCGDir           // d = x + β d (d is p, x is z)
	kBiCGDir         // d = x + β (d − α y) (d is p, x is r, y is v, α is ω)
	kCopy            // d = x
)

// kernels is one workspace's state for the kernels: the current run's kernel and operands, and
// the per-block sums.
type kernels struct {
	op          int
	n           int
	ro          rangeOperator
	d, x, y, z  []float64
	e           []float64
	alpha, beta float64
	s1, s2      []float64
}

// run runs kernel op on n rows and returns the two sums in block order.
func (k *kernels) run(op, n int) (float64, float64) {
	k.op, k.n = op, n
	nb := ceilDiv(n, blockRows)
	if cap(k.s1) < nb {
		k.s1, k.s2 = make([]float64, nb), make([]float64, nb)
	}
	k.s1, k.s2 = k.s1[:nb], k.s2[:nb]
	workTeam.run(k, nb, n < krylovMinParallel)
	var s1, s2 float64
	for b := range nb {
		s1 += k.s1[b]
		s2 += k.s2[b]
	}
	k.d, k.x, k.y, k.z, k.e, k.ro = nil, nil, nil, nil, nil, nil
	return s1, s2
}

// runBlock runs the current kernel on block b.
func (k *kernels) runBlock(b int) {
	lo := b * blockRows
	hi := min(lo+blockRows, k.n)
	var s1, s2 float64
	switch k.op {
	case kDot:
		s1 = dotRange(k.x[lo:hi], k.y[lo:hi])
	case kMulVec:
		s1, s2 = k.ro.mulVecDots2Range(k.d, k.x, k.y, lo, hi)
	case kResidual:
		s1 = k.ro.residualRange(k.d, k.y, k.x, lo, hi)
	case kStep:
		s1 = stepRange(k.x[lo:hi], k.d[lo:hi], k.alpha, k.y[lo:hi], k.z[lo:hi])
	case kStepSave:
		copy(k.e[lo:hi], k.x[lo:hi])
		s1 = stepRange(k.x[lo:hi], k.d[lo:hi], k.alpha, k.y[lo:hi], k.z[lo:hi])
	case kStepDot:
		s1, s2 = stepDotRange(k.x[lo:hi], k.d[lo:hi], k.alpha, k.y[lo:hi], k.z[lo:hi], k.e[lo:hi])
	case kCGDir:
		ps := k.d[lo:hi]
		zs := k.x[lo:hi]
		zs = zs[:len(ps)]
		for i := range ps {
			ps[i] = zs[i] + k.beta*ps[i]
		}
	case kBiCGDir:
		ps := k.d[lo:hi]
		rs := k.x[lo:hi]
		vs := k.y[lo:hi]
		rs, vs = rs[:len(ps)], vs[:len(ps)]
		for i := range ps {
			ps[i] = rs[i] + k.beta*(ps[i]-k.alpha*vs[i])
		}
	case kCopy:
		copy(k.d[lo:hi], k.x[lo:hi])
	}
	k.s1[b], k.s2[b] = s1, s2
}

// stepRange does x += α p and r −= α q and returns the new r·r of the range.
func stepRange(xs, rs []float64, alpha float64, ps, qs []float64) float64 {
	rs, ps, qs = rs[:len(xs)], ps[:len(xs)], qs[:len(xs)]
	var sq float64
	for i := range xs {
		xs[i] += alpha * ps[i]
		ri := rs[i] - alpha*qs[i]
		rs[i] = ri
		sq += ri * ri
	}
	return sq
}

// stepDotRange is stepRange that also returns e·r of the new r, summed in the same order as
// dotRange(e, r) (the same bits).
func stepDotRange(xs, rs []float64, alpha float64, ps, qs, es []float64) (float64, float64) {
	rs, ps, qs, es = rs[:len(xs)], ps[:len(xs)], qs[:len(xs)], es[:len(xs)]
	var sq, se float64
	for i := range xs {
		xs[i] += alpha * ps[i]
		ri := rs[i] - alpha*qs[i]
		rs[i] = ri
		sq += ri * ri
		se += es[i] * ri
	}
	return sq, se
}

// rangeOperator is an operator whose products and residuals can be formed on one block of rows
// at a time (at most blockRows rows): the kernels then run them on the worker team.
type rangeOperator interface {
	Operator
	// mulVecDots2Range computes dst = A x on rows [lo, hi) and returns Σ y_u dst_u and Σ dst_u².
	mulVecDots2Range(dst, x, y []float64, lo, hi int) (float64, float64)
	// residualRange computes dst = b − A x on rows [lo, hi) and returns Σ dst_u²; dst may be b.
	residualRange(dst, b, x []float64, lo, hi int) float64
}

// matrix sets the run's matrix and reports whether the kernels know its kind.
func (k *kernels) matrix(a Operator) bool {
	if ro, ok := a.(rangeOperator); ok {
		k.ro = ro
		return true
	}
	return false
}

// dot returns x·y.
func (k *kernels) dot(x, y []float64) float64 {
	k.x, k.y = x, y
	s, _ := k.run(kDot, len(x))
	return s
}

// norm returns ‖x‖₂.
func (k *kernels) norm(x []float64) float64 { return math.Sqrt(k.dot(x, x)) }

// mulVecDots2 computes dst = A x and returns y·dst and dst·dst.
func (k *kernels) mulVecDots2(a Operator, dst, x, y []float64) (float64, float64) {
	if !k.matrix(a) {
		a.MulVecTo(dst, x)
		k.x, k.y = dst, y
		yd, _ := k.run(kDot, len(dst))
		k.x, k.y = dst, dst
		dd, _ := k.run(kDot, len(dst))
		return yd, dd
	}
	k.d, k.x, k.y = dst, x, y
	return k.run(kMulVec, len(dst))
}

// residual computes dst = b − A x and returns ‖dst‖₂.
func (k *kernels) residual(a Operator, dst, b, x []float64) float64 {
	if !k.matrix(a) {
		return residualTo(a, dst, b, x)
	}
	k.d, k.x, k.y = dst, x, b
	s, _ := k.run(kResidual, len(dst))
	return math.Sqrt(s)
}

// step does x += α p and r −= α q and returns the new r·r.
func (k *kernels) step(x, r []float64, alpha float64, p, q []float64) float64 {
	k.x, k.d, k.alpha, k.y, k.z = x, r, alpha, p, q
	s, _ := k.run(kStep, len(x))
	return s
}

// stepSave is step that first copies x into save, in the same pass.
func (k *kernels) stepSave(x, r []float64, alpha float64, p, q, save []float64) float64 {
	k.x, k.d, k.alpha, k.y, k.z, k.e = x, r, alpha, p, q, save
	s, _ := k.run(kStepSave, len(x))
	return s
}

// stepDot is step that also returns e·r of the new r (the same bits as dot(e, r) after it).
func (k *kernels) stepDot(x, r []float64, alpha float64, p, q, e []float64) (float64, float64) {
	k.x, k.d, k.alpha, k.y, k.z, k.e = x, r, alpha, p, q, e
	return k.run(kStepDot, len(x))
}

// cgDirection sets p = z + β p.
func (k *kernels) cgDirection(p, z []float64, beta float64) {
	k.d, k.x, k.beta = p, z, beta
	k.run(kCGDir, len(p))
}

// bicgDirection sets p = r + β (p − ω v).
func (k *kernels) bicgDirection(p, r, v []float64, beta, omega float64) {
	k.d, k.x, k.y, k.beta, k.alpha = p, r, v, beta, omega
	k.run(kBiCGDir, len(p))
}

// copy sets dst = src.
func (k *kernels) copy(dst, src []float64) {
	k.d, k.x = dst, src
	k.run(kCopy, len(dst))
}
