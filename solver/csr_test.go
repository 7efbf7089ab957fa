package solver

import (
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// gridProblem is a linear system from a finite-difference stencil on the unit square with n cells
// per side, with the nodal values of a function the stencil reproduces exactly.
type gridProblem struct {
	a          *CSR
	b          []float64
	exact      []float64 // solution of a x = b (to rounding)
	red, black []int32   // nodes of even and odd i+j
	n          int       // cells per side
}

// poisson5 returns the 5-point discretisation of −Δu = f on the unit square with n cells per side
// and Dirichlet values u on the boundary, rows scaled by h²: 4u_P − Σ u_nb = h² f. Unknowns are
// the interior nodes, numbered (j−1)(n−1) + (i−1).
func poisson5(n int, u, f func(x, y float64) float64) gridProblem {
	m := n - 1
	h := 1 / float64(n)
	bld := NewBuilder(m*m, 5*m*m)
	p := gridProblem{b: make([]float64, m*m), exact: make([]float64, m*m), n: n}
	for j := 1; j <= m; j++ {
		for i := 1; i <= m; i++ {
			row := (j-1)*m + (i - 1)
			x, y := float64(i)*h, float64(j)*h
			p.exact[row] = u(x, y)
			p.b[row] = h * h * f(x, y)
			bld.Add(row, 4)
			for _, d := range [4][2]int{{-1, 0}, {1, 0}, {0, -1}, {0, 1}} {
				ii, jj := i+d[0], j+d[1]
				if ii == 0 || ii == n || jj == 0 || jj == n {
					p.b[row] += u(float64(ii)*h, float64(jj)*h)
					continue
				}
				bld.Add((jj-1)*m+(ii-1), -1)
			}
			bld.EndRow()
			if (i+j)%2 == 0 {
				p.red = append(p.red, int32(row))
			} else {
				p.black = append(p.black, int32(row))
			}
		}
	}
	p.a = bld.CSR()
	return p
}

// convectionDiffusion returns −Δu + β·∇u = f on the unit square, n cells per side, with
// first-order upwind differences for the convection term, rows scaled by h². Its matrix is a
// non-symmetric M-matrix. u is linear, which both differences reproduce exactly, so f = β·∇u.
func convectionDiffusion(n int, betaX, betaY float64) gridProblem {
	const ux, uy = 2.0, -3.0
	u := func(x, y float64) float64 { return 1 + ux*x + uy*y }
	m := n - 1
	h := 1 / float64(n)
	bld := NewBuilder(m*m, 5*m*m)
	p := gridProblem{b: make([]float64, m*m), exact: make([]float64, m*m), n: n}
	pos, neg := func(v float64) float64 { return max(v, 0) }, func(v float64) float64 { return max(-v, 0) }
	// Coefficients of the west, east, south, north neighbours.
	coef := [4]float64{-1 - h*pos(betaX), -1 - h*neg(betaX), -1 - h*pos(betaY), -1 - h*neg(betaY)}
	for j := 1; j <= m; j++ {
		for i := 1; i <= m; i++ {
			row := (j-1)*m + (i - 1)
			x, y := float64(i)*h, float64(j)*h
			p.exact[row] = u(x, y)
			p.b[row] = h * h * (betaX*ux + betaY*uy)
			bld.Add(row, 4+h*(math.Abs(betaX)+math.Abs(betaY)))
			for k, d := range [4][2]int{{-1, 0}, {1, 0}, {0, -1}, {0, 1}} {
				ii, jj := i+d[0], j+d[1]
				if ii == 0 || ii == n || jj == 0 || jj == n {
					p.b[row] -= coef[k] * u(float64(ii)*h, float64(jj)*h)
					continue
				}
				bld.Add((jj-1)*m+(ii-1), coef[k])
			}
			bld.EndRow()
			if (i+j)%2 == 0 {
				p.red = append(p.red, int32(row))
			} else {
				p.black = append(p.black, int32(row))
			}
		}
	}
	p.a = bld.CSR()
	return p
}

// shortleyWeller returns −Δu = f on the unit square with a circular hole, n cells per side, by the
// Shortley-Weller scheme: per direction, with arms θ₋h and θ₊h to the neighbours or to the circle,
// the non-uniform second difference (2/(h₋+h₊))[(u₊ − u₀)/h₊ − (u₀ − u₋)/h₋] (Shortley & Weller,
// J. Appl. Phys. 9, 1938). Rows are scaled by h². Arms are clamped to θ ≥ 1e-3 and the boundary
// value is taken at the clamped point, so the discrete problem stays exact for quadratics; the
// u used here is quadratic, so the discrete solution is its nodal values. The matrix is a
// non-symmetric M-matrix.
func shortleyWeller(n int) gridProblem {
	const cx, cy, radius, thetaMin = 0.53, 0.47, 0.231, 1e-3
	u := func(x, y float64) float64 { return 1 + 0.3*x - 0.2*y + x*x + 2*y*y + 0.7*x*y }
	const minusLaplacian = -6.0 // −Δu
	h := 1 / float64(n)
	inside := func(i, j int) bool {
		dx, dy := float64(i)*h-cx, float64(j)*h-cy
		return dx*dx+dy*dy <= radius*radius
	}
	// Number the unknowns: interior nodes outside the circle.
	index := make([]int, (n+1)*(n+1))
	nu := 0
	for j := 1; j < n; j++ {
		for i := 1; i < n; i++ {
			index[j*(n+1)+i] = -1
			if !inside(i, j) {
				index[j*(n+1)+i] = nu
				nu++
			}
		}
	}
	bld := NewBuilder(nu, 5*nu)
	p := gridProblem{b: make([]float64, nu), exact: make([]float64, nu), n: n}
	for j := 1; j < n; j++ {
		for i := 1; i < n; i++ {
			row := index[j*(n+1)+i]
			if row < 0 {
				continue
			}
			x, y := float64(i)*h, float64(j)*h
			p.exact[row] = u(x, y)
			p.b[row] = h * h * minusLaplacian
			for _, axis := range [2][2]int{{1, 0}, {0, 1}} {
				var theta [2]float64 // arms towards −axis and +axis, in units of h
				var nb [2]int        // neighbour unknown, or −1 for a boundary value
				var val [2]float64   // boundary value where nb < 0
				for s, sign := range [2]int{-1, 1} {
					ii, jj := i+sign*axis[0], j+sign*axis[1]
					ex, ey := float64(sign*axis[0]), float64(sign*axis[1])
					theta[s], nb[s] = 1, -1
					switch {
					case ii == 0 || ii == n || jj == 0 || jj == n:
						val[s] = u(float64(ii)*h, float64(jj)*h)
					case inside(ii, jj):
						// |P + t h e − c|² = R², smaller root in (0, 1).
						dx, dy := x-cx, y-cy
						de := dx*ex + dy*ey
						t := (-de - math.Sqrt(de*de-(dx*dx+dy*dy-radius*radius))) / h
						t = max(t, thetaMin)
						theta[s] = t
						val[s] = u(x+t*h*ex, y+t*h*ey)
					default:
						nb[s] = index[jj*(n+1)+ii]
					}
				}
				tm, tp := theta[0], theta[1]
				bld.Add(row, 2/(tm*tp))
				for s, c := range [2]float64{-2 / (tm * (tm + tp)), -2 / (tp * (tm + tp))} {
					if nb[s] >= 0 {
						bld.Add(nb[s], c)
					} else {
						p.b[row] -= c * val[s]
					}
				}
			}
			bld.EndRow()
			if (i+j)%2 == 0 {
				p.red = append(p.red, int32(row))
			} else {
				p.black = append(p.black, int32(row))
			}
		}
	}
	p.a = bld.CSR()
	return p
}

// randomDense returns an n×n matrix with a fraction density of off-diagonal entries uniform in
// [−1, 1], symmetric if sym, and a diagonal 1 larger than the larger of the absolute row and
// column sums, so that it is strictly diagonally dominant by rows and columns (and SPD if sym).
func randomDense(rng *rand.Rand, n int, density float64, sym bool) *CSR {
	d := make([]float64, n*n)
	for i := range n {
		for j := range n {
			if i == j || (sym && j < i) || rng.Float64() >= density {
				continue
			}
			v := 2*rng.Float64() - 1
			d[i*n+j] = v
			if sym {
				d[j*n+i] = v
			}
		}
	}
	for i := range n {
		var rs, cs float64
		for j := range n {
			rs += math.Abs(d[i*n+j])
			cs += math.Abs(d[j*n+i])
		}
		d[i*n+i] = max(rs, cs) + 1
	}
	return fromDense(n, d)
}

// randomGrid returns a 5-point-pattern M-matrix on an mx×my grid of unknowns (Dirichlet border
// eliminated): off-diagonals −w with w uniform in [0.2, 1.8], symmetric if sym, and a diagonal of
// the row's off-diagonal sum plus the weights of its missing border links plus uniform [0, 0.5].
func randomGrid(rng *rand.Rand, mx, my int, sym bool) (*CSR, []int32, []int32) {
	n := mx * my
	d := make([]float64, n*n)
	weight := func() float64 { return 0.2 + 1.6*rng.Float64() }
	for j := range my {
		for i := range mx {
			row := j*mx + i
			for _, dd := range [2][2]int{{1, 0}, {0, 1}} {
				ii, jj := i+dd[0], j+dd[1]
				if ii >= mx || jj >= my {
					continue
				}
				col := jj*mx + ii
				w1 := weight()
				w2 := w1
				if !sym {
					w2 = weight()
				}
				d[row*n+col], d[col*n+row] = -w1, -w2
			}
		}
	}
	var red, black []int32
	for j := range my {
		for i := range mx {
			row := j*mx + i
			var s float64
			for c := range n {
				s -= d[row*n+c]
			}
			border := 0
			if i == 0 || i == mx-1 {
				border++
			}
			if j == 0 || j == my-1 {
				border++
			}
			d[row*n+row] = s + float64(border)*weight() + 0.5*rng.Float64()
			if (i+j)%2 == 0 {
				red = append(red, int32(row))
			} else {
				black = append(black, int32(row))
			}
		}
	}
	return fromDense(n, d), red, black
}

// fromDense builds a CSR of the non-zero entries of a row-major n×n matrix.
func fromDense(n int, d []float64) *CSR {
	bld := NewBuilder(n, 0)
	for i := range n {
		for j := range n {
			if v := d[i*n+j]; v != 0 {
				bld.Add(j, v)
			}
		}
		bld.EndRow()
	}
	return bld.CSR()
}

// toDense returns a as a gonum dense matrix.
func toDense(a *CSR) *mat.Dense {
	d := mat.NewDense(a.N, a.N, nil)
	for i := range a.N {
		for k := a.RowPtr[i]; k < a.RowPtr[i+1]; k++ {
			d.Set(i, int(a.Col[k]), a.Val[k])
		}
	}
	return d
}

// relDiff returns ‖x − y‖₂ / ‖y‖₂.
func relDiff(x, y []float64) float64 {
	var num, den float64
	for i := range x {
		num += (x[i] - y[i]) * (x[i] - y[i])
		den += y[i] * y[i]
	}
	return math.Sqrt(num / den)
}

// trueRelResidual returns ‖b − A x‖₂ / ‖b‖₂ computed densely, independently of the package.
func trueRelResidual(a *CSR, b, x []float64) float64 {
	var num, den float64
	for i := range a.N {
		s := b[i]
		for k := a.RowPtr[i]; k < a.RowPtr[i+1]; k++ {
			s -= a.Val[k] * x[a.Col[k]]
		}
		num += s * s
		den += b[i] * b[i]
	}
	return math.Sqrt(num / den)
}

func randVec(rng *rand.Rand, n int) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = 2*rng.Float64() - 1
	}
	return v
}

// expectPanic fails t unless f panics with a message that starts with "solver: " and contains
// want.
func expectPanic(t *testing.T, want string, f func()) {
	t.Helper()
	defer func() {
		t.Helper()
		r := recover()
		msg, ok := r.(string)
		if !ok || !strings.HasPrefix(msg, "solver: ") || !strings.Contains(msg, want) {
			t.Errorf("panic = %v, want a \"solver: ...\" message containing %q", r, want)
		}
	}()
	f()
}

func TestBuilderSortsAndSumsDuplicates(t *testing.T) {
	type entry struct {
		col int
		v   float64
	}
	tests := []struct {
		name    string
		rows    [][]entry
		wantPtr []int
		wantCol []int32
		wantVal []float64
	}{
		{
			name:    "sorted rows pass through",
			rows:    [][]entry{{{0, 4}, {1, -1}}, {{0, -1}, {1, 4}}},
			wantPtr: []int{0, 2, 4},
			wantCol: []int32{0, 1, 0, 1},
			wantVal: []float64{4, -1, -1, 4},
		},
		{
			name:    "reverse order and duplicates",
			rows:    [][]entry{{{2, 1}, {0, 2}, {2, 3}, {1, 5}, {0, -0.5}}, {}, {{2, 7}, {2, -7}}},
			wantPtr: []int{0, 3, 3, 4},
			wantCol: []int32{0, 1, 2, 2},
			wantVal: []float64{1.5, 5, 4, 0}, // a cancelled duplicate stays as an explicit zero
		},
		{
			name: "long row uses the general sort",
			rows: func() [][]entry {
				var r []entry
				for k := 39; k >= 0; k-- {
					r = append(r, entry{k, float64(k)}, entry{k, 1})
				}
				rows := make([][]entry, 40)
				rows[0] = r
				return rows
			}(),
			wantPtr: append([]int{0}, slices.Repeat([]int{40}, 40)...),
			wantCol: func() []int32 {
				c := make([]int32, 40)
				for k := range c {
					c[k] = int32(k)
				}
				return c
			}(),
			wantVal: func() []float64 {
				v := make([]float64, 40)
				for k := range v {
					v[k] = float64(k) + 1
				}
				return v
			}(),
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			b := NewBuilder(len(tt.rows), 0)
			for _, row := range tt.rows {
				for _, e := range row {
					b.Add(e.col, e.v)
				}
				b.EndRow()
			}
			a := b.CSR()
			if err := a.Validate(); err != nil {
				t.Fatalf("Validate: %v", err)
			}
			if !slices.Equal(a.RowPtr, tt.wantPtr) || !slices.Equal(a.Col, tt.wantCol) || !slices.Equal(a.Val, tt.wantVal) {
				t.Errorf("got RowPtr %v Col %v Val %v, want %v %v %v", a.RowPtr, a.Col, a.Val, tt.wantPtr, tt.wantCol, tt.wantVal)
			}
		})
	}
}

func TestBuilderMisusePanics(t *testing.T) {
	tests := []struct {
		name string
		want string
		f    func()
	}{
		{"too few rows", "1 of 2 rows ended", func() {
			b := NewBuilder(2, 0)
			b.EndRow()
			b.CSR()
		}},
		{"too many rows", "all 1 rows already ended", func() {
			b := NewBuilder(1, 0)
			b.EndRow()
			b.EndRow()
		}},
		{"add after last row", "all 1 rows already ended", func() {
			b := NewBuilder(1, 0)
			b.EndRow()
			b.Add(0, 1)
		}},
		{"column out of range", "column must be in [0, 3), got 3", func() { NewBuilder(3, 0).Add(3, 1) }},
		{"negative column", "got -1", func() { NewBuilder(3, 0).Add(-1, 1) }},
		{"NaN value", "must be finite", func() { NewBuilder(3, 0).Add(0, math.NaN()) }},
		{"use after CSR", "after CSR", func() {
			b := NewBuilder(0, 0)
			b.CSR()
			b.Add(0, 1)
		}},
		{"negative size", "n must be in", func() { NewBuilder(-1, 0) }},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) { expectPanic(t, tt.want, tt.f) })
	}
}

func TestValidateRejectsMalformed(t *testing.T) {
	good := func() *CSR {
		return &CSR{N: 2, RowPtr: []int{0, 2, 3}, Col: []int32{0, 1, 1}, Val: []float64{2, -1, 2}}
	}
	tests := []struct {
		name   string
		modify func(a *CSR)
		want   string // "" for valid
	}{
		{"valid", func(*CSR) {}, ""},
		{"short RowPtr", func(a *CSR) { a.RowPtr = a.RowPtr[:2] }, "len(RowPtr)"},
		{"RowPtr not starting at 0", func(a *CSR) { a.RowPtr[0] = 1 }, "RowPtr[0]"},
		{"decreasing RowPtr", func(a *CSR) { a.RowPtr[1] = 4 }, "non-decreasing"},
		{"unsorted columns", func(a *CSR) { a.Col[0], a.Col[1] = 1, 0 }, "strictly ascending"},
		{"duplicate column", func(a *CSR) { a.Col[1] = 0 }, "strictly ascending"},
		{"column out of range", func(a *CSR) { a.Col[2] = 2 }, "column must be in"},
		{"NaN value", func(a *CSR) { a.Val[0] = math.NaN() }, "finite"},
		{"Val too short", func(a *CSR) { a.Val = a.Val[:2] }, "len(Col) and len(Val)"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			a := good()
			tt.modify(a)
			err := a.Validate()
			switch {
			case tt.want == "" && err != nil:
				t.Errorf("Validate = %v, want nil", err)
			case tt.want != "" && (err == nil || !strings.Contains(err.Error(), tt.want)):
				t.Errorf("Validate = %v, want an error containing %q", err, tt.want)
			}
		})
	}
}

func TestCSRKernelsMatchDense(t *testing.T) {
	// Each output entry is a sum of at most N products of O(1) numbers, so it agrees with
	// gonum's dense product to a few ulps; 1e-13 absolute leaves room for N = 200.
	const kernelTol = 1e-13
	rng := rand.New(rand.NewPCG(1, 2))
	tests := []struct {
		name string
		a    *CSR
	}{
		{"random non-symmetric 37", randomDense(rng, 37, 0.2, false)},
		{"random symmetric 200 (several blocks of rows)", randomDense(rng, 200, 0.05, true)},
		{"laplacian 9x9 cells", poisson5(9, func(x, y float64) float64 { return 0 }, func(x, y float64) float64 { return 0 }).a},
		{"with an empty row", &CSR{N: 3, RowPtr: []int{0, 1, 1, 3}, Col: []int32{2, 0, 2}, Val: []float64{5, -1, 3}}},
		{"big enough for several blocks", poisson5(64, func(x, y float64) float64 { return 0 }, func(x, y float64) float64 { return 0 }).a},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			a := tt.a
			n := a.N
			d := toDense(a)
			x := randVec(rng, n)
			b := randVec(rng, n)

			var want mat.VecDense
			want.MulVec(d, mat.NewVecDense(n, x))
			got := make([]float64, n)
			a.MulVecTo(got, x)
			res := make([]float64, n)
			a.ResidualTo(res, b, x)
			diag := make([]float64, n)
			a.DiagonalTo(diag)
			for i := range n {
				if e := math.Abs(got[i] - want.AtVec(i)); e > kernelTol {
					t.Errorf("MulVecTo: row %d: got %v, want %v", i, got[i], want.AtVec(i))
				}
				if e := math.Abs(res[i] - (b[i] - got[i])); e != 0 {
					t.Errorf("ResidualTo: row %d: got %v, want b − Ax = %v exactly", i, res[i], b[i]-got[i])
				}
				if diag[i] != d.At(i, i) {
					t.Errorf("DiagonalTo: row %d: got %v, want %v", i, diag[i], d.At(i, i))
				}
				for j := range n {
					if a.At(i, j) != d.At(i, j) {
						t.Fatalf("At(%d, %d) = %v, want %v", i, j, a.At(i, j), d.At(i, j))
					}
				}
			}
			// ResidualTo may write over b.
			bb := slices.Clone(b)
			a.ResidualTo(bb, bb, x)
			if !slices.Equal(bb, res) {
				t.Errorf("ResidualTo(b, b, x) differs from ResidualTo(dst, b, x)")
			}
		})
	}
}

func TestCSRMisusePanics(t *testing.T) {
	a := poisson5(4, func(x, y float64) float64 { return 0 }, func(x, y float64) float64 { return 0 }).a
	n := a.N
	v := make([]float64, n)
	tests := []struct {
		name string
		want string
		f    func()
	}{
		{"MulVecTo short dst", "len(dst) = 3", func() { a.MulVecTo(v[:3], v) }},
		{"MulVecTo aliasing", "same slice", func() { a.MulVecTo(v, v) }},
		{"ResidualTo short b", "len(b)", func() { a.ResidualTo(v, v[:2], make([]float64, n)) }},
		{"DiagonalTo short", "DiagonalTo", func() { a.DiagonalTo(v[:1]) }},
		{"At out of range", "out of range", func() { a.At(n, 0) }},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) { expectPanic(t, tt.want, tt.f) })
	}
}

func TestKernelsDoNotAllocate(t *testing.T) {
	p := poisson5(64, func(x, y float64) float64 { return x }, func(x, y float64) float64 { return 0 })
	a := p.a
	x := slices.Clone(p.exact)
	dst := make([]float64, a.N)
	jac := NewJacobi(a)
	tests := []struct {
		name string
		f    func()
	}{
		{"CSR.MulVecTo", func() { a.MulVecTo(dst, x) }},
		{"CSR.ResidualTo", func() { a.ResidualTo(dst, p.b, x) }},
		{"CSR.DiagonalTo", func() { a.DiagonalTo(dst) }},
		{"Jacobi.PreconSolve", func() { _ = jac.PreconSolve(dst, x) }},
		{"dot", func() { _ = dot(x, p.b) }},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := testing.AllocsPerRun(20, tt.f); got != 0 {
				t.Errorf("allocations per call: got %v, want 0", got)
			}
		})
	}
}

func TestJacobi(t *testing.T) {
	a := &CSR{N: 3, RowPtr: []int{0, 2, 3, 5}, Col: []int32{0, 2, 1, 0, 2}, Val: []float64{2, 1, -4, 3, 0.5}}
	jac := NewJacobi(a)
	dst := make([]float64, 3)
	if err := jac.PreconSolve(dst, []float64{1, 2, 3}); err != nil {
		t.Fatalf("PreconSolve: %v", err)
	}
	if want := []float64{0.5, -0.5, 6}; !slices.Equal(dst, want) {
		t.Errorf("PreconSolve: got %v, want %v", dst, want)
	}
	t.Run("zero diagonal panics", func(t *testing.T) {
		z := &CSR{N: 2, RowPtr: []int{0, 1, 2}, Col: []int32{0, 0}, Val: []float64{1, 1}}
		expectPanic(t, "diagonal entry 1", func() { NewJacobi(z) })
	})
}
