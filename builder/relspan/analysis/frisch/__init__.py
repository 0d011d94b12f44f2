"""Diagonal noise of unknown variances: the Frisch scheme.

Every variable is observed with its own independent noise, ``N = D = diag(d)``
with ``d >= 0``, and the noise-free covariance ``S_hat = S - D`` must be
positive semidefinite. Corank ``q`` means ``rank(S_hat) = n - q``; the
relations are the rows of ``A`` (``q x n``) with ``A S_hat = 0``. With
``P = inv(S)``, every feasible noise variance lies in ``[0, 1/P[j, j]]``.

What this package offers (one module per algorithm)
--------------------------------------------------
* ``orthant``: :func:`one_orthant` (can ``P`` be signed elementwise positive,
  i.e. all elementary regressions in one orthant?) and :func:`frisch_q1`
  (the set of single relations, q = 1: the simplex of the elementary
  regressions when one orthant holds, an unbounded set otherwise).
* ``triad``: :func:`triad`, for three variables the one-factor (rank-1)
  decomposition.
* ``mintrace``: :func:`minimum_trace`, our own interior-point solver of the
  (weighted) minimum-trace problem ``max w'd  s.t.  S - diag(d) PSD, d >= 0``.
* ``minrank`` (private): the ten Berge & Kiers minimum-rank search.
* ``corank``: :func:`frisch_max_corank`, the largest corank with an
  existence certificate, impossibility certificates, and "undetermined" in
  between; :func:`ledermann_corank`.
* ``identification`` and ``spread``: :func:`frisch_identification`, the
  parameter count for point identification, and :func:`solution_spread`,
  when it fails, the spread of the relation subspaces across many corank-q
  solutions.
* ``analysis``: :func:`frisch_analysis`, all of the above for one window
  (``warm=`` a previous, overlapping window's result).
* ``corank`` also offers :func:`frisch_corank_stack`: the corank of each of
  many resampled covariances, warm-started from the estimate (resampling
  support), :func:`frisch_max_corank_many` (the same as one
  :func:`frisch_max_corank` per covariance, the minimum-trace solves of all
  stacked into one batched solve) and :func:`corank_verdict`.

Numerical method
----------------
All searches run on the correlation scale ``R = diag(s)^-1 S diag(s)^-1``
(the scheme is equivariant under diagonal scaling) and are mapped back:
noise variances by ``s_j^2``, relation coefficients by ``1/s_j``. The
tolerance ``eps`` is therefore relative to each variable's variance.

The weighted minimum-trace problem is solved by a log-barrier (primal)
interior-point method: Newton steps on ``-t w'd - log det(R - D) - sum log d``
with gradient ``-t w + diag(W) - 1/d`` and Hessian ``W o W + diag(1/d^2)``
(``W = inv(R - D)``, ``o`` the elementwise product), a step limited to the
feasible region by the largest eigenvalue of ``L^-1 diag(dx) L^-T``, and
``t`` multiplied by a fixed factor until the barrier duality gap ``2n/t`` is
below tolerance (Boyd & Vandenberghe 2004, ch. 11). On the central path the
duality gap is ``2n/t``; the solver reports it. Centring that fails through
rounding (``R - D`` singular to working precision) falls back to the last
centred iterate.

Minimum-rank refinement follows ten Berge & Kiers (1991): the sum of the
``q`` smallest eigenvalues of ``R - D`` is concave in ``d``; replacing it by
its linearisation at the current eigenvectors ``V`` gives the weighted trace
problem with weights ``w_j = sum_k V[j, k]^2``, whose solution never
increases the objective. This is run from the minimum-trace solution and
from random feasible starts.

Certificates (on the correlation scale)
---------------------------------------
* Existence of corank ``q`` within ``eps``: ``d >= 0`` and ``R - D - E`` PSD
  with ``q`` zero eigenvalues, where ``E`` collects the ``q`` smallest
  eigen-pairs of ``R - D`` (and any negative ones); ``||E||_2 <= eps``.
* Impossibility: with ``r_j(eps) = 1/inv(R + eps I)[j, j]``, every ``d``
  admitted above satisfies ``d <= r(eps)``, hence
  ``lambda_q(R - diag r(eps)) <= eps``; a larger value rules corank ``q`` out.

Certified accuracy (for rounding published numbers)
---------------------------------------------------
Measured as the largest difference between two OpenBLAS kernels
(``OPENBLAS_CORETYPE=Haswell`` vs ``SkylakeX``) over the demo's results,
with the minimum-trace solve run to a relative duality gap of 1e-12. What the
site publishes is set in one place, relspan.precision: every number of this
analysis to 4 significant digits (of an array's largest entry), certificate
relations and Newton step counts not at all; the accuracies below are what that rests on.

* minimum-trace and certificate noise variances, noise shares: absolute
  5.3e-16 on the correlation scale. Off the demo, a component at the boundary (a
  variance near zero) is fixed only to about the square root of the solve's
  duality gap: one moved from 2.0e-9 to 4.0e-8 between two kernels in an
  unstructured n = 7 case (tests/analysis/test_frisch_answers.py, case 24),
  below the 4 published digits of the array's largest entry.
* eigenvalues of ``R - D``, ``e_norm``, ``min_eigenvalue``: absolute
  1.8e-15 (correlation scale); their relative digits are noise (near-zero
  numbers), so relspan.precision rounds the residuals on the scale of their
  sibling eigenvalues, not on their own size.
* ``min_trace.value``, triad loadings and noise variances, elementary
  entries, orthant products: closed forms or converged to 1e-12 relative.
* certificate ``relations`` (and the relation bases taken from them):
  differed by up to 5.5e-4 absolute. When the certifying ``d`` has more
  than ``q`` near-zero eigenvalues, the corank-q relations are one choice
  inside a larger null space and are not determined: not published (the
  span at the largest certified corank is).
* ``newton_steps`` and ``iterations`` are counts of an iterative path and
  differ between kernels (45 vs 82 seen): not reproducible numbers
  (``newton_steps`` is not published).
* spread angles: the largest principal angle among the members found is a
  lower bound from a search, resolved to about 1e-3 degrees.

References
----------
.. [1] R. Frisch, Statistical Confluence Analysis by Means of Complete
       Regression Systems, Universitetets Økonomiske Institutt, Oslo, 1934.
.. [2] O. Reiersøl, "Confluence analysis by means of lag moments and other
       methods of confluence analysis", Econometrica 9(1), 1-24, 1941.
.. [3] S. Klepper and E. E. Leamer, "Consistent sets of estimates for
       regressions with errors in all variables", Econometrica 52(1),
       163-183, 1984.
.. [4] A. Shapiro, "Rank-reducibility of a symmetric matrix and sampling
       theory of minimum trace factor analysis", Psychometrika 47(2),
       187-199, 1982.
.. [5] G. Della Riccia and A. Shapiro, "Minimum rank and minimum trace of
       covariance matrices", Psychometrika 47(4), 443-448, 1982.
.. [6] J. M. F. ten Berge and H. A. L. Kiers, "A numerical approach to the
       approximate and the exact minimum rank of a covariance matrix",
       Psychometrika 56(2), 309-315, 1991.
.. [7] A. Shapiro and J. M. F. ten Berge, "Statistical inference of minimum
       rank factor analysis", Psychometrika 67(1), 79-94, 2002.
.. [8] L. Ning, T. T. Georgiou, A. Tannenbaum and S. P. Boyd, "Linear models
       based on noisy data and the Frisch scheme", SIAM Review 57(2),
       167-197, 2015.
.. [9] W. Ledermann, "On the rank of the reduced correlational matrix in
       multiple-factor analysis", Psychometrika 2(2), 85-93, 1937.
.. [10] C. Spearman, "'General intelligence', objectively determined and
        measured", American Journal of Psychology 15(2), 201-292, 1904.
.. [11] C. Gini, "Sull'interpolazione di una retta quando i valori della
        variabile indipendente sono affetti da errori accidentali", Metron 1,
        63-82, 1921.
.. [12] S. Boyd and L. Vandenberghe, Convex Optimization, Cambridge
        University Press, 2004.
.. [13] Å. Björck and G. H. Golub, "Numerical methods for computing angles
        between linear subspaces", Mathematics of Computation 27(123),
        579-594, 1973.
"""

from relspan.analysis.frisch.analysis import FrischResult, frisch_analysis
from relspan.analysis.frisch.corank import (CorankCertificate, FrischCorank, FrischCorankStack, corank_verdict,
                                            frisch_corank_stack, frisch_max_corank, frisch_max_corank_many,
                                            ledermann_corank)
from relspan.analysis.frisch.identification import FrischIdentification, frisch_identification
from relspan.analysis.frisch.mintrace import MinimumTrace, minimum_trace
from relspan.analysis.frisch.orthant import (CoefficientInterval, FailingTriple, FrischSet, OrthantTest,
                                             frisch_q1, one_orthant)
from relspan.analysis.frisch.spread import SolutionSpread, solution_spread
from relspan.analysis.frisch.triad import TriadResult, triad

__all__ = [
    "FailingTriple",
    "OrthantTest",
    "CoefficientInterval",
    "FrischSet",
    "TriadResult",
    "MinimumTrace",
    "CorankCertificate",
    "FrischCorank",
    "FrischIdentification",
    "SolutionSpread",
    "FrischResult",
    "one_orthant",
    "frisch_q1",
    "triad",
    "minimum_trace",
    "ledermann_corank",
    "frisch_max_corank",
    "frisch_identification",
    "solution_spread",
    "frisch_analysis",
    "FrischCorankStack",
    "corank_verdict",
    "frisch_corank_stack",
    "frisch_max_corank_many",
]
