"""Digital (binary) options and gap options, settled at T on S(T) against a level.

Cash-or-nothing pays a fixed amount, asset-or-nothing the asset, when S(T) ends above
(call) or below (put) the strike; a gap option pays S(T) - K2 when S(T) > K1 (call) or
K2 - S(T) when S(T) < K1 (put). They decompose a European option path by path:
max(S - K, 0) = S 1{S > K} - K 1{S > K}. References: under Black-Scholes the closed forms
of Rubinstein and Reiner (1991), "Unscrambling the Binary Code", Risk 4(9), via
:mod:`limitcase.references`; under any model that states the characteristic function of
its log-price (Heston, Merton, a user's model), the Fourier price of Lewis (2001).
"""

from __future__ import annotations

import numpy as np
import sympy as sp

from limitcase.symbolic import formula_symbols
from limitcase import Bound, Identity, Monotone, Param, Product, Reduction, Tie
from limitcase.references import gap_option

from ._common import BLACK_SCHOLES, bs_inputs, own_closed_form, terminal_method, terminal_price, terminal_source
from .vanilla import EuropeanCall, EuropeanPut, ForwardContract, PrepaidForward, ZeroCouponBond


def _bond(cash: float, p: Product) -> ZeroCouponBond:
    return ZeroCouponBond(cash=cash, maturity=p.maturity)


def _never_pays(p: Product) -> ZeroCouponBond:
    return _bond(0.0, p)


FLAT_AT_ONE = {"spot": 1.0, "vol": 0.0, "rate": 0.05, "dividend": 0.05}
"""Model changes under which S(T) = 1 exactly on every path (no volatility, no drift, and
exp(log 1) = 1 carries no rounding): the case S(T) = K that a strict inequality excludes."""


def _ends_at(level: str) -> Reduction:
    return Reduction(
        f"ends_at_the_{level}",
        {level: 1.0},
        model_changes=FLAT_AT_ONE,
        becomes=_never_pays,
        note=f"S(T) equal to the {level} (no volatility): neither S(T) > K nor S(T) < K, nothing is paid",
    )


class _Digital(Product):
    abstract = True
    strike = Param(100.0, low=0.0, doc="level S(T) is compared with")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])


class CashOrNothingCall(_Digital):
    """Pays the cash amount C at T if S(T) > K, else nothing.

    Limits: strike 0 -> a bond paying C (a positive price always ends above 0).
    Relations: at most the bond paying C (path by path); decreasing in the strike.
    """

    cash = Param(10.0, low=0.0, doc="amount paid when S(T) > K")

    reductions = (
        Reduction("zero_strike", {"strike": 0.0}, becomes=lambda p: _bond(p.cash, p),
                  note="strike 0: S(T) > 0 on every path, so C is always paid"),
        own_closed_form(note="C exp(-rT) N(d2)"),
        _ends_at("strike"),
    )
    relations = (
        Bound("below_bond", "<=", lambda p, m: _bond(p.cash, p).reference(m),
              pathwise_leg=lambda p: _bond(p.cash, p), source="C exp(-rT)"),
        Monotone("strike", -1, to=lambda p: p.strike + 10.0, pathwise=True),
        Tie("strike", "below"),
    )

    def payoff(self, obs):
        return np.where(obs.s[:, -1] > self.strike, self.cash, 0.0)

    def formula(self):
        x = formula_symbols(self)
        return sp.Piecewise((x.cash, x.S_T > x.strike), (0, True))

    def reference(self, model):
        return self.cash * terminal_price(model, "cash_call", self.strike, self.maturity, self)

    def reference_source(self, model=None) -> str:
        return terminal_source(model, "cash-or-nothing call", "cash-or-nothing call (Rubinstein-Reiner)")


class CashOrNothingPut(_Digital):
    """Pays the cash amount C at T if S(T) < K, else nothing.

    Limits: strike 0 -> pays nothing.
    Relations: call + put = the bond paying C (path by path); increasing in the strike.
    """

    cash = Param(10.0, low=0.0, doc="amount paid when S(T) < K")

    reductions = (
        Reduction("zero_strike", {"strike": 0.0}, becomes=_never_pays,
                  note="strike 0: S(T) < 0 never happens"),
        own_closed_form(note="C exp(-rT) N(-d2)"),
        _ends_at("strike"),
    )
    relations = (
        Identity(
            "call_plus_put_is_bond",
            lambda p: [(1.0, p), (1.0, CashOrNothingCall(strike=p.strike, cash=p.cash, maturity=p.maturity)),
                       (-1.0, _bond(p.cash, p))],
        ),
        Monotone("strike", +1, to=lambda p: p.strike + 10.0, pathwise=True),
        Tie("strike", "above"),
    )

    def payoff(self, obs):
        return np.where(obs.s[:, -1] < self.strike, self.cash, 0.0)

    def reference(self, model):
        return self.cash * terminal_price(model, "cash_put", self.strike, self.maturity, self)

    def reference_source(self, model=None) -> str:
        return terminal_source(model, "cash-or-nothing put", "cash-or-nothing put (Rubinstein-Reiner)")


class AssetOrNothingCall(_Digital):
    """Pays the asset S(T) at T if S(T) > K, else nothing.

    Limits: strike 0 -> the prepaid forward.
    Relations: asset call - cash call paying K = European call (path by path);
    at most the prepaid forward (path by path).
    """

    reductions = (
        Reduction("zero_strike", {"strike": 0.0}, becomes=lambda p: PrepaidForward(maturity=p.maturity),
                  note="strike 0: the asset is always delivered"),
        own_closed_form(note="S exp(-qT) N(d1)"),
        _ends_at("strike"),
    )
    relations = (
        Identity(
            "minus_cash_digital_is_call",
            lambda p: [(1.0, p), (-1.0, CashOrNothingCall(strike=p.strike, cash=p.strike, maturity=p.maturity)),
                       (-1.0, EuropeanCall(strike=p.strike, maturity=p.maturity))],
            note="S 1{S>K} - K 1{S>K} = max(S - K, 0) on every path",
        ),
        Bound("below_prepaid_forward", "<=", lambda p, m: PrepaidForward(maturity=p.maturity).reference(m),
              pathwise_leg=lambda p: PrepaidForward(maturity=p.maturity), source="S0 exp(-qT)"),
        Tie("strike", "below"),
    )

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.where(s > self.strike, s, 0.0)

    def reference(self, model):
        return terminal_price(model, "asset_call", self.strike, self.maturity, self)

    def reference_source(self, model=None) -> str:
        return terminal_source(model, "asset-or-nothing call", "asset-or-nothing call (Rubinstein-Reiner)")


class AssetOrNothingPut(_Digital):
    """Pays the asset S(T) at T if S(T) < K, else nothing.

    Limits: strike 0 -> pays nothing.
    Relations: asset call + asset put = the prepaid forward (path by path);
    cash put paying K - asset put = European put (path by path).
    """

    reductions = (
        Reduction("zero_strike", {"strike": 0.0}, becomes=_never_pays, note="strike 0: S(T) < 0 never happens"),
        own_closed_form(note="S exp(-qT) N(-d1)"),
        _ends_at("strike"),
    )
    relations = (
        Identity(
            "call_plus_put_is_forward",
            lambda p: [(1.0, p), (1.0, AssetOrNothingCall(strike=p.strike, maturity=p.maturity)),
                       (-1.0, PrepaidForward(maturity=p.maturity))],
        ),
        Identity(
            "cash_digital_minus_put_is_put",
            lambda p: [(-1.0, p), (1.0, CashOrNothingPut(strike=p.strike, cash=p.strike, maturity=p.maturity)),
                       (-1.0, EuropeanPut(strike=p.strike, maturity=p.maturity))],
            note="K 1{S<K} - S 1{S<K} = max(K - S, 0) on every path",
        ),
        Tie("strike", "above"),
    )

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.where(s < self.strike, s, 0.0)

    def reference(self, model):
        return terminal_price(model, "asset_put", self.strike, self.maturity, self)

    def reference_source(self, model=None) -> str:
        return terminal_source(model, "asset-or-nothing put", "asset-or-nothing put (Rubinstein-Reiner)")


class _Gap(_Digital):
    abstract = True
    nonnegative = False  # pays S(T) - K2 < 0 when the trigger K1 is below K2 and S(T) is between
    strike = Param(105.0, low=0.0, doc="K2, subtracted in the payoff")
    trigger = Param(100.0, low=0.0, doc="K1, the level that decides whether anything is paid")


class GapCall(_Gap):
    """Pays S(T) - K2 at T if S(T) > K1 (trigger), else nothing; negative when
    K1 < S(T) < K2.

    Limits: trigger = strike -> the European call.
    Relations: gap call = asset call(K1) - cash call(K1) paying K2 (path by path);
    gap call - gap put = forward contract at K2 (path by path: S(T) = K1 has probability 0).
    """

    reductions = (
        Reduction("trigger_at_strike", {"trigger": lambda p: p.strike},
                  becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity),
                  note="K1 = K2: pays S - K exactly when S > K, the European call"),
        own_closed_form(note="S exp(-qT) N(d1) - K2 exp(-rT) N(d2), d1 on K1"),
        _ends_at("trigger"),
    )
    relations = (
        Identity(
            "asset_minus_cash_digitals",
            lambda p: [(1.0, p), (-1.0, AssetOrNothingCall(strike=p.trigger, maturity=p.maturity)),
                       (1.0, CashOrNothingCall(strike=p.trigger, cash=p.strike, maturity=p.maturity))],
        ),
        Identity(
            "gap_parity",
            lambda p: [(1.0, p), (-1.0, GapPut(strike=p.strike, trigger=p.trigger, maturity=p.maturity)),
                       (-1.0, ForwardContract(strike=p.strike, maturity=p.maturity))],
            note="(S - K2) 1{S > K1} - (K2 - S) 1{S < K1} = S - K2 on every path",
        ),
        Tie("trigger", "below"),
    )

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.where(s > self.trigger, s - self.strike, 0.0)

    def reference(self, model):
        if terminal_method(model, self) == BLACK_SCHOLES:
            spot, rate, dividend, vol = bs_inputs(model, self)
            return gap_option(spot, self.strike, self.trigger, self.maturity, rate, dividend, vol, "call")
        # S 1{S > K1} - K2 1{S > K1}
        return (terminal_price(model, "asset_call", self.trigger, self.maturity, self)
                - self.strike * terminal_price(model, "cash_call", self.trigger, self.maturity, self))

    def reference_source(self, model=None) -> str:
        return terminal_source(model, "asset and cash digitals", "gap call (Rubinstein-Reiner)")


class GapPut(_Gap):
    """Pays K2 - S(T) at T if S(T) < K1 (trigger), else nothing; negative when
    K2 < S(T) < K1.

    Limits: trigger = strike -> the European put.
    Relation: gap put = cash put(K1) paying K2 - asset put(K1) (path by path).
    """

    reductions = (
        Reduction("trigger_at_strike", {"trigger": lambda p: p.strike},
                  becomes=lambda p: EuropeanPut(strike=p.strike, maturity=p.maturity),
                  note="K1 = K2: pays K - S exactly when S < K, the European put"),
        own_closed_form(note="K2 exp(-rT) N(-d2) - S exp(-qT) N(-d1), d1 on K1"),
        _ends_at("trigger"),
    )
    relations = (
        Identity(
            "cash_minus_asset_digitals",
            lambda p: [(1.0, p), (-1.0, CashOrNothingPut(strike=p.trigger, cash=p.strike, maturity=p.maturity)),
                       (1.0, AssetOrNothingPut(strike=p.trigger, maturity=p.maturity))],
        ),
        Tie("trigger", "above"),
    )

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.where(s < self.trigger, self.strike - s, 0.0)

    def reference(self, model):
        if terminal_method(model, self) == BLACK_SCHOLES:
            spot, rate, dividend, vol = bs_inputs(model, self)
            return gap_option(spot, self.strike, self.trigger, self.maturity, rate, dividend, vol, "put")
        # K2 1{S < K1} - S 1{S < K1}
        return (self.strike * terminal_price(model, "cash_put", self.trigger, self.maturity, self)
                - terminal_price(model, "asset_put", self.trigger, self.maturity, self))

    def reference_source(self, model=None) -> str:
        return terminal_source(model, "cash and asset digitals", "gap put (Rubinstein-Reiner)")
