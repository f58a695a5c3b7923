"""Asian options: the payoff reads the average of the price over a fixing schedule.

Fixings. ``n`` equally spaced dates over the averaging window ``(start, T]``:
``t_i = start + (T - start) i / n``, ``i = 1..n`` (``start = 0``: ``T/n, 2T/n, ..., T``).
For another schedule, subclass and override ``dates()``: the payoffs and the closed forms
read ``dates()``, and the last date is the payment date.

Averages. Arithmetic ``A = (1/n) sum_i S(t_i)``; geometric ``G = (prod_i S(t_i))^(1/n)``.

How the limits are checked. One fixing makes every average ``S(T)``: each option becomes
its European counterpart (fixed strike) or pays nothing (floating strike), path by path.
The geometric options have exact closed forms (``ln G`` and ``ln S(T)`` are jointly
normal). The arithmetic ones are tied to them path by path by ``A >= G`` (the inequality
of arithmetic and geometric means), to the average-price forward by put-call parity, and
are monotone and convex in the strike.

Where the checks look. The closed forms are checked 10 out of the money (the default
strike equals the scenario's spot, and a strike confused with the spot would pass there);
the identities and the one-fixing limits on the window ``(T/2, T]``, so that the window's
start matters to some check.
"""

from __future__ import annotations

import math

import numpy as np
import sympy as sp

from limitcase import Bound, Convex, Identity, Monotone, NoReference, Param, ParamError, Product, Reduction
from limitcase.symbolic import formula_symbols
from limitcase.references import arithmetic_asian, geometric_asian, margrabe_exchange
from limitcase.references.schedules import equal_steps

from ._common import bs_inputs, own_closed_form
from .vanilla import EuropeanCall, EuropeanPut, PrepaidForward, ZeroCouponBond


class _Averaging(Product):
    """Shared fixing schedule: ``fixings`` equal steps over the window ``(start, maturity]``."""

    abstract = True
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry, last fixing and payment date, in years")
    fixings = Param(12, low=1, high=10_000, integer=True, doc="number of fixings")
    start = Param(0.0, low=0.0, doc="start of the averaging window in years (first fixing one step later)")

    def _check(self) -> None:
        if not self.start < self.maturity:
            raise ParamError(
                f"start={self.start!r} is not before maturity={self.maturity!r} for {type(self).__name__}; "
                "the averaging window (start, maturity] must not be empty: pass 0 <= start < maturity"
            )

    def dates(self) -> np.ndarray:
        return self.start + (self.maturity - self.start) * np.arange(1, self.fixings + 1) / self.fixings

    def schedule(self) -> dict:
        """The fixing-schedule parameters, to build a companion product on the same fixings."""
        return {"maturity": self.maturity, "fixings": self.fixings, "start": self.start}

    def contract_fixings(self) -> np.ndarray:
        """The fixing dates as the contract's terms state them, rebuilt on the reference
        side (never from :meth:`dates`, whose code a reference must not trust)."""
        return equal_steps(self.maturity, self.fixings, self.start)


class _FixedStrike(_Averaging):
    abstract = True
    strike = Param(100.0, low=0.0, doc="strike")


class _FloatingStrike(_Averaging):
    abstract = True
    ratio = Param(1.0, low=0.0, doc="strike as a multiple of the average (1: the standard floating strike)")


def _one_fixing(becomes, note: str, **changes) -> Reduction:
    """One fixing: at maturity whatever the window's start (moved to mid-life, so that the
    case also sees the schedule's use of the start)."""
    return Reduction(
        "one_fixing", {"fixings": 1, "start": lambda p: p.maturity / 2, **changes}, becomes=becomes, note=note
    )


def _closed_form(note: str, shift: float) -> Reduction:
    """The product's own closed form, at the strike moved ``shift`` off its default (the
    scenario's spot) out of the money, so that a strike confused with the spot shows."""
    return own_closed_form(
        changes={"strike": lambda p: p.strike + shift}, note=f"{note}, at K {shift:+g} (out of the money, off the spot)"
    )


def _late_window(p):
    """The same product averaging over the second half of its life only (start T/2): the
    point where the identities are checked, so that the window's start is exercised too."""
    return p.replace(start=p.maturity / 2)


def _euro_call(p) -> EuropeanCall:
    return EuropeanCall(strike=p.strike, maturity=p.maturity)


def _euro_put(p) -> EuropeanPut:
    return EuropeanPut(strike=p.strike, maturity=p.maturity)


def _nothing(p) -> ZeroCouponBond:
    return ZeroCouponBond(cash=0.0, maturity=p.maturity)


def _strike_checks(direction: int) -> tuple:
    return (
        Monotone("strike", direction, to=lambda p: p.strike + 10.0, pathwise=True),
        Convex("strike", step=10.0, pathwise=True),
    )


def _ratio_checks(direction: int) -> tuple:
    return (
        Monotone("ratio", direction, to=lambda p: p.ratio + 0.1, pathwise=True),
        Convex("ratio", step=0.1, pathwise=True),
    )


# --- fixed strike ----------------------------------------------------------------------


class AverageForward(_FixedStrike):
    """Pays A - K at T (negative when the average ends below the strike): the
    average-price forward, the linear part of the fixed-strike Asian options.

    Worth ``exp(-rT) ((1/n) sum_i F(t_i) - K)``, ``F(t) = S0 exp((r - q) t)`` the forward
    price, under any model with deterministic rate and dividend yield.

    Limits: its own closed form. Relations: call - put = forward (path by path); decreasing
    in the strike (path by path).
    """

    nonnegative = False

    reductions = (_closed_form("exp(-rT) (mean of the forwards at the fixings - K)", +10.0),)
    relations = (
        Identity(
            "put_call_parity",
            lambda p: [
                (1.0, ArithmeticAsianCall(strike=p.strike, **_late_window(p).schedule())),
                (-1.0, ArithmeticAsianPut(strike=p.strike, **_late_window(p).schedule())),
                (-1.0, _late_window(p)),
            ],
            note="max(A - K, 0) - max(K - A, 0) = A - K on every path (averaging window (T/2, T])",
        ),
        Monotone("strike", -1, to=lambda p: p.strike + 10.0, pathwise=True),
    )

    def payoff(self, obs):
        return obs.s.mean(axis=1) - self.strike

    def reference(self, model):
        forwards = model.forward(self.contract_fixings())[:, 0]
        return math.exp(-model.short_rate * self.maturity) * (forwards.mean() - self.strike)

    def reference_source(self) -> str:
        return "exp(-rT) (mean forward - K)"


class GeometricAsianCall(_FixedStrike):
    """Pays max(G - K, 0) at T, G the geometric mean of S at the fixings.

    Exact price (Kemna and Vorst 1990): ``ln G`` is normal, so the Black-Scholes formula
    applies to G (:func:`limitcase.references.geometric_asian`).

    Limits: its own closed form; one fixing -> the European call (G = S(T) on every path).
    Relations: decreasing and convex in the strike (path by path).
    """

    reductions = (
        _closed_form("Kemna-Vorst: the geometric average is log-normal", +10.0),
        _one_fixing(_euro_call, "a single fixing at maturity: G = S(T), the European call"),
    )
    relations = _strike_checks(-1)

    def payoff(self, obs):
        return np.maximum(np.exp(np.log(obs.s).mean(axis=1)) - self.strike, 0.0)


    def formula(self):
        x = formula_symbols(self)
        return sp.Max(sp.Mul(*x.S) ** sp.Rational(1, len(x.S)) - x.strike, 0)

    def reference(self, model):
        spot, rate, dividend, vol = bs_inputs(model, self)
        return geometric_asian(spot, self.strike, self.contract_fixings(), rate, dividend, vol, "call")

    def reference_source(self) -> str:
        return "geometric_asian (Kemna-Vorst) call"


class GeometricAsianPut(_FixedStrike):
    """Pays max(K - G, 0) at T, G the geometric mean of S at the fixings.

    Exact price (Kemna and Vorst 1990), as for the call.

    Limits: its own closed form; one fixing -> the European put; strike 0 -> pays nothing.
    Relations: increasing and convex in the strike (path by path).
    """

    reductions = (
        _closed_form("Kemna-Vorst: the geometric average is log-normal", -10.0),
        _one_fixing(_euro_put, "a single fixing at maturity: G = S(T), the European put"),
        Reduction("zero_strike", {"strike": 0.0}, becomes=_nothing, note="max(-G, 0) = 0 on every path"),
    )
    relations = _strike_checks(+1)

    def payoff(self, obs):
        return np.maximum(self.strike - np.exp(np.log(obs.s).mean(axis=1)), 0.0)

    def reference(self, model):
        spot, rate, dividend, vol = bs_inputs(model, self)
        return geometric_asian(spot, self.strike, self.contract_fixings(), rate, dividend, vol, "put")

    def reference_source(self) -> str:
        return "geometric_asian (Kemna-Vorst) put"


class ArithmeticAsianCall(_FixedStrike):
    """Pays max(A - K, 0) at T, A the arithmetic mean of S at the fixings.

    Reference: Vecer's (2001) one-dimensional PDE (accurate to about 1e-6 relative).
    Control variate: the geometric Asian call on the same fixings and strike, whose exact
    price is known (Kemna and Vorst 1990).

    Limits: one fixing -> the European call (A = S(T) on every path); strike 0 -> the
    average-price forward struck at 0 (pays A).
    Relations: call - put = average-price forward (path by path); at least the geometric
    Asian call (path by path, A >= G); decreasing and convex in the strike (path by path).
    """

    reductions = (
        own_closed_form(note="Monte Carlo against the one-dimensional PDE of Vecer (2001), on the fixings "
                              "rebuilt from the terms"),
        _one_fixing(_euro_call, "a single fixing at maturity: the average is S(T), the European call"),
        Reduction(
            "zero_strike",
            {"strike": 0.0},
            becomes=lambda p: AverageForward(strike=0.0, **p.schedule()),
            note="strike 0: pays A on every path, the average-price forward struck at 0",
        ),
    )
    relations = (
        Identity(
            "put_call_parity",
            lambda p: [
                (1.0, _late_window(p)),
                (-1.0, ArithmeticAsianPut(strike=p.strike, **_late_window(p).schedule())),
                (-1.0, AverageForward(strike=p.strike, **_late_window(p).schedule())),
            ],
            note="max(A - K, 0) - max(K - A, 0) = A - K on every path (averaging window (T/2, T])",
        ),
        Bound(
            "above_geometric",
            ">=",
            lambda p, m: GeometricAsianCall(strike=p.strike, **p.schedule()).reference(m),
            pathwise_leg=lambda p: GeometricAsianCall(strike=p.strike, **p.schedule()),
            source="geometric Asian call (Kemna-Vorst); A >= G on every path",
        ),
        *_strike_checks(-1),
    )

    def payoff(self, obs):
        return np.maximum(obs.s.mean(axis=1) - self.strike, 0.0)

    def reference(self, model):
        spot, rate, dividend, vol = bs_inputs(model, self)
        return float(arithmetic_asian(spot, self.strike, self.contract_fixings(), self.maturity, rate, dividend, vol,
                                      "call"))

    def reference_source(self) -> str:
        return "arithmetic Asian by Vecer's PDE"


    def formula(self):
        x = formula_symbols(self)
        return sp.Max(sp.Add(*x.S) / len(x.S) - x.strike, 0)

    def control_variates(self, model):
        twin = GeometricAsianCall(strike=self.strike, **self.schedule())
        try:
            return ((twin, twin.reference(model)),)
        except NoReference:
            return ()


class ArithmeticAsianPut(_FixedStrike):
    """Pays max(K - A, 0) at T, A the arithmetic mean of S at the fixings.

    Reference: Vecer's (2001) one-dimensional PDE. Control variate: the geometric Asian put
    on the same fixings and strike.

    Limits: one fixing -> the European put; strike 0 -> pays nothing.
    Relations: at most the geometric Asian put (path by path, A >= G); increasing and
    convex in the strike (path by path). Put-call parity is declared on the call.
    """

    reductions = (
        own_closed_form(note="Monte Carlo against the one-dimensional PDE of Vecer (2001), on the fixings "
                              "rebuilt from the terms"),
        _one_fixing(_euro_put, "a single fixing at maturity: the average is S(T), the European put"),
        Reduction("zero_strike", {"strike": 0.0}, becomes=_nothing, note="max(-A, 0) = 0 on every path"),
    )
    relations = (
        Bound(
            "below_geometric",
            "<=",
            lambda p, m: GeometricAsianPut(strike=p.strike, **p.schedule()).reference(m),
            pathwise_leg=lambda p: GeometricAsianPut(strike=p.strike, **p.schedule()),
            source="geometric Asian put (Kemna-Vorst); A >= G on every path",
        ),
        *_strike_checks(+1),
    )

    def payoff(self, obs):
        return np.maximum(self.strike - obs.s.mean(axis=1), 0.0)

    def reference(self, model):
        spot, rate, dividend, vol = bs_inputs(model, self)
        return float(arithmetic_asian(spot, self.strike, self.contract_fixings(), self.maturity, rate, dividend, vol,
                                      "put"))

    def reference_source(self) -> str:
        return "arithmetic Asian by Vecer's PDE"

    def control_variates(self, model):
        twin = GeometricAsianPut(strike=self.strike, **self.schedule())
        try:
            return ((twin, twin.reference(model)),)
        except NoReference:
            return ()


# --- floating strike -------------------------------------------------------------------


def _geometric_floating(product: _FloatingStrike, model, kind: str) -> float:
    r"""Exact price of the geometric floating-strike option, an exchange of S(T) for k G.

    ``ln S(T)`` and ``ln G`` are jointly normal with (``m = r - q - sigma^2/2``,
    ``tbar`` the mean fixing time, ``tvar = (1/n^2) sum_ij min(t_i, t_j)``)

        E ln S(T) = ln S0 + m T,  E ln G = ln S0 + m tbar,
        Var(ln S(T) - ln G) = sigma^2 (T - 2 tbar + tvar),

    so Margrabe (1978) applies with asset 1 = S(T) (prepaid value ``S0 exp(-qT)``) and
    asset 2 = k G (prepaid value ``k exp(-rT) E[G]``, ``E[G] = S0 exp(m tbar + sigma^2 tvar/2)``),
    relative volatility ``sqrt(Var / T)``.
    """
    spot, rate, dividend, vol = bs_inputs(model, product)
    t = product.contract_fixings()
    big_t = t[-1]
    t_mean = t.mean()
    t_var = np.minimum.outer(t, t).mean()
    drift = rate - dividend - 0.5 * vol * vol
    strike_leg = product.ratio * math.exp(-rate * big_t) * spot * math.exp(drift * t_mean + 0.5 * vol * vol * t_var)
    rel_vol = vol * math.sqrt(max(big_t - 2.0 * t_mean + t_var, 0.0) / big_t)
    if kind == "call":
        return margrabe_exchange(spot, strike_leg, big_t, dividend, 0.0, rel_vol, 0.0, 0.0)
    return margrabe_exchange(strike_leg, spot, big_t, 0.0, dividend, rel_vol, 0.0, 0.0)


def _floating_parity(partner, average, sign: float) -> Identity:
    """Put-call parity of a floating-strike option, from its own side (``sign`` +1 for the
    call, -1 for the put): ``call - put = S(T) - k X`` on every path, X the average, paid
    by the fixed-strike call struck at 0 (``average``)."""

    def legs(p):
        q = _late_window(p)
        return [
            (1.0, q),
            (-1.0, partner(q)),
            (-sign, PrepaidForward(maturity=q.maturity)),
            (sign * q.ratio, average(strike=0.0, **q.schedule())),
        ]

    return Identity(
        "put_call_parity", legs,
        note="max(S(T) - kX, 0) - max(kX - S(T), 0) = S(T) - kX on every path (averaging window (T/2, T])",
    )


def _floating_reductions(kind: str) -> tuple:
    if kind == "call":
        zero = Reduction(
            "zero_ratio", {"ratio": 0.0}, becomes=lambda p: PrepaidForward(maturity=p.maturity),
            note="ratio 0: pays S(T) on every path, the prepaid forward",
        )
    else:
        zero = Reduction("zero_ratio", {"ratio": 0.0}, becomes=_nothing, note="ratio 0: max(-S(T), 0) = 0 on every path")
    return (
        _one_fixing(
            _nothing, "a single fixing at maturity with ratio 1: the strike is S(T) itself, the option pays nothing",
            ratio=1.0,
        ),
        zero,
    )


class GeometricFloatingAsianCall(_FloatingStrike):
    """Pays max(S(T) - k G, 0) at T, G the geometric mean of S at the fixings, k the ratio.

    Exact price: an option to exchange k G for S(T), two jointly log-normal amounts
    (Margrabe 1978; see :func:`_geometric_floating`).

    Limits: its own closed form; one fixing with k = 1 -> pays nothing; k = 0 -> the
    prepaid forward. Relations: call - put = S(T) - k G (path by path); decreasing and
    convex in k (path by path).
    """

    reductions = (own_closed_form(note="Margrabe exchange of S(T) for k G (jointly log-normal)"), *_floating_reductions("call"))
    relations = (
        _floating_parity(lambda p: GeometricFloatingAsianPut(**p.params()), GeometricAsianCall, +1.0),
        *_ratio_checks(-1),
    )

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] - self.ratio * np.exp(np.log(obs.s).mean(axis=1)), 0.0)

    def reference(self, model):
        return _geometric_floating(self, model, "call")

    def reference_source(self) -> str:
        return "Margrabe on (S(T), k G)"


class GeometricFloatingAsianPut(_FloatingStrike):
    """Pays max(k G - S(T), 0) at T, G the geometric mean of S at the fixings, k the ratio.

    Exact price: an option to exchange S(T) for k G (Margrabe 1978).

    Limits: its own closed form; one fixing with k = 1 -> pays nothing; k = 0 -> pays
    nothing. Relations: call - put = S(T) - k G (path by path); increasing and convex in k
    (path by path).
    """

    reductions = (own_closed_form(note="Margrabe exchange of k G for S(T) (jointly log-normal)"), *_floating_reductions("put"))
    relations = (
        _floating_parity(lambda p: GeometricFloatingAsianCall(**p.params()), GeometricAsianCall, -1.0),
        *_ratio_checks(+1),
    )

    def payoff(self, obs):
        return np.maximum(self.ratio * np.exp(np.log(obs.s).mean(axis=1)) - obs.s[:, -1], 0.0)

    def reference(self, model):
        return _geometric_floating(self, model, "put")

    def reference_source(self) -> str:
        return "Margrabe on (k G, S(T))"


class FloatingAsianCall(_FloatingStrike):
    """Pays max(S(T) - k A, 0) at T, A the arithmetic mean of S at the fixings, k the ratio.

    No closed form.

    Limits: one fixing with k = 1 -> pays nothing (A = S(T)); k = 0 -> the prepaid forward.
    Relations: call - put = S(T) - k A (path by path); at most the geometric floating call
    (path by path, A >= G); decreasing and convex in k (path by path).
    """

    reductions = _floating_reductions("call")
    relations = (
        _floating_parity(lambda p: FloatingAsianPut(**p.params()), AverageForward, +1.0),
        Bound(
            "below_geometric",
            "<=",
            lambda p, m: GeometricFloatingAsianCall(**p.params()).reference(m),
            pathwise_leg=lambda p: GeometricFloatingAsianCall(**p.params()),
            source="geometric floating call (Margrabe); A >= G on every path",
        ),
        *_ratio_checks(-1),
    )

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] - self.ratio * obs.s.mean(axis=1), 0.0)


class FloatingAsianPut(_FloatingStrike):
    """Pays max(k A - S(T), 0) at T, A the arithmetic mean of S at the fixings, k the ratio.

    No closed form.

    Limits: one fixing with k = 1 -> pays nothing; k = 0 -> pays nothing.
    Relations: call - put = S(T) - k A (path by path); at least the geometric floating put
    (path by path, A >= G); increasing and convex in k (path by path).
    """

    reductions = _floating_reductions("put")
    relations = (
        _floating_parity(lambda p: FloatingAsianCall(**p.params()), AverageForward, -1.0),
        Bound(
            "above_geometric",
            ">=",
            lambda p, m: GeometricFloatingAsianPut(**p.params()).reference(m),
            pathwise_leg=lambda p: GeometricFloatingAsianPut(**p.params()),
            source="geometric floating put (Margrabe); A >= G on every path",
        ),
        *_ratio_checks(+1),
    )

    def payoff(self, obs):
        return np.maximum(self.ratio * obs.s.mean(axis=1) - obs.s[:, -1], 0.0)
