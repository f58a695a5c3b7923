"""Early exercise by Longstaff-Schwartz regression.

Longstaff, F. A. and Schwartz, E. S. (2001), "Valuing American options by simulation: a
simple least-squares approach", Review of Financial Studies 14(1), 113-147.

The policy is fitted on pilot paths of their own (:func:`fit_policy`) and then applied to
the pricing paths (:meth:`Policy.cashflows`). Fitting and valuing on the same paths would
let the policy see the future of the very paths it is valued on (a high bias); valuing a
fitted policy on fresh paths gives a low-biased estimate: a policy cannot beat the optimal
one. That direction of the bias is what the declared allowance of a reduction to a
lattice American price refers to.

At each exercise date, only in-the-money paths enter the regression of the discounted
realised cash flow on a polynomial basis of the state (cubic in each state variable and,
with several variables, their pairwise products). A path exercises when its exercise value
is positive and at least the fitted continuation value; at the last exercise date, when
the exercise value is positive.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import combinations

import numpy as np

from .product import Cashflows, Observed, Product

__all__ = ["Policy", "fit_policy", "basis"]

MIN_PATHS_PER_TERM = 10


def basis(x: np.ndarray) -> np.ndarray:
    """Regression basis of a state ``x`` of shape (paths, k): 1, x_i, x_i^2, x_i^3, x_i x_j."""
    cols = [np.ones(x.shape[0])]
    for i in range(x.shape[1]):
        xi = x[:, i]
        cols += [xi, xi * xi, xi * xi * xi]
    for i, j in combinations(range(x.shape[1]), 2):
        cols.append(x[:, i] * x[:, j])
    return np.column_stack(cols)


@dataclass(frozen=True)
class Policy:
    """Fitted continuation-value coefficients, one entry per exercise date (``None`` at the
    last date, and where too few paths were in the money to fit)."""

    coefficients: tuple[np.ndarray | None, ...]
    exercise_times: np.ndarray

    def cashflows(self, product: Product, obs: Observed) -> Cashflows:
        """Exercise value at each path's first exercise under the policy, with its date."""
        ex = _exercise_values(product, obs)
        n, m = ex.shape
        amount = np.zeros(n)
        time = np.full(n, self.exercise_times[-1])
        alive = np.ones(n, dtype=bool)
        for j in range(m):
            candidates = alive & (ex[:, j] > 0.0)
            if not candidates.any():
                continue
            beta = self.coefficients[j]
            if j == m - 1:
                stop = candidates
            elif beta is None:
                continue
            else:
                idx = np.flatnonzero(candidates)
                cont = basis(product.regression_state(obs, j)[idx]) @ beta
                stop = np.zeros(n, dtype=bool)
                stop[idx[ex[idx, j] >= cont]] = True
            amount[stop] = ex[stop, j]
            time[stop] = self.exercise_times[j]
            alive &= ~stop
        return Cashflows(amount, time)


def _exercise_values(product: Product, obs: Observed) -> np.ndarray:
    from .errors import LimitcaseError, PayoffError
    from .legs import as_amounts

    name = type(product).__name__
    try:
        raw = product.exercise_value(obs)
    except LimitcaseError:
        raise
    except Exception as exc:  # the product's own code failed: an error for its checks only
        raise PayoffError(f"{name}.exercise_value raised {type(exc).__name__}: {exc}") from exc
    ex = as_amounts(raw, f"{name}.exercise_value", obs.paths)
    n_ex = len(product.exercise_dates())
    if ex.ndim == 1 and n_ex == 1:
        ex = ex[:, None]
    if ex.shape != (obs.paths, n_ex):
        raise PayoffError(
            f"{type(product).__name__}.exercise_value returned shape {ex.shape}; "
            f"expected ({obs.paths}, {n_ex})"
        )
    return ex


def fit_policy(product: Product, obs: Observed, rate: float) -> Policy:
    """Fit the Longstaff-Schwartz continuation values on the pilot paths in ``obs``."""
    times = np.asarray(product.exercise_dates(), dtype=float)
    ex = _exercise_values(product, obs)
    n, m = ex.shape
    cash = ex[:, -1].copy()  # realised cash flow under the policy being built, backwards
    when = np.full(n, times[-1])
    coefs: list[np.ndarray | None] = [None] * m
    for j in range(m - 2, -1, -1):
        itm = np.flatnonzero(ex[:, j] > 0.0)
        state = product.regression_state(obs, j)
        x = basis(state[itm]) if itm.size else np.empty((0, 1))
        if itm.size < MIN_PATHS_PER_TERM * max(1, x.shape[1]):
            continue
        y = cash[itm] * np.exp(-rate * (when[itm] - times[j]))
        beta, *_ = np.linalg.lstsq(x, y, rcond=None)
        coefs[j] = beta
        stop = ex[itm, j] >= x @ beta
        sel = itm[stop]
        cash[sel] = ex[sel, j]
        when[sel] = times[j]
    return Policy(tuple(coefs), times)
