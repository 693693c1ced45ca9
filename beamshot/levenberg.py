"""Non-linear least squares by the Levenberg-Marquardt method, for small dense problems.

Minimises ``F(x) = 1/2 |r(x)|^2`` given the residuals ``r`` and their Jacobian ``J``: each step
solves ``(J^T J + mu I) h = -J^T r`` in variables scaled by ``x_scale``; a step that lowers ``F``
is taken and ``mu`` shrinks by ``max(1/3, 1 - (2 rho - 1)^3)`` (``rho``: actual over predicted
decrease), otherwise ``mu`` grows by ``nu`` and ``nu`` doubles.  This is Algorithm 3.16 of
K. Madsen, H. B. Nielsen, O. Tingleff, *Methods for Non-Linear Least Squares Problems*, 2nd ed.,
IMM DTU 2004 (Marquardt 1963; damping update by Nielsen 1999), with the stopping tests
``|g|_inf <= gtol``, ``|h| <= xtol (|x| + xtol)`` and, if ``ftol`` > 0, a step that lowers ``F``
by less than ``ftol F`` as predicted and as found (MINPACK's test; Moré, Garbow & Hillstrom 1980).

With ``bounds=(lower, upper)`` each trial point is projected onto the box (a projected
Levenberg-Marquardt step; Kanzow, Yamashita & Fukushima, J. Comput. Appl. Math. 172, 2004): the
variables held at a bound by the gradient are left out of the step (an active set), the
step taken is the projected one, its predicted decrease is that of the Gauss-Newton model for that
step, ``-h^T g - h^T A h / 2``, and gradient components that push against an active bound do not
count in the stopping test.

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


def _bounded_step(A, g, mu, x, scale, lower, upper, free) -> tuple[np.ndarray, bool]:
    """The damped step ``(A + mu I) h = -g`` over the variables a bound does not hold.  Without
    bounds, the plain step.  With bounds, of the variables the step would carry past a bound the one
    that meets its bound first is put on it and held, and the others are solved again with that move
    given (an active set grown one variable at a time until no free variable leaves the box).
    Returns the step and whether a bound cut it short (then a short step is no sign of a minimum:
    a coupled variable may still have room inside the box, which a larger damping lets it take)."""
    n = x.size
    if lower is None:
        return np.linalg.solve(A + mu * np.eye(n), -g), False
    h = np.zeros(n)
    cut = False
    held = free(g) == 0  # held at a bound by the gradient
    for _ in range(n + 1):
        fr = ~held
        if not fr.any():
            break
        rhs = -g[fr] - A[fr][:, held] @ h[held]
        h[fr] = np.linalg.solve(A[fr][:, fr] + mu * np.eye(int(fr.sum())), rhs)
        target = x + h * scale
        past = fr & ((target < lower) | (target > upper))
        if not past.any():
            break
        # the variable that meets its bound first along the step is put on it and held
        with np.errstate(divide="ignore", invalid="ignore"):
            reach = np.where(past, (np.clip(target, lower, upper) - x) / (target - x), np.inf)
        i = int(np.argmin(reach))
        h[i] = (float(np.clip(target[i], lower[i], upper[i])) - x[i]) / scale[i]
        held[i] = True
        cut = True
    return h, cut


def levenberg_marquardt(fun: Callable, x0, jac: Callable, *, x_scale=None, gtol: float = 1e-12,
                        xtol: float = 1e-12, max_iterations: int = 500, bounds=None,
                        ftol: float = 0.0) -> LeastSquaresFit:
    """Minimise ``|fun(x)|^2`` from ``x0`` with the Jacobian ``jac(x)``, optionally within
    ``bounds=(lower, upper)`` (see the module docstring)."""
    x = np.asarray(x0, float).copy()
    scale = np.ones_like(x) if x_scale is None else np.asarray(x_scale, float)
    if bounds is None:
        lower = upper = None
    else:
        lower, upper = (np.broadcast_to(np.asarray(b, float), x.shape) for b in bounds)
        x = np.clip(x, lower, upper)

    def free(g):  # the gradient without components pushing against an active bound
        if lower is None:
            return g
        return np.where(((x <= lower) & (g > 0)) | ((x >= upper) & (g < 0)), 0.0, g)

    r, J = np.asarray(fun(x), float), np.asarray(jac(x), float)
    Js = J * scale
    A, g = Js.T @ Js, Js.T @ r
    mu, nu = 1e-3 * float(np.max(np.diag(A))), 2.0
    cost = 0.5 * float(r @ r)
    converged = bool(np.max(np.abs(free(g))) <= gtol)
    k = 0
    while not converged and k < max_iterations:
        k += 1
        try:
            h, cut = _bounded_step(A, g, mu, x, scale, lower, upper, free)
        except np.linalg.LinAlgError:
            break
        x_new = x + h * scale
        if lower is not None:
            x_new = np.clip(x_new, lower, upper)  # rounding only: the step ends on or inside the box
            h = (x_new - x) / scale
        u = x / scale
        if not cut and np.linalg.norm(h) <= xtol * (np.linalg.norm(u) + xtol):
            converged = True
            break
        r_new = np.asarray(fun(x_new), float)
        cost_new = 0.5 * float(r_new @ r_new)
        if lower is None:  # the exact step: -h^T g - h^T A h / 2 = h^T (mu h - g) / 2
            predicted = 0.5 * float(h @ (mu * h - g))
        else:
            predicted = -float(h @ g) - 0.5 * float(h @ A @ h)
        rho = (cost - cost_new) / predicted if predicted > 0 else -1.0
        if rho > 0:
            small = ftol > 0 and cost - cost_new <= ftol * cost and predicted <= ftol * cost
            x, r, cost = x_new, r_new, cost_new
            J = np.asarray(jac(x), float)
            Js = J * scale
            A, g = Js.T @ Js, Js.T @ r
            converged = small or bool(np.max(np.abs(free(g))) <= gtol)
            mu *= max(1.0 / 3.0, 1.0 - (2.0 * rho - 1.0) ** 3)
            nu = 2.0
        else:
            mu *= nu
            nu *= 2.0
    return LeastSquaresFit(x=x, fun=r, jac=J, converged=converged, iterations=k)
