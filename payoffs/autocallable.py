"""Autocallable notes with conditional (memory) coupons, and the digital-coupon note they
become when they can no longer be called.

Terms (performance ``P(t) = S(t) / S(0)``, notional N, observation dates t_1 < ... < t_n
equally spaced up to the maturity T):

* coupon: on each date on which the note is alive and ``P(t_i) >= coupon barrier``, it pays
  ``c N``; with memory it also pays every coupon missed since the last one paid;
* autocall: on each date but the last, if ``P(t_i) >= trigger`` the note pays N plus that
  date's coupon (with memory, plus the missed ones), whatever the coupon barrier, and ends;
* maturity, if never called: N if ``P(T) >= protection``, else ``N P(T)`` (the capital is
  at risk below the protection barrier), plus the coupon if due.

Cash flows are paid on the observation dates; the engine discounts.

Checks. With the trigger out of reach (inf) and no memory the autocallable is the
:class:`DigitalCouponNote`, priced by cash-or-nothing digitals, a bond and a gap put
(Rubinstein and Reiner 1991); with protection 0 as well it is a bond plus a strip of
digital coupons. A trigger of 0 calls the note on the first date, a bond paying N(1 + c)
then. At its own terms, and with coupons paid only on a call (coupon barrier inf), the
autocallable is priced by carrying the density of the log-price from date to date with
Gauss-Legendre quadrature -- a reference that shares no code with the simulation. A model
that holds the asset exactly at its spot decides the contract's inequalities: a fixing on
the trigger calls, a fixing on the coupon barrier pays.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import roots_legendre
from scipy.stats import norm

from limitcase import BlackScholes, Bound, Identity, Model, Monotone, NoReference, Param, Product, Reduction
from limitcase.references import cash_or_nothing, gap_option

from limitcase.references.schedules import equal_steps

from ._common import bs_inputs, even_dates, own_closed_form
from .vanilla import ZeroCouponBond

SCENARIO = BlackScholes(spot=100.0, rate=0.03, dividend=0.02, vol=0.25)
"""An equity index: spot 100, rate 3%, dividend yield 2%, volatility 25% (invented)."""

def _first_date(p) -> float:
    """The first observation date from the terms (n equal steps to T), never from the product's
    own ``dates()``: a wrong schedule must not move the reference with the payoff."""
    return float(equal_steps(p.maturity, p.observations)[0])


PINNED = {"spot": 1.0, "rate": SCENARIO.rate, "dividend": SCENARIO.rate, "vol": 0.0}
"""Model changes that hold the asset at its spot exactly on every date (no volatility, no
drift; spot 1 so that exp(log S0) is S0 to the last bit): every fixing sits on a level of 1,
which pins the contract's inequalities (a fixing equal to a level counts as at or above)."""


class _Note(Product):
    """Terms shared by the notes: notional, dates, conditional coupons, protection."""

    abstract = True

    notional = Param(100.0, low=0.0, low_open=True, high=math.inf, high_open=True, doc="amount redeemed and on which coupons accrue")
    maturity = Param(3.0, low=0.0, low_open=True, high=math.inf, high_open=True, doc="last observation date, in years")
    observations = Param(6, low=1, high=120, integer=True, doc="number of equally spaced observation dates")
    coupon = Param(0.04, low=0.0, high=1.0, doc="coupon per observation date, as a fraction of the notional")
    coupon_barrier = Param(
        0.7, low=0.0, high=math.inf, high_open=True, doc="a coupon is due when S(t_i) >= coupon_barrier * S(0)"
    )
    protection = Param(
        0.6, low=0.0, high=1.0, doc="at maturity N is repaid if S(T) >= protection * S(0), else N S(T) / S(0)"
    )

    def dates(self) -> np.ndarray:
        return even_dates(self.maturity, self.observations)

    def scenario(self) -> BlackScholes:
        return SCENARIO

    def sure_coupons(self) -> "_Note":
        """This note with every coupon paid and the capital protected (a fixed-coupon bond)."""
        return DigitalCouponNote(
            notional=self.notional, maturity=self.maturity, observations=self.observations,
            coupon=self.coupon, coupon_barrier=0.0, protection=0.0,
        )


def _at_the_levels(changes: dict) -> Reduction:
    """Every fixing exactly on the coupon and protection levels: all coupons and N are paid."""
    return Reduction(
        "fixings_at_the_levels",
        {**changes, "coupon_barrier": 1.0, "protection": 1.0},
        becomes=lambda p: DigitalCouponNote(**{**_note_terms(p), "coupon_barrier": 0.0, "protection": 0.0}),
        model_changes=PINNED,
        note="the asset pinned on the levels: S(t_i) >= B S(0) holds with equality, every coupon and N are paid",
    )


def _linear_in_coupon(p: _Note):
    """V(c) - 2 V(c/2) + V(0) = 0 on every path: the coupons enter the cash flows linearly."""
    return [(1.0, p), (-2.0, p.replace(coupon=p.coupon / 2.0)), (1.0, p.replace(coupon=0.0))]


def _note_relations() -> tuple:
    return (
        Monotone("coupon", +1, to=lambda p: min(p.coupon + 0.02, 1.0), pathwise=True),
        Monotone(
            "coupon_barrier", -1, to=lambda p: p.coupon_barrier + 0.2, pathwise=True,
            note="a higher coupon barrier pays fewer coupons, or pays them later (on every path when r >= 0)",
        ),
        Monotone("protection", -1, to=lambda p: min(p.protection + 0.2, 1.0), pathwise=True),
        Identity("linear_in_coupon", _linear_in_coupon),
        Bound(
            "below_sure_coupons", "<=", lambda p, m: p.sure_coupons().reference(m),
            pathwise_leg=lambda p: p.sure_coupons(),
            source="the same note with every coupon paid and the capital protected",
        ),
    )


class DigitalCouponNote(_Note):
    """Pays c N on each date t_i with S(t_i) >= B_c S(0); at T also N if S(T) >= B_p S(0),
    else N S(T) / S(0).

    Reference (Black-Scholes): the coupons are cash-or-nothing calls struck at B_c S(0); the
    redemption is a bond paying N less N / S(0) gap puts paying S(0) - S(T) when
    S(T) < B_p S(0) (Rubinstein and Reiner 1991).
    Limits: coupon 0 and protection 0 -> a zero-coupon bond paying N; fixings exactly on the
    coupon and protection levels (the asset held at its spot) -> every coupon and N paid (both
    on every path).
    Relations: increasing in the coupon, decreasing in the coupon barrier and in the
    protection barrier, linear in the coupon, below the fixed-coupon bond (on every path).
    """

    reductions = (
        own_closed_form(note="cash-or-nothing coupons + bond - gap put"),
        _at_the_levels({}),
        Reduction(
            "zero_coupon_bond",
            {"coupon": 0.0, "protection": 0.0},
            becomes=lambda p: ZeroCouponBond(cash=p.notional, maturity=p.maturity),
            note="no coupon and the capital always repaid: N at T on every path",
        ),
    )
    relations = _note_relations()

    def payoff(self, obs):
        perf = obs.s / obs.s0
        flows = self.coupon * self.notional * (perf >= self.coupon_barrier)
        flows[:, -1] += self.notional * np.where(perf[:, -1] >= self.protection, 1.0, perf[:, -1])
        return flows

    def reference(self, model: Model) -> float:
        spot, rate, dividend, vol = bs_inputs(model, self)
        t = equal_steps(self.maturity, self.observations)  # from the terms, not from dates()
        coupons = cash_or_nothing(spot, self.coupon_barrier * spot, t, rate, dividend, vol, self.coupon * self.notional)
        shortfall = gap_option(spot, spot, self.protection * spot, self.maturity, rate, dividend, vol, "put")
        return float(np.sum(coupons) + self.notional * (math.exp(-rate * self.maturity) - shortfall / spot))

    def reference_source(self) -> str:
        return "cash-or-nothing calls + bond - gap put (Rubinstein-Reiner)"


class Autocallable(_Note):
    """Autocallable note: coupons c N when S(t_i) >= B_c S(0) (with memory, plus the missed
    ones); called on the first date t_i < T with S(t_i) >= B_a S(0), paying N and that date's
    coupon; otherwise at T: N if S(T) >= B_p S(0), else N S(T) / S(0).

    Limits, on every path:

    * trigger inf, no memory -> the :class:`DigitalCouponNote`; with protection 0 too -> a
      bond plus digital coupons;
    * coupon barrier 0 (trigger inf, protection 0) -> every coupon paid: a fixed-coupon bond;
    * trigger 0 -> called on the first date, a bond paying N (1 + c) at t_1; so is a fixing
      exactly on the trigger (the asset held at its spot);
    * fixings exactly on the coupon and protection levels (trigger inf) -> every coupon and N;
    * trigger inf, protection 0 and no coupon -> a zero-coupon bond.

    By quadrature: the note at its own terms, with and without memory, and with coupons only
    on a call (coupon barrier inf: with memory a snowball, the call on t_i paying N (1 + i c);
    without, N (1 + c)).
    Relations, on every path: increasing in the coupon, decreasing in the coupon barrier and
    in the protection barrier, memory worth at least no memory, linear in the coupon, below
    the same note with sure coupons and protected capital.
    """

    trigger = Param(
        1.0, low=0.0, high=math.inf, doc="the note is called on t_i < T when S(t_i) >= trigger * S(0)"
    )
    coupon_barrier = Param(
        0.7, low=0.0, high=math.inf, doc="a coupon is due when S(t_i) >= coupon_barrier * S(0); inf: only on a call"
    )
    memory = Param(1, low=0, high=1, integer=True, doc="1: a coupon paid also pays the missed ones; 0: it does not")

    reductions = (
        own_closed_form("quadrature", note="log-price density carried from date to date by Gauss-Legendre quadrature"),
        own_closed_form("quadrature_no_memory", {"memory": 0}, note="the same without memory"),
        own_closed_form(
            "coupon_only_on_call", {"coupon_barrier": math.inf},
            note="coupon barrier inf: coupons come only with the call, all those accrued since issue (a snowball)",
        ),
        own_closed_form(
            "coupon_only_on_call_no_memory", {"coupon_barrier": math.inf, "memory": 0},
            note="coupon barrier inf, no memory: the call on any date pays N (1 + c)",
        ),
        Reduction(
            "never_called",
            {"trigger": math.inf, "memory": 0},
            becomes=lambda p: DigitalCouponNote(**_note_terms(p)),
            note="a trigger at inf never calls: without memory, the digital-coupon note on every path",
        ),
        Reduction(
            "bond_and_coupon_strip",
            {"trigger": math.inf, "memory": 0, "protection": 0.0},
            becomes=lambda p: DigitalCouponNote(**_note_terms(p)),
            note="never called and always repaid: a bond paying N plus cash-or-nothing coupons",
        ),
        Reduction(
            "every_coupon_paid",
            {"coupon_barrier": 0.0, "trigger": math.inf, "protection": 0.0},
            becomes=lambda p: p.sure_coupons(),
            note="coupon barrier 0: every coupon is paid on its date, memory or not -- a fixed-coupon bond",
        ),
        _at_the_levels({"trigger": math.inf}),
        Reduction(
            "called_at_the_trigger",
            {"trigger": 1.0},
            becomes=lambda p: ZeroCouponBond(cash=p.notional * (1.0 + p.coupon), maturity=_first_date(p)),
            model_changes=PINNED,
            note="the asset pinned at the trigger: a fixing equal to it calls the note, N (1 + c) at t_1",
        ),
        Reduction(
            "called_on_first_date",
            {"trigger": 0.0},
            becomes=lambda p: ZeroCouponBond(cash=p.notional * (1.0 + p.coupon), maturity=_first_date(p)),
            note="trigger 0: called on the first date, N (1 + c) at t_1 on every path",
        ),
        Reduction(
            "zero_coupon_bond",
            {"trigger": math.inf, "protection": 0.0, "coupon": 0.0},
            becomes=lambda p: ZeroCouponBond(cash=p.notional, maturity=p.maturity),
            note="never called, no coupon, capital always repaid: N at T on every path",
        ),
    )
    relations = (
        *_note_relations(),
        Monotone("memory", +1, to=0, pathwise=True, note="memory only adds payments"),
    )

    def sure_coupons(self) -> "Autocallable":
        """The same autocall with every coupon paid and the capital protected (built from
        the class itself, so that a subclass's payoff is compared with the original's)."""
        return Autocallable(**{**self.params(), "coupon_barrier": 0.0, "protection": 0.0, "memory": 0})

    def payoff(self, obs):
        perf = obs.s / obs.s0
        date = np.arange(perf.shape[1])
        last = date[-1]
        hit = (perf >= self.trigger) & (date < last)  # no call on the last date
        called = hit.any(axis=1)
        stop = np.where(called, hit.argmax(axis=1), last)[:, None]  # the date the note ends on
        ends = date == stop
        due = (date <= stop) & ((perf >= self.coupon_barrier) | (ends & called[:, None]))
        if self.memory:
            periods_paid = np.maximum.accumulate(np.where(due, date + 1, 0), axis=1)
            coupons = np.diff(periods_paid, axis=1, prepend=0)
        else:
            coupons = due
        final = np.where(perf[:, -1] >= self.protection, 1.0, perf[:, -1])
        redemption = np.where(called, 1.0, final)[:, None]
        return self.notional * (self.coupon * coupons + ends * redemption)

    def reference(self, model: Model) -> float:
        spot, rate, dividend, vol = bs_inputs(model, self)
        if vol == 0.0:
            raise NoReference("the quadrature reference of Autocallable needs a volatility > 0")
        if self.observations > 24:
            raise NoReference(f"the quadrature reference of Autocallable is limited to 24 dates, not {self.observations}")
        return autocall_by_quadrature(
            equal_steps(self.maturity, self.observations), rate, dividend, vol, self.notional, self.coupon, self.trigger,
            self.coupon_barrier, self.protection, bool(self.memory),
        )

    def reference_source(self) -> str:
        return "quadrature of the log-price density"


def _note_terms(p: _Note) -> dict:
    return {k: getattr(p, k) for k in _Note.param_specs()}


# ---------------------------------------------------------------------------------------
# the quadrature reference

SD_RANGE = 9.0
"""The log-price density at t is integrated over its mean +/- 9 standard deviations (the
mass outside is about 2e-19)."""

NODES_PER_SD = 8
"""Gauss-Legendre nodes (``scipy.special.roots_legendre``) per standard deviation of one
date-to-date step."""


def _nodes(lo: float, hi: float, levels: tuple[float, ...], step_sd: float) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights on [lo, hi], split at the finite levels inside it,
    so that every indicator of the payoff is constant on each piece."""
    inside = [x for x in levels if lo < x < hi]
    edges = np.unique([lo, hi, *inside])
    xs, ws = [], []
    for a, b in zip(edges[:-1], edges[1:]):
        u, w = roots_legendre(max(16, math.ceil(NODES_PER_SD * (b - a) / step_sd)))
        xs.append(0.5 * (b - a) * u + 0.5 * (a + b))
        ws.append(0.5 * (b - a) * w)
    return np.concatenate(xs), np.concatenate(ws)


def _log(level: float) -> float:
    return math.log(level) if level > 0.0 else -math.inf


def autocall_by_quadrature(
    dates: np.ndarray,
    rate: float,
    dividend: float,
    vol: float,
    notional: float,
    coupon: float,
    trigger: float,
    coupon_barrier: float,
    protection: float,
    memory: bool,
) -> float:
    r"""Price of the :class:`Autocallable` under Black-Scholes by quadrature.

    Parameters
    ----------
    dates : ndarray
        Observation times :math:`t_1 < \dots < t_n`, the last the maturity.
    rate, dividend, vol : float
        Black-Scholes short rate, dividend yield and volatility (> 0).
    notional, coupon, trigger, coupon_barrier, protection, memory
        The note's terms (levels as fractions of the spot).

    Returns
    -------
    float

    Notes
    -----
    The log-performance :math:`X(t) = \ln(S(t)/S(0))` has independent Gaussian increments,
    mean :math:`(r - q - \sigma^2/2)\Delta t`, variance :math:`\sigma^2 \Delta t`. Date by
    date the method carries :math:`g_k(x)`, the density of :math:`X(t_i)` on the paths
    still alive with k coupons owed (missed since the last one paid):

    .. math::

        g^{(i)}_k(x) = \int g^{(i-1)}_k(y)\, \varphi\big(x - y; \mu\Delta t_i, \sigma^2\Delta t_i\big)\, dy,

    the integral over the alive region of date :math:`t_{i-1}`, by Gauss-Legendre nodes on
    mean :math:`\pm 9` standard deviations, split at the trigger, coupon and protection
    levels so that every indicator is constant on each piece (the integrand is then smooth
    and the rule converges fast). At :math:`t_i` the note pays
    :math:`e^{-rt_i} cN \sum_k (k+1) \int_{x \ge \ell_i} g_k` (memory; without it the factor
    is 1), :math:`\ell_i` the coupon level (or the trigger where lower, since a call pays
    the coupon), the call :math:`e^{-rt_i} N \int_{x \ge \ln B_a} g`, and at T
    :math:`e^{-rT} N \int (1\{x \ge \ln B_p\} + e^x 1\{x < \ln B_p\}) g`. A coupon paid
    moves the mass to k = 0, a missed one to k + 1; only the region below the trigger goes
    on to the next date. Measured accuracy: halving or doubling the nodes (4 or 16 per
    standard deviation) moves the price by less than 1e-13 relative at the default terms,
    and with the trigger at inf and no memory it meets the closed form of the
    :class:`DigitalCouponNote` to about 1e-12 relative.

    References
    ----------
    .. [1] A. D. Andricopoulos, M. Widdicks, P. W. Duck and D. P. Newton, "Universal option
       valuation using quadrature methods", Journal of Financial Economics 67(3), 2003
       (the QUAD method; here run forward on the density).
    """
    n = len(dates)
    drift = rate - dividend - 0.5 * vol * vol
    call_level, due_level, floor = _log(trigger), _log(coupon_barrier), _log(protection)
    states = n if memory else 1  # coupons owed before a date: 0 .. n - 1 (with memory)
    owed = np.arange(1, states + 1)[:, None]
    x = np.zeros(1)
    g = np.zeros((states, 1))  # g[k, j]: mass at node j with k coupons owed
    g[0, 0] = 1.0
    value, t_prev = 0.0, 0.0
    for i, t in enumerate(dates):
        final = i == n - 1
        step_sd = vol * math.sqrt(t - t_prev)
        calls_at = math.inf if final else call_level
        pays_at = due_level if final else min(due_level, call_level)
        centre, half = drift * t, SD_RANGE * vol * math.sqrt(t)
        nodes, weights = _nodes(centre - half, centre + half, (calls_at, pays_at, floor), step_sd)
        kernel = norm.pdf((nodes[:, None] - x[None, :] - drift * (t - t_prev)) / step_sd) / step_sd
        g = (g @ kernel.T) * weights[None, :]
        discount = math.exp(-rate * t)
        due, called = nodes >= pays_at, nodes >= calls_at
        value += discount * coupon * notional * float((owed * g[:, due]).sum())
        if final:
            repaid = np.where(nodes >= floor, 1.0, np.exp(nodes))
            value += discount * notional * float((g.sum(axis=0) * repaid).sum())
            break
        value += discount * notional * float(g[:, called].sum())
        if memory:
            carried = np.zeros_like(g)
            carried[0] = np.where(due, g.sum(axis=0), 0.0)  # a coupon paid clears what is owed
            carried[1:] = np.where(due, 0.0, g[:-1])  # a coupon missed is owed one more
            g = carried
        x, g, t_prev = nodes[~called], g[:, ~called], t
    return value
