// Package solver solves the sparse linear systems of phipsi: the discrete Laplacians of the stream
// function ψ and the velocity potential φ on a structured grid.
//
// # Matrices
//
// CSR is a square matrix in compressed sparse row form, assembled row by row with a Builder
// (entries of a row in any order, duplicates summed). GridMatrix is the form of the ψ and φ
// systems: a matrix on grid unknowns whose plain rows (4 on the diagonal, −1 to the four
// neighbours) are one bit each and whose other rows are CSR rows, assembled the same way by a
// GridBuilder; its products equal a CSR's bit for bit in a twentieth of the memory, and CSR()
// turns it into one. The kernels (MulVecTo, ResidualTo, DiagonalTo) allocate nothing and work
// on fixed blocks of rows; reductions add block sums in block order, so results do not depend on
// how the blocks are shared out among goroutines.
//
// # Methods
//
// The Krylov methods see the matrix only as an Operator (MulVecTo) and take an optional
// Preconditioner (PreconSolve; nil means none, Jacobi is the diagonal one). SOR works on a CSR
// directly. All methods share Settings (tolerance on the relative residual ‖b − A x‖/‖b‖,
// iteration limit, progress hook; the zero value means the defaults) and report Stats, whose
// residual is always recomputed from b − A x. A solve that runs out of iterations returns
// ErrNotConverged with its best x; one that cannot go on returns ErrBreakdown; a cancelled
// context stops a solve within one iteration. A CG solve whose true residual stalls within the
// rounding error of computing it, above the tolerance, ends converged with Stats.Floor set.
// A Workspace holds the Krylov vectors for a sequence of solves (the superposition solves of ψ
// share one) and runs their kernels on the package's worker team.
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
// size per side; the multigrid preconditioner (NewMultigrid: a geometric V-cycle with Galerkin
// coarse operators, red–black Gauss–Seidel smoothing and an exact coarsest solve) makes it nearly
// constant. Method names for the physical problems: "auto" and "mgcg" (multigrid-preconditioned
// BiCGStab for ψ, CG for φ), "cg" (the same Krylov methods with Jacobi), "sor".
//
// # The stream function
//
// AssemblePsi builds the ψ system of a mesh under a bc.Set: Shortley–Weller rows on cut links,
// Dirichlet inlet (uniform inflow), ψ = 0 and Q on the walls, ∂ψ/∂x = 0 at the outlet, and one
// unknown constant per body, fixed by one condition per body. With the multigrid method SolvePsi
// appends the constants to the unknowns and the conditions to the rows and solves that bordered
// system once, by BiCGStab with a block preconditioner built on the V-cycle (psi_bordered.go);
// with the other methods it superposes — one solve with every body at ψ = 0 and one per body at
// ψ = 1, all with the same matrix and preconditioner — and solves the conditions as a small
// dense system. The conditions are a given circulation, measured on
// a closed staircase of regular links (exact for the discrete solution, whatever staircase is
// chosen) or, for a body too close to a wall for one, as the surface integral of the fitted
// tangential velocity; or the Kutta condition, which fits the corner-flow modes
// r^{kλ} sin(kλφ′), λ = π/(2π − τ), to ψ near the trailing edge and asks the singular mode's
// coefficient to vanish. HarmonicStencil is the weighted least-squares fit of harmonic
// polynomials that turns nodal ψ into wall speeds, shared with package flow.
//
// # The velocity potential
//
// AssemblePhi builds the φ system in the symmetric cut-face finite-volume form (each face's flux
// is its open fraction times the difference of the two values; Ng, Min & Gibou, J. Comput. Phys.
// 2009), so the matrix is symmetric positive definite: zero flux through walls and bodies, the
// inlet flux U·(open face length), φ = 0 on the outlet column (which removes the free constant).
// A body with circulation Γ gets a branch cut along cell faces from its trailing edge to the
// outlet; the jump Γ goes to the right-hand side of both rows of every cut face, keeping the
// matrix symmetric. SolvePhi solves it with CG.
//
// # Grid convergence
//
// GCI does Richardson extrapolation and the Grid Convergence Index of Celik et al., J. Fluids Eng.
// 130, 078001 (2008), following Roache (1994): the observed order by fixed-point iteration for
// uneven refinement ratios, the extrapolated value, the relative errors and the band, with
// oscillatory, diverging and out-of-range convergence flagged instead of banded.
//
// # References
//
//   - Y. Saad, Iterative Methods for Sparse Linear Systems, 2nd ed., SIAM, 2003: sparse storage
//     (ch. 3), Jacobi, Gauss-Seidel and SOR (ch. 4), CG (ch. 6), BiCGStab (ch. 7),
//     preconditioned iterations and Jacobi preconditioning (ch. 9, 10).
//   - H. A. van der Vorst, Bi-CGSTAB: a fast and smoothly converging variant of Bi-CG for the
//     solution of nonsymmetric linear systems, SIAM J. Sci. Stat. Comput. 13 (1992) 631–644.
//   - G. H. Shortley and R. Weller, The numerical solution of Laplace's equation, J. Appl. Phys. 9
//     (1938) 334–348; G. Yoon and C. Min, J. Sci. Comput. 67 (2016): second-order wall gradients.
//   - Y. T. Ng, C. Min and F. Gibou, J. Comput. Phys. 228 (2009): the symmetric cut-face form.
//   - O. Tatebe, The multigrid preconditioned conjugate gradient method, NASA CP-3224 (1993).
//   - I. B. Celik et al., J. Fluids Eng. 130 (2008) 078001; P. J. Roache, J. Fluids Eng. 116
//     (1994) 405–413: the Grid Convergence Index.
//   - D. M. Young, Iterative methods for solving partial difference equations of elliptic type,
//     Ph.D. thesis, Harvard University, 1950; R. S. Varga, Matrix Iterative Analysis,
//     Prentice-Hall, 1962, ch. 4: the optimal SOR factor ω = 2/(1 + √(1 − ρ_J²)).
package solver
