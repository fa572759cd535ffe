"""Newton's method with a backtracking line search for small dense systems.

The Jacobian is formed by forward differences, optionally reused from a
neighbouring point and kept current between iterations by Broyden's rank-one
update; a fresh finite-difference Jacobian is formed whenever a step fails to
reduce the residual.

References
----------
J. E. Dennis and R. B. Schnabel, *Numerical Methods for Unconstrained
Optimization and Nonlinear Equations*, SIAM, 1996: ch. 6 (backtracking line
search, Armijo condition, Algorithm A6.3.1) and ch. 8 (Broyden's update,
eq. 8.1.5).  The linear systems are solved by LAPACK's LU (numpy.linalg.solve).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from ..errors import ConvergenceError, SolveError

__all__ = ["NewtonResult", "newton", "fd_jacobian"]


@dataclass
class NewtonResult:
    """Outcome of :func:`newton`."""

    x: np.ndarray
    F: np.ndarray
    iterations: int
    evaluations: int
    jacobians: int
    jacobian: np.ndarray

    @property
    def residual(self) -> float:
        return float(np.max(np.abs(self.F))) if self.F.size else 0.0


def fd_jacobian(fun: Callable[[np.ndarray], np.ndarray], x: np.ndarray, F: np.ndarray,
                step: float = 1e-7) -> np.ndarray:
    """Forward-difference Jacobian of ``fun`` at ``x`` with ``F = fun(x)``."""
    n = x.size
    J = np.empty((F.size, n))
    xp = x.copy()
    for j in range(n):
        xp[j] = x[j] + step
        J[:, j] = (fun(xp) - F) / step
        xp[j] = x[j]
    return J


def newton(fun: Callable[[np.ndarray], np.ndarray], x0: np.ndarray, *, tol: float = 1e-10,
           max_iter: int = 50, names: Sequence[str] = (), jacobian: np.ndarray | None = None,
           broyden: bool = True, max_step: float = 0.5,
           jacobian_fn: Callable | None = None) -> NewtonResult:
    """Solve ``fun(x) = 0`` to ``max|fun| <= tol``.

    Parameters
    ----------
    fun : residual function; may raise :class:`~simulator.errors.SolveError`
        (for example a property out of range) for a trial point, which the line
        search treats as a failed step.
    x0 : starting point
    tol : convergence tolerance on the largest residual [-]
    max_iter : bound on Newton iterations (the evaluation count is bounded too)
    names : names of the residual equations, for the error message
    jacobian : a Jacobian to start from (for example the neighbour's)
    broyden : keep the Jacobian current by Broyden's update between fresh
        finite-difference Jacobians
    max_step : largest change of any unknown in one step
    jacobian_fn : ``jacobian_fn(f, x, F)`` returns ``(F, J)``: the residuals and
        the Jacobian at ``x``, evaluating its base point through ``f`` so that
        it is counted; ``F`` is ``None`` at a start without a Jacobian, where the
        base evaluation is its own.  Its columns are counted as one evaluation
        each, however it forms them (as :func:`fd_jacobian`'s are)

    Raises
    ------
    ConvergenceError
        with the iteration count, the residual and the worst equation.
    """
    x = np.array(x0, dtype=float)
    evals = 0

    def call(z):
        nonlocal evals
        evals += 1
        return fun(z)

    J = None if jacobian is None else np.array(jacobian, dtype=float)
    fresh = False
    njac = 0
    if J is None and jacobian_fn is not None:  # a Jacobian first: one base evaluation
        F, J = jacobian_fn(call, x, None)
        evals += x.size
        njac = 1
        fresh = True
    else:
        F = call(x)
    it = 0
    while True:
        res = float(np.abs(F).max()) if F.size else 0.0
        if res <= tol:
            if J is None:
                J = np.zeros((F.size, x.size))
            return NewtonResult(x, F, it, evals, njac, J)
        if it >= max_iter or evals > 40 * max_iter + 4 * x.size * max_iter:
            worst = names[int(np.argmax(np.abs(F)))] if len(names) else "?"
            raise ConvergenceError("Newton's method did not converge", it, res, worst)
        if J is None:
            if jacobian_fn is None:
                J = fd_jacobian(call, x, F)
            else:
                J = jacobian_fn(call, x, F)[1]
                evals += x.size
            njac += 1
            fresh = True
        try:
            dx = -np.linalg.solve(J, F)
            singular = not np.all(np.isfinite(dx))
        except np.linalg.LinAlgError:
            singular = True
        if singular:
            if not fresh:
                J = None
                continue
            worst = names[int(np.argmax(np.abs(F)))] if len(names) else "?"
            raise ConvergenceError("the Jacobian is singular (an unknown has no effect)",
                                   it, res, worst)
        big = float(np.max(np.abs(dx)))
        if big > max_step:
            dx *= max_step / big
        f0 = 0.5 * float(F @ F)
        lam = 1.0
        accepted = False
        for _ in range(20):
            xt = x + lam * dx
            try:
                Ft = call(xt)
                ok = np.all(np.isfinite(Ft))
            except SolveError:
                ok = False
            if ok and 0.5 * float(Ft @ Ft) <= (1.0 - 1e-4 * lam) * f0:
                accepted = True
                break
            lam *= 0.5
        it += 1
        if not accepted:
            if fresh:
                worst = names[int(np.argmax(np.abs(F)))] if len(names) else "?"
                raise ConvergenceError("the line search found no better point", it, res, worst)
            J = None  # stale Jacobian: form a fresh one and retry
            continue
        s = xt - x
        if broyden:  # J += (y - J s) s^T / (s^T s), in place (J is this solve's own copy;
            # the same update as formed anew, rounded otherwise)
            u = Ft - F
            u -= J @ s
            u /= float(s @ s)
            J += u[:, None] * s
            fresh = False
        else:
            J = None
        x, F = xt, Ft
