"""Options with early exercise, valued by Longstaff-Schwartz regression.

The engine fits the exercise policy on pilot paths of their own and values it on fresh
paths (:mod:`limitcase.exercise`), so a price is low-biased by the policy's suboptimality:
a policy cannot beat the optimal one. The products here only say when the holder may
exercise and what exercise pays.

How the limits are checked. One exercise date (at expiry) is the European option, path
by path. A call on a stock without dividends is never worth exercising early (Merton
1973), so the Bermudan and the American call are the European call; the check is
statistical and has no allowance, since a policy that exercises early by mistake shows as
a low price there. The policy's hold value (:meth:`_EarlyExercise.hold_value`, the
Black-Scholes European of the remaining life) is in its regression basis and floors its
continuation value (:mod:`limitcase.exercise`), so without dividends the policy never
exercises a call early and the two agree on every path. Against the binomial lattice
(:func:`limitcase.references.lattice_price`) every early-exercise product may fall short
by its declared Longstaff-Schwartz allowance, measured (:data:`MEASURED_SHORTFALL`), and
none may exceed its lattice price (no allowance: that would mean the policy saw the
future). More exercise dates (nested) never lower the price, and early exercise is worth
at least the European option; both statistically, since each side has its own policy.

The calls are checked on a stock with a high dividend yield (:data:`CALL_SCENARIO`), where
early exercise is worth something, and on one paying a cash dividend just before expiry
(:data:`DIVIDEND_SCENARIO`), where the lattice with discrete dividends
(:func:`limitcase.references.lattice_price_dividends`) prices the early-exercise premium.
Before the hold value, a cubic basis in S/S0 alone exercised calls early by mistake deep in
the money: about 0.02 below the European call with 12 dates and no dividends, 0.1 with 50
dates at a 2% yield (measured with 65 536 pilot paths, plain sampling); with it, the
no-dividend calls equal the European on every path.

Defaults are in the money (puts K = 110, calls K = 90, spot 100), as in the
Longstaff-Schwartz cases, so that early exercise matters and strike and spot differ.
"""

from __future__ import annotations

import math

import numpy as np

from limitcase import BlackScholes, Bound, Monotone, Param, Product, Reduction
from limitcase.errors import NoReference
from limitcase.models import DividendBlackScholes
from limitcase.references import black_scholes, lattice_price, lattice_price_dividends

from limitcase.references.schedules import equal_steps

from ._common import bs_inputs, even_dates, own_closed_form
from .vanilla import EuropeanCall, EuropeanPut

MEASURED_SHORTFALL: dict[str, tuple[float, float, int, str]] = {
    # product: (largest measured shortfall below the lattice at the defaults, the default
    # strike, seeds measured, what). Measured with benchmarks/high_paths.py at 1,000,000
    # paths, 65,536 pilot paths, the checks' own sampling (randomised Sobol points; control
    # variates where they apply), seeds 1 to 5 (the cash-dividend product: seeds 3 to 5);
    # each seed gives two samples (the lattice reduction and the at-most-lattice bound, on
    # streams of their own). Mean shortfalls: 0.0028, 0.0025, 0.0189, 0.0173, 0.0277.
    "BermudanPut": (0.0066, 110.0, 5, "12 dates, lattice on the same dates"),
    "BermudanCall": (0.0061, 90.0, 5, "12 dates, dividend yield 0.08, lattice on the same dates"),
    "AmericanPut": (0.0228, 110.0, 5, "50 dates against the lattice's American exercise"),
    "AmericanCall": (0.0214, 90.0, 5, "50 dates, dividend yield 0.08, against the lattice's American exercise"),
    "AmericanCallCashDividend": (0.0302, 90.0, 3, "50 dates, cash dividend 3 at 0.965, against the lattice's American exercise"),
}
"""The basis of the Longstaff-Schwartz allowances: the measured low bias of each product.

A price valued with a fitted policy on fresh paths is low-biased (the policy is not the
optimal one; with 50 dates standing for American exercise, the dates too). The allowance
declared is the largest measured shortfall rounded up to the next 0.005, scaled with the
strike (put and call prices, the policy's state S/S0 and its hold value are homogeneous of
degree one in (S0, K)). For scale: Longstaff and Schwartz (2001), Review of Financial
Studies 14(1), Table 1 (from memory), report their estimator up to 0.025 below the
finite-difference American put at K = 40."""

LS_STEP = 0.005


def _declared(name: str) -> float:
    shortfall = MEASURED_SHORTFALL[name][0]
    return math.ceil(shortfall / LS_STEP - 1e-9) * LS_STEP


def _ls_allowance(name: str):
    declared, strike = _declared(name), MEASURED_SHORTFALL[name][1]

    def allowance(p, model) -> float:
        return declared * p.strike / strike

    return allowance


def _ls_reason(name: str) -> str:
    shortfall, strike, seeds, what = MEASURED_SHORTFALL[name]
    return (
        f"Longstaff-Schwartz low bias (a fitted policy is not the optimal one; {what}): largest "
        f"shortfall below the lattice measured over {seeds} seed{'s' if seeds > 1 else ''} at 1,000,000 "
        f"paths ({2 * seeds} samples) {shortfall:.4f} at K = "
        f"{strike:g}, declared {_declared(name):.3f}, scaled with the strike"
    )


MEASURED_SCHEDULE = {"BermudanPut": 12, "BermudanCall": 12, "AmericanPut": 50, "AmericanCall": 50,
                     "AmericanCallCashDividend": 50}
"""The exercise dates (over one year) each shortfall of :data:`MEASURED_SHORTFALL` was measured
with. The policy's shortfall depends on the contract (fewer dates stand less well for American
exercise; measured at an interior point, seed 2: an American call struck at 75.3 instead of 90
fell 0.093 below the lattice, four times the allowance scaled with the strike, since only the
strike moved, not the spot), so the checks against the lattice run on the contract the
allowance was measured on: that schedule and that strike, whatever point the product is at."""


def _ls_check(name: str, case: str, note: str):
    terms = {"exercises": MEASURED_SCHEDULE[name], "maturity": 1.0, "strike": MEASURED_SHORTFALL[name][1]}
    return own_closed_form(case, terms, allowance=_ls_allowance(name),
                           reason=_ls_reason(name) + "; checked on that contract", note=note)


CALL_SCENARIO = BlackScholes(spot=100.0, rate=0.05, dividend=0.08, vol=0.2)
"""The calls' scenario: a dividend yield above the rate makes early exercise worth having."""


AT_MOST_LATTICE = Bound(
    "at_most_lattice",
    "<=",
    lambda p, m: p.reference(m),
    source="lattice price of the same exercise right (a fitted policy cannot beat the optimal one)",
    note="no allowance: a price above the lattice means the policy saw the future",
)


def _nested_fewer(n: int) -> int:
    """The largest divisor of ``n`` at most ``n / 3`` (1 if none): that many equally spaced
    dates ending at T are among the ``n`` dates (12 -> 4)."""
    return max([d for d in range(1, n // 3 + 1) if n % d == 0], default=1)


def _european(p, cls):
    return cls(strike=p.strike, maturity=p.maturity)


def _above_european(cls) -> Bound:
    return Bound(
        "above_european",
        ">=",
        lambda p, m: _european(p, cls).reference(m),
        source=f"Black-Scholes {'call' if cls is EuropeanCall else 'put'} (holding to expiry is one of the choices)",
    )


def _one_exercise_date(cls) -> Reduction:
    return Reduction(
        "one_exercise_date",
        {"exercises": 1},
        becomes=lambda p: _european(p, cls),
        note="a single exercise date, at maturity: the European option on every path",
    )


def _no_dividend() -> Reduction:
    return Reduction(
        "no_dividend",
        {},
        model_changes={"dividend": 0.0},
        exact=False,
        becomes=lambda p: _european(p, EuropeanCall),
        note="no dividends: a call is worth more alive than exercised (Merton 1973), the European call",
    )


MORE_DATES_NEVER_LOWER = Monotone(
    "exercises", +1, to=lambda p: _nested_fewer(p.exercises), name="more_dates_never_lower",
    note="the fewer dates are among the dates: the holder's choice only widens",
)


PUT_STRIKE = Param(110.0, low=0.0, doc="strike (default in the money, S0/K = 0.91, as in the Longstaff-Schwartz cases)")
CALL_STRIKE = Param(90.0, low=0.0, doc="strike (default in the money, S0/K = 1.11)")


class _EarlyExercise(Product):
    """Shared terms: exercise on every observation date up to the last; subclasses declare
    the strike (:data:`PUT_STRIKE` or :data:`CALL_STRIKE`)."""

    abstract = True
    maturity = Param(1.0, low=0.0, low_open=True, doc="last exercise date in years")
    option_kind = "put"

    def exercise_dates(self) -> np.ndarray:
        return self.dates()

    def hold_value(self, obs, j):
        """Black-Scholes value at exercise date ``j`` of the European on the remaining life,
        from the paths' rate, continuous yield and variance: the variance still to come
        where the model's is deterministic (known today), otherwise the variance realised
        so far as a rate (known at that date; never the path's future). Used by the
        Longstaff-Schwartz policy as a basis function and a floor (:mod:`limitcase.exercise`)."""
        ex_t = self.exercise_dates()
        k = int(np.searchsorted(obs.t, ex_t[j]))
        last = int(np.searchsorted(obs.t, ex_t[-1]))
        tau = float(obs.t[last] - obs.t[k])
        step_var = np.asarray(obs.step_var, dtype=float)
        if step_var.shape[0] == 1:
            vol = np.sqrt(max(float(np.sum(step_var[0, k + 1: last + 1])), 0.0) / tau)
        else:
            vol = np.sqrt(np.maximum(np.sum(step_var[:, : k + 1], axis=1), 0.0) / obs.t[k])
        return black_scholes(obs.s[:, k], self.strike, tau, obs.rate, obs.dividend, vol, self.option_kind)

    def _lattice(self, model, kind: str, exercise) -> float:
        spot, rate, dividend, vol = bs_inputs(model, self)
        return lattice_price(spot, self.strike, self.maturity, rate, dividend, vol, kind, exercise=exercise)


class _Bermudan(_EarlyExercise):
    abstract = True
    exercises = Param(12, low=1, high=1000, integer=True, doc="number of exercise dates, equally spaced, ending at T")

    def dates(self) -> np.ndarray:
        return even_dates(self.maturity, self.exercises)


class BermudanPut(_Bermudan):
    """Pays max(K - S(t), 0) at the exercise date t the holder chooses among n equally
    spaced dates ending at T.

    Limits: one exercise date (T) -> the European put (exercise at T exactly when in the
    money, on every path); the lattice price on the same dates, within the measured
    Longstaff-Schwartz allowance.
    Relations: at most the lattice price (no allowance); at least the European put; fewer
    (nested) dates never worth more.
    """

    strike = PUT_STRIKE
    reductions = (
        _one_exercise_date(EuropeanPut),
        _ls_check("BermudanPut", "lattice", "binomial lattice with exercise on the same dates"),
    )
    relations = (AT_MOST_LATTICE, _above_european(EuropeanPut), MORE_DATES_NEVER_LOWER)

    def exercise_value(self, obs):
        return np.maximum(self.strike - obs.s, 0.0)

    def reference(self, model):
        return self._lattice(model, "put", equal_steps(self.maturity, self.exercises))  # from the terms

    def reference_source(self) -> str:
        return "lattice_price, Bermudan put on the same dates"


class BermudanCall(_Bermudan):
    """Pays max(S(t) - K, 0) at the exercise date t the holder chooses among n equally
    spaced dates ending at T.

    Limits: one exercise date (T) -> the European call (path by path); no dividends -> the
    European call (early exercise never pays; statistical, no allowance); the lattice on
    the same dates, within the measured Longstaff-Schwartz allowance.
    Relations: at most the lattice price on the same dates; at least the European call;
    fewer (nested) dates never worth more. Scenario: :data:`CALL_SCENARIO`.
    """

    strike = CALL_STRIKE
    option_kind = "call"
    reductions = (
        _one_exercise_date(EuropeanCall),
        _no_dividend(),
        _ls_check("BermudanCall", "lattice", "binomial lattice with exercise on the same dates"),
    )
    relations = (AT_MOST_LATTICE, _above_european(EuropeanCall), MORE_DATES_NEVER_LOWER)

    def exercise_value(self, obs):
        return np.maximum(obs.s - self.strike, 0.0)

    def reference(self, model):
        return self._lattice(model, "call", equal_steps(self.maturity, self.exercises))  # from the terms

    def reference_source(self) -> str:
        return "lattice_price, Bermudan call on the same dates"

    def scenario(self):
        return CALL_SCENARIO


AMERICAN_DATES = Param(
    50, low=1, high=1000, integer=True,
    doc="exercise dates, equally spaced, ending at T (50: the Longstaff-Schwartz stand-in for American exercise)",
)


class AmericanPut(_Bermudan):
    """Pays max(K - S(t), 0) at the time t the holder chooses, exercise allowed on n equally
    spaced dates ending at T (50 by default, as Longstaff and Schwartz 2001 do for a year).

    Limits: the lattice American put (Leisen-Reimer tree), within the measured
    Longstaff-Schwartz allowance, which also covers exercising on the dates only (as in
    Longstaff and Schwartz 2001, Table 1); one exercise date -> the European put (path by
    path).
    Relations: at most the lattice American price (no allowance); at least the European put.
    """

    exercises = AMERICAN_DATES
    strike = PUT_STRIKE
    reductions = (
        _ls_check("AmericanPut", "lattice_american", "binomial lattice, American exercise"),
        _one_exercise_date(EuropeanPut),
    )
    relations = (AT_MOST_LATTICE, _above_european(EuropeanPut))

    def exercise_value(self, obs):
        return np.maximum(self.strike - obs.s, 0.0)

    def reference(self, model):
        return self._lattice(model, "put", "american")

    def reference_source(self) -> str:
        return "lattice_price, American put"


class AmericanCall(_Bermudan):
    """Pays max(S(t) - K, 0) at the time t the holder chooses, exercise allowed on n equally
    spaced dates ending at T (50 by default).

    Limits: one exercise date -> the European call (path by path); no dividends -> the
    European call (statistical, no allowance); the lattice American call, within the
    measured Longstaff-Schwartz allowance.
    Relations: at most the lattice American price (no allowance); at least the European
    call. Scenario: :data:`CALL_SCENARIO`.
    """

    exercises = AMERICAN_DATES
    strike = CALL_STRIKE
    option_kind = "call"
    reductions = (
        _one_exercise_date(EuropeanCall),
        _no_dividend(),
        _ls_check("AmericanCall", "lattice_american", "binomial lattice, American exercise"),
    )
    relations = (AT_MOST_LATTICE, _above_european(EuropeanCall))

    def exercise_value(self, obs):
        return np.maximum(obs.s - self.strike, 0.0)

    def reference(self, model):
        return self._lattice(model, "call", "american")

    def reference_source(self) -> str:
        return "lattice_price, American call"

    def scenario(self):
        return CALL_SCENARIO


DIVIDEND_SCENARIO = DividendBlackScholes(spot=100.0, rate=0.05, dividend=0.0, vol=0.2, cash=((0.965, 3.0),))
"""A stock paying one cash dividend of 3 just before expiry (ex-date 0.965, between the
exercise dates 0.96 and 0.98 of a one-year right with 50 dates), no other dividends: the
classic case where an American call is exercised early, just before the ex-date."""


def _no_discrete_dividends(model, product):
    return BlackScholes(spot=model.spot, rate=model.rate, dividend=model.dividend, vol=model.vol)


def _dividend_lattice(p, model, exercise: str) -> float:
    if not isinstance(model, DividendBlackScholes):
        raise NoReference(f"{type(p).__name__} has a dividend lattice under DividendBlackScholes only")
    return lattice_price_dividends(model.spot, p.strike, p.maturity, model.rate, model.vol, "call", exercise,
                                   cash=model.cash, proportional=model.proportional, dividend=model.dividend)


def _half_the_premium(p, model) -> float:
    european = _dividend_lattice(p, model, "european")
    return european + 0.5 * (_dividend_lattice(p, model, "american") - european)


class AmericanCallCashDividend(AmericanCall):
    """Pays max(S(t) - K, 0) at the time t the holder chooses (50 exercise dates a year,
    as :class:`AmericanCall`), on a stock that pays a cash dividend just before expiry
    (:data:`DIVIDEND_SCENARIO`, simulated by :class:`limitcase.models.DividendBlackScholes`).

    Early exercise pays here: just before the ex-date the holder gives up the remaining
    time value to collect the dividend. The lattice with discrete dividends
    (:func:`limitcase.references.lattice_price_dividends`) says how much.

    Limits: the lattice American call under the same dividends, within the
    Longstaff-Schwartz allowance; no discrete dividends -> the European call (Merton 1973;
    Black-Scholes, statistical, no allowance).
    Relations: at most the lattice American price (no allowance); at least the lattice
    European price under the dividends; early exercise worth at least half of what the
    lattice says it is worth (the premium, American minus European, is above 3 here).
    """

    reductions = (
        _ls_check("AmericanCallCashDividend", "lattice_american",
                  "lattice with the discrete dividend, American exercise"),
        Reduction(
            "no_dividend",
            {},
            model_changes={"cash": (), "proportional": ()},
            reference_model=_no_discrete_dividends,
            becomes=lambda p: _european(p, EuropeanCall),
            note="no dividends: never exercised early (Merton 1973), the Black-Scholes European call",
        ),
    )
    relations = (
        AT_MOST_LATTICE,
        Bound(
            "above_european",
            ">=",
            lambda p, m: _dividend_lattice(p, m, "european"),
            source="lattice European call under the same dividends (holding to expiry is one of the choices)",
        ),
        Bound(
            "early_exercise_pays",
            ">=",
            _half_the_premium,
            source="lattice: European plus half the early-exercise premium (American minus European)",
            note="a policy that misses the exercise before the ex-date falls to the European price",
        ),
    )

    def reference(self, model):
        if isinstance(model, DividendBlackScholes):
            return _dividend_lattice(self, model, "american")
        return super().reference(model)

    def reference_source(self) -> str:
        return "lattice_price_dividends, American call"

    def scenario(self):
        return DIVIDEND_SCENARIO
