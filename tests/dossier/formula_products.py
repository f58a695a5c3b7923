"""Products that state their payoff as a sympy formula, for the dossier and symbolic tests.

The catalogue's own products do not state formulas (yet); these subclasses add one, in the
convention of :mod:`limitcase.symbolic` (S_1..S_n the prices at the dates, S_0 today,
parameters as symbols named after them). The payoff definitions are the textbook ones
(J. C. Hull, Options, Futures, and Other Derivatives, chapters on exotic options: the
arithmetic-average call, the knock-out call with a rebate, the cash-or-nothing call).

``CashDigitalAtStrikeBug`` is deliberately wrong: its code pays at S(T) = K where its
formula (and the definition) pays only for S(T) > K. Random paths never end exactly at
the strike; the symbolic cross-check's edge paths do.
"""

from __future__ import annotations

import math

import numpy as np
import sympy as sp

from limitcase import Param, Product, Reduction
from limitcase.symbolic import formula_symbols
from limitcase_payoffs.asians import ArithmeticAsianCall
from limitcase_payoffs.barriers import UpAndOutCall
from limitcase_payoffs.vanilla import EuropeanCall, EuropeanPut


class CallWithFormula(EuropeanCall):
    """The catalogue's European call, stating max(S_T - K, 0)."""

    reductions = ()
    relations = ()

    def formula(self):
        x = formula_symbols(self)
        return sp.Max(x.S_T - x.strike, 0)


class PutWithFormula(EuropeanPut):
    """The catalogue's European put, stating max(K - S_T, 0)."""

    reductions = ()
    relations = ()

    def formula(self):
        x = formula_symbols(self)
        return sp.Max(x.strike - x.S_T, 0)


class AsianWithFormula(ArithmeticAsianCall):
    """The catalogue's arithmetic Asian call, stating max((S_1 + ... + S_n)/n - K, 0);
    one fixing must recognise the call's formula."""

    reductions = (
        Reduction("one_fixing", {"fixings": 1},
                  becomes=lambda p: CallWithFormula(strike=p.strike, maturity=p.maturity),
                  note="a single fixing at maturity: the average is S(T), the European call"),
    )
    relations = ()

    def formula(self):
        x = formula_symbols(self)
        return sp.Max(sp.Add(*x.S) / len(x.S) - x.strike, 0)


class AsianWrongBase(AsianWithFormula):
    """The same Asian call with a deliberately wrong base case (a put) at one fixing: the
    symbolic recognition must show that the formulas differ (and the check fails)."""

    reductions = (
        Reduction("one_fixing_wrong_base", {"fixings": 1},
                  becomes=lambda p: PutWithFormula(strike=p.strike, maturity=p.maturity),
                  note="deliberately wrong base (a put)"),
    )


class KnockOutWithFormula(UpAndOutCall):
    """The catalogue's discrete up-and-out call, stating: max(S_n - K, 0) if S_0 and every
    S_j stay below H, else the rebate R (the amount; the catalogue pays it at the touch)."""

    reductions = (
        Reduction("barrier_to_infinity", {"barrier": math.inf, "rebate": 3.0},
                  becomes=lambda p: CallWithFormula(strike=p.strike, maturity=p.maturity),
                  note="an up barrier at +inf is never touched: the European call"),
    )
    relations = ()

    def formula(self):
        x = formula_symbols(self)
        alive = sp.And(x.S_0 < x.barrier, *[s < x.barrier for s in x.S])
        return sp.Piecewise((sp.Max(x.S_T - x.strike, 0), alive), (x.rebate, True))


class CashDigitalAtStrikeBug(Product):
    """Meant to pay 1 at T when S(T) > K (formula); the code also pays at S(T) = K."""

    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    def dates(self):
        return np.array([self.maturity])

    def payoff(self, obs):
        return (obs.s[:, -1] >= self.strike).astype(float)  # BUG: >= where the definition says >

    def formula(self):
        x = formula_symbols(self)
        return sp.Piecewise((1, x.S_T > x.strike), (0, True))
