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

Hold value. A product may also state, through :meth:`Product.hold_value`, the value at an
exercise date of holding the right to the last exercise date (the European option on the
remaining life). It serves twice:

* as a basis function: the regression basis gains the hold value (over today's spot),
  the choice of basis with a European option value recommended in Glasserman (2004),
  *Monte Carlo Methods in Financial Engineering*, Springer, section 8.6 (choice of basis
  functions); the continuation value of a right close to its European is then nearly in
  the span of the basis;
* as a floor: holding to the last date is one of the holder's choices, so the
  continuation value is at least the hold value, and a path never exercises where the
  hold value exceeds its exercise value (the lower-bound rule; with no dividends an
  American call then never exercises early, as it should: Merton 1973). A noisy
  regression alone exercises such calls early by mistake deep in the money, where the
  continuation value exceeds the exercise value by only about ``K (1 - exp(-r dt))``.

The floor is only as good as the product's hold value, which it computes from what the
paths carry (rate, continuous yield, variance of the model); a model with features the
product cannot see (discrete cash dividends) would make it too high and block exercise
that pays. So, at each date, the floor is used only if the pilot paths do not contradict
it: over the in-the-money pilot paths, the discounted exercise value at the last date (the
realised outcome of holding) minus the hold value must not be significantly negative
(one-sided, :data:`FLOOR_Z` standard errors). A hold value that is a true European price
or a lower bound of one passes; one that ignores a dividend of material size fails, and
that date falls back to the regression alone. Whatever the rule, the policy is a policy:
its value on fresh paths stays low-biased.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import combinations

import numpy as np

from .product import Cashflows, Observed, Product

__all__ = ["Policy", "fit_policy", "basis"]

MIN_PATHS_PER_TERM = 10

FLOOR_Z = 5.0
"""Standard errors by which the pilot's mean of (realised hold outcome - hold value) over
the in-the-money paths must fall below zero before a date's floor is refused. Five keeps a
false refusal below 3e-7 per date, while a hold value that ignores a cash dividend of 1%
of the spot is refused at the pilot sizes used (65 536 paths)."""


def basis(x: np.ndarray, hold: np.ndarray | None = None) -> np.ndarray:
    """Regression basis of a state ``x`` of shape (paths, k): 1, x_i, x_i^2, x_i^3, x_i x_j,
    and the (scaled) hold value when given."""
    cols = [np.ones(x.shape[0])]
    for i in range(x.shape[1]):
        xi = x[:, i]
        cols += [xi, xi * xi, xi * xi * xi]
    for i, j in combinations(range(x.shape[1]), 2):
        cols.append(x[:, i] * x[:, j])
    if hold is not None:
        cols.append(hold)
    return np.column_stack(cols)


def _hold_values(product: Product, obs: Observed, j: int) -> np.ndarray | None:
    """The product's hold value at exercise date ``j`` over today's spot scale, or None."""
    hold = product.hold_value(obs, j)
    if hold is None:
        return None
    hold = np.asarray(hold, dtype=float)
    if hold.shape != (obs.paths,) or not np.all(np.isfinite(hold)):
        from .errors import PayoffError

        raise PayoffError(
            f"{type(product).__name__}.hold_value returned shape {hold.shape} or non-finite "
            f"values at exercise date {j}; expected ({obs.paths},) finite"
        )
    return hold


def _scale(obs: Observed) -> float:
    s0 = np.asarray(obs.s0, dtype=float)
    return float(np.mean(s0)) if s0.size else 1.0


@dataclass(frozen=True)
class Policy:
    """Fitted continuation-value coefficients, one entry per exercise date (``None`` at the
    last date, and where too few paths were in the money to fit)."""

    coefficients: tuple[np.ndarray | None, ...]
    exercise_times: np.ndarray
    uses_hold: tuple[bool, ...] = ()
    """Per date: whether the basis holds the hold value (the product gave one at fitting)."""
    floors: tuple[bool, ...] = ()
    """Per date: whether the hold value floors the continuation value (see the module notes)."""

    def cashflows(self, product: Product, obs: Observed) -> Cashflows:
        """Exercise value at each path's first exercise under the policy, with its date."""
        ex = _exercise_values(product, obs)
        n, m = ex.shape
        amount = np.zeros(n)
        time = np.full(n, self.exercise_times[-1])
        alive = np.ones(n, dtype=bool)
        scale = _scale(obs)
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
                with_hold = bool(self.uses_hold) and self.uses_hold[j]
                floor = bool(self.floors) and self.floors[j]
                hold = _hold_values(product, obs, j) if (with_hold or floor) else None
                h = hold[idx] / scale if (hold is not None and with_hold) else None
                cont = basis(product.regression_state(obs, j)[idx], h) @ beta
                go = ex[idx, j] >= cont
                if hold is not None and floor:
                    go &= ex[idx, j] >= hold[idx]
                stop = np.zeros(n, dtype=bool)
                stop[idx[go]] = True
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
    uses_hold = [False] * m
    floors = [False] * m
    scale = _scale(obs)
    held = ex[:, -1]  # what holding to the last date pays, path by path
    for j in range(m - 2, -1, -1):
        itm = np.flatnonzero(ex[:, j] > 0.0)
        state = product.regression_state(obs, j)
        hold = _hold_values(product, obs, j) if itm.size else None
        h = hold[itm] / scale if hold is not None else None
        x = basis(state[itm], h) if itm.size else np.empty((0, 1))
        if itm.size < MIN_PATHS_PER_TERM * max(1, x.shape[1]):
            continue
        y = cash[itm] * np.exp(-rate * (when[itm] - times[j]))
        beta, *_ = np.linalg.lstsq(x, y, rcond=None)
        coefs[j] = beta
        uses_hold[j] = hold is not None
        stop = ex[itm, j] >= x @ beta
        if hold is not None:
            floors[j] = _floor_consistent(held[itm] * np.exp(-rate * (times[-1] - times[j])) - hold[itm])
            if floors[j]:
                stop &= ex[itm, j] >= hold[itm]
        sel = itm[stop]
        cash[sel] = ex[sel, j]
        when[sel] = times[j]
    return Policy(tuple(coefs), times, tuple(uses_hold), tuple(floors))


def _floor_consistent(gap: np.ndarray) -> bool:
    """Whether realised-minus-claimed hold values ``gap`` (in-the-money pilot paths) are not
    significantly negative on average: the one-sided test of the module notes."""
    n = gap.size
    if n < 2:
        return False
    se = float(np.std(gap, ddof=1)) / np.sqrt(n)
    return float(np.mean(gap)) >= -FLOOR_Z * se
