package solver

import (
	"fmt"

	"gonum.org/v1/gonum/mat"
)

// denseCondMax is the largest condition number (LU estimate, 1-norm) for which the coarsest
// level is inverted through its LU factors; above it the operator counts as singular and its
// pseudo-inverse is used. A coarse operator becomes singular when thin features leave two coarse
// nodes interpolating to the same single fine unknown.
const denseCondMax = 1e12

// pinvRcond is the relative singular value below which the pseudo-inverse drops a direction.
const pinvRcond = 1e-12

// denseInverse is the exact solve of a small system by its precomputed dense (pseudo-)inverse.
type denseInverse struct {
	idx []int32   // vector index of each dense unknown
	inv []float64 // len(idx)² entries, row-major
	buf []float64 // the gathered right-hand side
}

// denseFromCSR returns the dense inverse of a whole CSR matrix.
func denseFromCSR(a *CSR, symmetric bool) (*denseInverse, error) {
	m := a.N
	d := mat.NewDense(m, m, nil)
	idx := make([]int32, m)
	for i := range m {
		idx[i] = int32(i)
		for k := a.RowPtr[i]; k < a.RowPtr[i+1]; k++ {
			d.Set(i, int(a.Col[k]), a.Val[k])
		}
	}
	return newDenseInverse(d, idx, symmetric)
}

// denseInverse returns the dense inverse of the active nodes of level lv.
func (lv *gridLevel) denseInverse(symmetric bool) (*denseInverse, error) {
	pos := make([]int32, len(lv.x))
	var idx []int32
	for k := range pos {
		pos[k] = -1
		if lv.invD[k] != 0 {
			pos[k] = int32(len(idx))
			idx = append(idx, int32(k))
		}
	}
	m := len(idx)
	d := mat.NewDense(m, m, nil)
	for row, k := range idx {
		for e, v := range lv.st64[k] {
			if v == 0 {
				continue
			}
			col := pos[int(k)+(e/3-1)*lv.sx+e%3-1]
			if col < 0 {
				return nil, fmt.Errorf("solver: multigrid: coarsest level couples an active node to an inactive one") // unreachable
			}
			d.Set(row, int(col), v)
		}
	}
	return newDenseInverse(d, idx, symmetric)
}

// newDenseInverse inverts a through its LU factors, or forms its pseudo-inverse from an SVD when
// a is singular or nearly so. With symmetric set the result is symmetrised, (Z + Zᵀ)/2, so that
// it is exactly symmetric for a symmetric a.
func newDenseInverse(a *mat.Dense, idx []int32, symmetric bool) (*denseInverse, error) {
	m := len(idx)
	inv := mat.NewDense(m, m, nil)
	var lu mat.LU
	lu.Factorize(a)
	ok := false
	if c := lu.Cond(); c <= denseCondMax {
		eye := mat.NewDiagDense(m, nil)
		for i := range m {
			eye.SetDiag(i, 1)
		}
		ok = lu.SolveTo(inv, false, eye) == nil
	}
	if !ok {
		var svd mat.SVD
		if !svd.Factorize(a, mat.SVDThin) {
			return nil, fmt.Errorf("solver: multigrid: the SVD of the %d × %d coarsest operator did not converge", m, m)
		}
		s := svd.Values(nil)
		var u, v mat.Dense
		svd.UTo(&u)
		svd.VTo(&v)
		// A⁺ = V Σ⁺ Uᵀ, dropping singular values below pinvRcond·σ_max.
		for k := range s {
			f := 0.0
			if s[k] > pinvRcond*s[0] {
				f = 1 / s[k]
			}
			for i := range m {
				v.Set(i, k, v.At(i, k)*f)
			}
		}
		inv.Mul(&v, u.T())
	}
	if symmetric {
		for i := range m {
			for j := i + 1; j < m; j++ {
				s := 0.5 * (inv.At(i, j) + inv.At(j, i))
				inv.Set(i, j, s)
				inv.Set(j, i, s)
			}
		}
	}
	data := make([]float64, m*m)
	for i := range m {
		copy(data[i*m:(i+1)*m], inv.RawRowView(i))
	}
	return &denseInverse{idx: idx, inv: data, buf: make([]float64, m)}, nil
}

// solveTo writes x = Z b on the dense unknowns, Z the stored inverse: x[idx[i]] = Σ_k Z_ik b[idx[k]].
func (d *denseInverse) solveTo(x, b []float64) {
	buf := d.buf
	idx := d.idx[:len(buf)]
	for k, i := range idx {
		buf[k] = b[i]
	}
	m := len(buf)
	for r, i := range idx {
		row := d.inv[r*m : r*m+m]
		x[i] = dotRange(row, buf)
	}
}
