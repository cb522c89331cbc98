"""Tolerances, defined once, each with the reason for its value."""

from __future__ import annotations

#: Geometric tolerance for healing, in metres.  Drawn centrelines that are
#: meant to meet but miss by less than this are merged.  1 mm is well below
#: any joint size used in space frames (node balls and gusset plates are
#: tens of millimetres) and well above CAD round-off at building scale
#: (coordinates of 100 m printed to 6 significant figures err by ~0.1 mm).
GEOMETRY_TOLERANCE = 1.0e-3

#: Relative equilibrium residual above which a solve is rejected.  A sound
#: direct factorisation of a well-conditioned stiffness matrix gives ~1e-14;
#: 1e-8 leaves room for ill conditioning from members of very different
#: stiffness but still catches near-singular (mechanism) solves, whose
#: residuals are of order 1e-3 or worse.
RESIDUAL_TOLERANCE = 1.0e-8

#: Relative tolerance on the balance of reactions against applied loads per
#: axis (as a fraction of the largest applied load component).  Same
#: reasoning as RESIDUAL_TOLERANCE.
BALANCE_TOLERANCE = 1.0e-8

#: Relative tolerance for deciding that a member direction is parallel to a
#: line or in a plane (sine of the angle).  1e-6 rad is far below any
#: deliberately drawn angle and far above float64 round-off of unit vectors.
ANGLE_TOLERANCE = 1.0e-6

#: Relative singular-value threshold for the rank of the equilibrium matrix
#: (times the largest singular value).  Common practice for numerical rank
#: (cf. numpy.linalg.matrix_rank, which uses max(M, N) * eps).
RANK_TOLERANCE = 1.0e-9

#: Ratio of smallest to largest eigenvalue of a node's 3x3 stiffness below
#: which the node is taken to have no stiffness in that direction.  A member
#: at angle theta out of a plane contributes sin(theta)**2 of its stiffness
#: across it: 1e-10 is theta ~ 1e-5 rad, far flatter than any frame is drawn
#: on purpose, yet far above the ~1e-16 left by round-off in a rotated flat
#: truss.
NODE_STIFFNESS_RATIO = 1.0e-10

#: Largest ratio of member axial stiffnesses EA/L that a solve accepts.
#: Round-off in the force of a stiff member grows as (stiffness ratio) x
#: 1e-16 of the load (unit round-off of float64, common practice for the
#: forward error of a linear solve, cf. Higham, "Accuracy and Stability of
#: Numerical Algorithms", 2nd ed., ch. 7); 1e10 keeps forces good to about
#: 1e-6 and covers any real contrast (a 1 mm² tie beside a 1 m² chord of a
#: tenth of its length is 1e7).
MAX_STIFFNESS_RATIO = 1.0e10

#: Free degrees of freedom up to which eigenproblems use the dense LAPACK
#: solver.  A dense generalised eigenproblem of 600 unknowns takes ~0.1 s;
#: above that the sparse Lanczos iteration is faster and its memory stays
#: linear (measured here).
DENSE_EIGEN_LIMIT = 600

#: An eigenvalue mu of B phi = mu K phi with |mu| at most this fraction of the
#: spectral scale is taken as zero: no buckling factor (or an infinite
#: frequency) in that direction.  Round-off in mu stays near 1e-16 of the
#: scale; 1e-10 leaves six orders for ill conditioning.
ZERO_EIGENVALUE = 1.0e-10

#: Largest relative eigen-residual ||B phi - mu K phi|| / (max|mu| ||K phi||)
#: accepted.  ARPACK converges to ~1e-12 here; 1e-6 still rejects a wrong pair.
EIGEN_RESIDUAL = 1.0e-6

#: Halvings of the buckling shift tried before falling back to a shift of
#: zero.  Six halvings take the shift to 1/64 of its first value, where a
#: factorisation that still fails points to a near-mechanism, not the shift.
BUCKLING_SHIFT_TRIES = 6

#: Fraction of the estimated lowest buckling factor used as the first shift.
#: The estimate is a Rayleigh-Ritz upper bound (analysis/eigen.factor_upper_bound:
#: single directions and one inverse-iteration step), a few per cent above the
#: lowest factor on regular grids, so 0.9 usually puts the shift below it at the
#: first try; the shift is halved while the shifted matrix is not positive definite.
BUCKLING_SHIFT_FRACTION = 0.9

#: Relative accuracy asked of the short Lanczos run that only estimates the
#: lowest buckling factor for the shift; 1e-2 is ample for a shift of 0.9.
EIGEN_ESTIMATE_TOLERANCE = 1.0e-2

#: Relative accuracy asked of the shifted (buckling-mode) Lanczos run; well
#: inside EIGEN_RESIDUAL, which checks every pair afterwards.
SHIFTED_LANCZOS_TOLERANCE = 1.0e-10
