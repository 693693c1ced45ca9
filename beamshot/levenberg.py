"""Non-linear least squares by the Levenberg-Marquardt method, for small dense problems.

Minimises ``F(x) = 1/2 |r(x)|^2`` given the residuals ``r`` and their Jacobian ``J``: each step
solves ``(J^T J + mu I) h = -J^T r`` in variables scaled by ``x_scale``; a step that lowers ``F``
is taken and ``mu`` shrinks by ``max(1/3, 1 - (2 rho - 1)^3)`` (``rho``: actual over predicted
decrease), otherwise ``mu`` grows by ``nu`` and ``nu`` doubles.  This is Algorithm 3.16 of
K. Madsen, H. B. Nielsen, O. Tingleff, *Methods for Non-Linear Least Squares Problems*, 2nd ed.,
IMM DTU 2004 (Marquardt 1963; damping update by Nielsen 1999), with the stopping tests
``|g|_inf <= gtol`` and ``|h| <= xtol (|x| + xtol)``.

The light-pose fit (beamshot/aim.py) runs on every analysis; SciPy's ``least_squares`` would cost
about 0.3 s of import per process for a five-parameter fit of a few hundred points.
tests/test_numerics.py checks that the minimum found equals SciPy's.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

__all__ = ["LeastSquaresFit", "levenberg_marquardt"]


@dataclass(frozen=True)
class LeastSquaresFit:
    """The solution ``x``, its residuals ``fun`` and Jacobian ``jac``, and whether a stopping test was met."""

    x: np.ndarray
    fun: np.ndarray
    jac: np.ndarray
    converged: bool
    iterations: int


def levenberg_marquardt(fun: Callable, x0, jac: Callable, *, x_scale=None, gtol: float = 1e-12,
                        xtol: float = 1e-12, max_iterations: int = 500) -> LeastSquaresFit:
    """Minimise ``|fun(x)|^2`` from ``x0`` with the Jacobian ``jac(x)`` (see the module docstring)."""
    x = np.asarray(x0, float).copy()
    scale = np.ones_like(x) if x_scale is None else np.asarray(x_scale, float)
    r, J = np.asarray(fun(x), float), np.asarray(jac(x), float)
    Js = J * scale
    A, g = Js.T @ Js, Js.T @ r
    mu, nu = 1e-3 * float(np.max(np.diag(A))), 2.0
    cost = 0.5 * float(r @ r)
    converged = bool(np.max(np.abs(g)) <= gtol)
    k = 0
    while not converged and k < max_iterations:
        k += 1
        try:
            h = np.linalg.solve(A + mu * np.eye(x.size), -g)
        except np.linalg.LinAlgError:
            break
        u = x / scale
        if np.linalg.norm(h) <= xtol * (np.linalg.norm(u) + xtol):
            converged = True
            break
        x_new = x + h * scale
        r_new = np.asarray(fun(x_new), float)
        cost_new = 0.5 * float(r_new @ r_new)
        predicted = 0.5 * float(h @ (mu * h - g))
        rho = (cost - cost_new) / predicted if predicted > 0 else -1.0
        if rho > 0:
            x, r, cost = x_new, r_new, cost_new
            J = np.asarray(jac(x), float)
            Js = J * scale
            A, g = Js.T @ Js, Js.T @ r
            converged = bool(np.max(np.abs(g)) <= gtol)
            mu *= max(1.0 / 3.0, 1.0 - (2.0 * rho - 1.0) ** 3)
            nu = 2.0
        else:
            mu *= nu
            nu *= 2.0
    return LeastSquaresFit(x=x, fun=r, jac=J, converged=converged, iterations=k)
