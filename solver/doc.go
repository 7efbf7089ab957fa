// Package solver solves the sparse linear systems of phipsi: the discrete Laplacians of the stream
// function ψ and the velocity potential φ on a structured grid.
//
// # Matrices
//
// CSR is a square matrix in compressed sparse row form, assembled row by row with a Builder
// (entries of a row in any order, duplicates summed). Its kernels (MulVecTo, ResidualTo,
// DiagonalTo) allocate nothing and work on fixed blocks of rows; reductions add block sums in
// block order, so results do not depend on how the blocks are later shared out among goroutines.
//
// # Methods
//
// The Krylov methods see the matrix only as an Operator (MulVecTo) and take an optional
// Preconditioner (PreconSolve; nil means none, Jacobi is the diagonal one). SOR works on a CSR
// directly. All methods share Settings (tolerance on the relative residual ‖b − A x‖/‖b‖,
// iteration limit, progress hook; the zero value means the defaults) and report Stats, whose
// residual is always recomputed from b − A x. A solve that runs out of iterations returns
// ErrNotConverged with its best x; one that cannot go on returns ErrBreakdown; a cancelled
// context stops a solve within one iteration.
//
// How to choose:
//
//   - CG, the conjugate gradient method, for symmetric positive definite matrices, such as the
//     φ problem in its symmetric cut-face form. Its error falls monotonically in the energy norm
//     and it needs one operator product per iteration. With a symmetric positive definite
//     preconditioner it is PCG.
//   - BiCGStab for non-symmetric matrices, such as the ψ problem with Shortley-Weller rows (a
//     non-symmetric M-matrix). Each iteration costs two operator products and two preconditioner
//     solves; its residual is not monotone, and it restarts itself after near-breakdowns.
//   - SOR, red-black successive over-relaxation, as a simple method for either problem when the
//     rows split into two colours that do not couple (5-point stencils; see RedBlack). With
//     OptimalOmega its iteration count grows like 1/h, as unpreconditioned CG's does; a sweep
//     costs about one operator product and SOR needs a single work vector (the inverse diagonal).
//
// Without a good preconditioner all three need a number of iterations proportional to the grid
// size per side; a multigrid preconditioner makes it nearly constant.
//
// # References
//
//   - Y. Saad, Iterative Methods for Sparse Linear Systems, 2nd ed., SIAM, 2003: sparse storage
//     (ch. 3), Jacobi, Gauss-Seidel and SOR (ch. 4), CG (ch. 6), BiCGStab (ch. 7),
//     preconditioned iterations and Jacobi preconditioning (ch. 9, 10).
//   - H. A. van der Vorst, Bi-CGSTAB: a fast and smoothly converging variant of Bi-CG for the
//     solution of nonsymmetric linear systems, SIAM J. Sci. Stat. Comput. 13 (1992) 631–644.
//   - D. M. Young, Iterative methods for solving partial difference equations of elliptic type,
//     Ph.D. thesis, Harvard University, 1950; R. S. Varga, Matrix Iterative Analysis,
//     Prentice-Hall, 1962, ch. 4: the optimal SOR factor ω = 2/(1 + √(1 − ρ_J²)).
package solver
