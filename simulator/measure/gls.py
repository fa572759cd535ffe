"""Generalised least squares of redundant measurements: the statistics of VDI 2048.

VDI 2048 Part 1, "Uncertainties of measurement during acceptance tests on
energy-conversion and power plants: Fundamentals" (VDI, Duesseldorf, 2000)
reconciles redundant measurements by the Gaussian principle: of all value sets
that satisfy the model's balances exactly, take the one that minimises the
weighted sum of squared corrections, ``v^T S_x^-1 v``.  It gives

* the reconciled values and their covariance, smaller than the measurements';
* the quality criterion: the weighted sum of squares follows a chi-square
  distribution with as many degrees of freedom as the balances add redundancy;
  the data pass at 95 % when it is below the 95 % quantile;
* each measurement's individual test: its correction over the standard
  deviation of that correction, compared with 1.96 (95 %, two-sided).  With
  many readings some exceed 1.96 by chance; a reading is called *suspect*
  beyond the limit corrected for their number (:attr:`Reconciled.family_limit`).

:func:`reconcile_linear` is the textbook form for linear balances ``A x = 0``
(every quantity measured); :func:`statistics` the same quantities for a model
``x = g(theta)`` linearised at the least-squares solution (the weighted
Jacobian), as :mod:`simulator.measure.fit` uses with the turbine model.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.stats import chi2, norm

from .tags import COVERAGE

__all__ = ["Reconciled", "reconcile_linear", "statistics", "INDIVIDUAL_LIMIT"]

#: the individual test's limit: a correction beyond 1.96 standard deviations of the
#: correction is suspect at 95 % (VDI 2048 Part 1, 2000)
INDIVIDUAL_LIMIT = COVERAGE


@dataclass
class Reconciled:
    """The outcome of one reconciliation (SI units of the measurements).

    ``measured``, ``sigma``: the readings and their standard uncertainties;
    ``reconciled``, ``reconciled_sigma``: the reconciled values and theirs;
    ``z``: each correction over its own standard deviation (NaN where the balances
    add no redundancy to that reading: it cannot be tested); ``chi2`` the weighted
    sum of squared corrections, ``dof`` its degrees of freedom, ``chi2_limit`` the
    95 % quantile.
    """

    measured: np.ndarray
    sigma: np.ndarray
    reconciled: np.ndarray
    reconciled_sigma: np.ndarray
    z: np.ndarray
    chi2: float
    dof: int
    chi2_limit: float

    @property
    def passed(self) -> bool:
        """The quality criterion holds at 95 %."""
        return self.dof == 0 or self.chi2 <= self.chi2_limit

    @property
    def family_limit(self) -> float:
        """The limit of ``|z|`` at which a reading is called suspect: the individual
        test at the Sidak-corrected level ``1 - 0.95^(1/n)`` over the ``n`` testable
        readings, so that data without a gross error name no reading in 95 % of
        cases (the maximum-normed-residual test with a modified level, Narasimhan
        and Jordache, "Data Reconciliation and Gross Error Detection", Gulf, 2000,
        ch. 7, from memory)."""
        n = max(int(np.isfinite(self.z).sum()), 1)
        return float(norm.ppf(1.0 - (1.0 - 0.95 ** (1.0 / n)) / 2.0))

    @property
    def exceeds(self) -> np.ndarray:
        """Indices of the readings beyond the individual test's 1.96, worst first."""
        z = np.nan_to_num(np.abs(self.z), nan=0.0)
        bad = np.flatnonzero(z > INDIVIDUAL_LIMIT)
        return bad[np.argsort(-z[bad])]

    @property
    def suspect(self) -> np.ndarray:
        """Indices of the suspect readings (beyond :attr:`family_limit`), worst first."""
        z = np.nan_to_num(np.abs(self.z), nan=0.0)
        bad = np.flatnonzero(z > self.family_limit)
        return bad[np.argsort(-z[bad])]


def _limit(dof: int) -> float:
    return float(chi2.ppf(0.95, dof)) if dof > 0 else float("nan")


def reconcile_linear(A, x, sigma) -> Reconciled:
    """Reconcile readings ``x`` of quantities bound by linear balances ``A x = 0``.

    Parameters
    ----------
    A : balance matrix, one row per balance, one column per quantity [-]
    x : the readings [unit of each quantity]
    sigma : their standard uncertainties (the 95 % uncertainty over 1.96)
        [unit of each quantity]

    Returns
    -------
    Reconciled
        ``x_hat = x - S A^T (A S A^T)^-1 A x``, covariance
        ``S_hat = S - S A^T (A S A^T)^-1 A S``, the chi-square quality criterion
        ``(A x)^T (A S A^T)^-1 (A x)`` with rank(A) degrees of freedom and the
        individual tests ``v_i / sqrt(S_ii - S_hat_ii)`` (VDI 2048 Part 1, 2000).
    """
    A = np.atleast_2d(np.asarray(A, dtype=float))
    x = np.asarray(x, dtype=float)
    sigma = np.asarray(sigma, dtype=float)
    S = np.diag(sigma**2)
    M = A @ S @ A.T
    Minv = np.linalg.pinv(M)
    r = A @ x
    K = S @ A.T @ Minv
    x_hat = x - K @ r
    S_v = K @ A @ S  # covariance of the corrections
    S_hat = S - S_v
    dof = int(np.linalg.matrix_rank(A))
    var_v = np.diag(S_v)
    v = x_hat - x
    with np.errstate(invalid="ignore", divide="ignore"):
        z = np.where(var_v > 1e-12 * sigma**2, v / np.sqrt(np.maximum(var_v, 0.0)), np.nan)
    return Reconciled(x, sigma, x_hat, np.sqrt(np.maximum(np.diag(S_hat), 0.0)), z,
                      float(r @ Minv @ r), dof, _limit(dof))


def statistics(measured, sigma, predicted, J_w) -> tuple[Reconciled, np.ndarray]:
    """The reconciliation statistics of a least-squares fit of a model to readings.

    Parameters
    ----------
    measured : the readings [unit of each]
    sigma : their standard uncertainties [unit of each]
    predicted : the model's values at the solution: the reconciled values [unit of each]
    J_w : Jacobian of ``(predicted - measured) / sigma`` with respect to the
        parameters, at the solution [1/unit of each parameter]

    Returns
    -------
    (Reconciled, C_theta)
        The statistics, and the covariance of the parameters
        ``(J_w^T J_w)^-1`` [unit of each parameter squared].  The leverage
        ``h_i = (J_w C_theta J_w^T)_ii`` gives the reconciled variance
        ``sigma_i^2 h_i`` and the variance of the correction ``sigma_i^2 (1 - h_i)``
        (linearised; exact for linear balances).
    """
    measured = np.asarray(measured, dtype=float)
    sigma = np.asarray(sigma, dtype=float)
    predicted = np.asarray(predicted, dtype=float)
    C = np.linalg.inv(J_w.T @ J_w)
    h = np.einsum("ij,jk,ik->i", J_w, C, J_w)
    r = (predicted - measured) / sigma
    dof = int(len(measured) - J_w.shape[1])
    with np.errstate(invalid="ignore", divide="ignore"):
        z = np.where(1.0 - h > 1e-9, r / np.sqrt(np.maximum(1.0 - h, 0.0)), np.nan)
    rec = Reconciled(measured, sigma, predicted, sigma * np.sqrt(np.clip(h, 0.0, 1.0)), z,
                     float(r @ r), dof, _limit(dof))
    return rec, C
