"""Autocallable catalogue: the shipped notes pass their declared checks, every declared
reduction and relation catches a realistic bug, the payoff follows the term sheet on
hand-made paths, and the quadrature reference agrees with independent computations."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate
from scipy.stats import norm

import limitcase_payoffs.autocallable as ac
from limitcase import BlackScholes, MultiBlackScholes, NoReference, Observed, ParamError
from limitcase.testing import assert_all_pass, assert_caught, assert_every_check_has_a_twin
from limitcase_payoffs.autocallable import SCENARIO, Autocallable, DigitalCouponNote

PATHS = 20_000
SHIPPED = [DigitalCouponNote, Autocallable]


@pytest.mark.parametrize("cls", SHIPPED, ids=lambda c: c.__name__)
def test_shipped_note_passes_every_check(cls):
    assert_all_pass(cls, paths=PATHS)


# ---------------------------------------------------------------------------------------
# the payoff on hand-made paths (term-sheet arithmetic, common practice)


def _observe(note, perf):
    s = 100.0 * np.asarray(perf, dtype=float)
    return Observed(note.dates(), s, 100.0, 0.03, lambda: None)


def test_autocallable_cash_flows_follow_the_term_sheet():
    note = Autocallable(observations=4, maturity=2.0, coupon=0.05, coupon_barrier=0.8, protection=0.6, trigger=1.0)
    perf = [
        [0.70, 1.05, 1.20, 1.30],  # misses date 1, called on date 2 with the missed coupon
        [0.70, 0.75, 0.90, 0.50],  # misses 1 and 2, pays 3 coupons on date 3, capital lost at T
        [0.90, 0.70, 0.70, 0.85],  # pays date 1, misses 2 and 3, pays 3 coupons at T with N
        [0.50, 0.50, 0.50, 1.50],  # never called (no call at T), one coupon paid 4 times over at T
    ]
    flows = note.payoff(_observe(note, perf))
    expected = [
        [0.0, 100.0 + 10.0, 0.0, 0.0],
        [0.0, 0.0, 15.0, 50.0],
        [5.0, 0.0, 0.0, 15.0 + 100.0],
        [0.0, 0.0, 0.0, 20.0 + 100.0],
    ]
    assert np.allclose(flows, expected, rtol=0, atol=1e-12)
    no_memory = note.replace(memory=0).payoff(_observe(note, perf))
    assert np.allclose(no_memory, [[0, 105, 0, 0], [0, 0, 5, 50], [5, 0, 0, 105], [0, 0, 0, 105]], rtol=0, atol=1e-12)


def test_call_pays_the_coupon_even_below_the_coupon_barrier():
    note = Autocallable(observations=2, maturity=1.0, coupon=0.05, coupon_barrier=0.9, trigger=0.5)
    flows = note.payoff(_observe(note, [[0.6, 2.0]]))
    assert np.allclose(flows, [[105.0, 0.0]], rtol=0, atol=1e-12)


def test_digital_coupon_note_cash_flows():
    note = DigitalCouponNote(observations=3, maturity=1.5, coupon=0.05, coupon_barrier=0.8, protection=0.6)
    flows = note.payoff(_observe(note, [[0.9, 0.7, 0.59], [1.2, 0.5, 0.8]]))
    assert np.allclose(flows, [[5.0, 0.0, 59.0], [5.0, 0.0, 5.0 + 100.0]], rtol=0, atol=1e-12)


# ---------------------------------------------------------------------------------------
# broken twins


class NoteProtectionWrongSide(DigitalCouponNote):
    def payoff(self, obs):  # repays N below the protection barrier, N S(T)/S(0) above it
        perf = obs.s / obs.s0
        flows = self.coupon * self.notional * (perf >= self.coupon_barrier)
        flows[:, -1] += self.notional * np.where(perf[:, -1] < self.protection, 1.0, perf[:, -1])
        return flows


class NoteForgetsProtection(DigitalCouponNote):
    def payoff(self, obs):  # the capital always follows the asset
        perf = obs.s / obs.s0
        flows = self.coupon * self.notional * (perf >= self.coupon_barrier)
        flows[:, -1] += self.notional * perf[:, -1]
        return flows


class NoteCouponWrongSide(DigitalCouponNote):
    def payoff(self, obs):  # coupons paid below the coupon barrier
        perf = obs.s / obs.s0
        flows = self.coupon * self.notional * (perf < self.coupon_barrier)
        flows[:, -1] += self.notional * np.where(perf[:, -1] >= self.protection, 1.0, perf[:, -1])
        return flows


class NoteStrictLevels(DigitalCouponNote):
    def payoff(self, obs):  # "above" read as strictly above: a fixing on a level pays nothing
        perf = obs.s / obs.s0
        flows = self.coupon * self.notional * (perf > self.coupon_barrier)
        flows[:, -1] += self.notional * np.where(perf[:, -1] > self.protection, 1.0, perf[:, -1])
        return flows


class NoteCouponAsComplement(DigitalCouponNote):
    def payoff(self, obs):  # a percent-of-par slip: the coupon entered as 1 - c
        return DigitalCouponNote.payoff(self.replace(coupon=1.0 - self.coupon), obs)


class NoteCouponCompounded(DigitalCouponNote):
    def payoff(self, obs):  # an annual coupon compounded where the per-period one was meant
        return DigitalCouponNote.payoff(self.replace(coupon=(1 + self.coupon) ** 2 - 1), obs)


class NoteLastCouponTwice(DigitalCouponNote):
    def payoff(self, obs):  # the final coupon added again with the redemption
        flows = DigitalCouponNote.payoff(self, obs)
        flows[:, -1] += self.coupon * self.notional
        return flows


def twin_flows(p, obs, coupon_due=np.greater_equal, repaid=np.greater_equal, calls=np.greater_equal, first_period=1,
               stops=True, call_pays_all_dates=False):
    """The autocallable's cash flows written out again, with one term-sheet rule swappable
    per broken twin (the defaults reproduce the product, see the test below)."""
    perf = obs.s / obs.s0
    date = np.arange(perf.shape[1])
    last = date[-1]
    hit = calls(perf, p.trigger) & (date < last)
    called = hit.any(axis=1)
    stop = np.where(called, hit.argmax(axis=1), last)[:, None]
    ends = date == stop
    alive = date <= stop if stops else np.ones_like(ends)
    with_call = called[:, None] if call_pays_all_dates else ends & called[:, None]
    due = alive & (coupon_due(perf, p.coupon_barrier) | with_call)
    if p.memory:
        coupons = np.diff(np.maximum.accumulate(np.where(due, date + first_period, 0), axis=1), axis=1, prepend=0)
    else:
        coupons = due
    final = np.where(repaid(perf[:, -1], p.protection), 1.0, perf[:, -1])
    return p.notional * (p.coupon * coupons + ends * np.where(called, 1.0, final)[:, None])


def test_twin_flows_reproduce_the_product():
    rng = np.random.default_rng(3)
    for note in (Autocallable(), Autocallable(memory=0), Autocallable(trigger=0.9, coupon_barrier=1.1)):
        perf = np.exp(np.cumsum(0.2 * rng.standard_normal((2000, note.observations)), axis=1))
        obs = _observe(note, perf)
        assert np.array_equal(twin_flows(note, obs), note.payoff(obs))


class AutocallForgetsMemory(Autocallable):
    def payoff(self, obs):
        return Autocallable.payoff(self.replace(memory=0), obs)


class AutocallOnCouponBarrier(Autocallable):
    def payoff(self, obs):  # compares with the coupon barrier where the trigger was meant
        return Autocallable.payoff(self.replace(trigger=self.coupon_barrier), obs)


class AutocallProtectionWrongSide(Autocallable):
    def payoff(self, obs):
        return twin_flows(self, obs, repaid=np.less)


class AutocallCouponWrongSide(Autocallable):
    def payoff(self, obs):
        return twin_flows(self, obs, coupon_due=np.less)


class AutocallCouponsAfterCall(Autocallable):
    def payoff(self, obs):  # the coupon schedule runs on after the note has been called
        return twin_flows(self, obs, stops=False)


class AutocallMemoryOffByOne(Autocallable):
    def payoff(self, obs):  # periods counted from 0: a paid coupon covers one period too few
        return twin_flows(self, obs, first_period=0)


class AutocallCallPaysEveryDate(Autocallable):
    def payoff(self, obs):  # a called note treated as due on every date up to the call
        return twin_flows(self, obs, call_pays_all_dates=True)


class AutocallStrictCoupon(Autocallable):
    def payoff(self, obs):  # a fixing on the coupon barrier taken as below it
        return twin_flows(self, obs, coupon_due=np.greater)


class AutocallStrictTrigger(Autocallable):
    def payoff(self, obs):  # a fixing on the trigger taken as below it
        return twin_flows(self, obs, calls=np.greater)


class AutocallLastCouponTwice(Autocallable):
    def payoff(self, obs):
        flows = Autocallable.payoff(self, obs)
        flows[:, -1] += self.coupon * self.notional * (flows[:, -1] > 0)
        return flows


class AutocallCouponAsComplement(Autocallable):
    def payoff(self, obs):
        return Autocallable.payoff(self.replace(coupon=1.0 - self.coupon), obs)


class AutocallCouponCompounded(Autocallable):
    def payoff(self, obs):
        return Autocallable.payoff(self.replace(coupon=(1 + self.coupon) ** 2 - 1), obs)


BROKEN = [
    (NoteProtectionWrongSide, "closed_form"),
    (NoteForgetsProtection, "zero_coupon_bond"),
    (NoteStrictLevels, "fixings_at_the_levels"),
    (NoteCouponAsComplement, "increasing_in_coupon"),
    (NoteCouponWrongSide, "decreasing_in_coupon_barrier"),
    (NoteProtectionWrongSide, "decreasing_in_protection"),
    (NoteCouponCompounded, "linear_in_coupon"),
    (NoteLastCouponTwice, "below_sure_coupons"),
    (AutocallForgetsMemory, "quadrature"),
    (AutocallOnCouponBarrier, "quadrature_no_memory"),
    (AutocallForgetsMemory, "coupon_only_on_call"),
    (AutocallCallPaysEveryDate, "coupon_only_on_call_no_memory"),
    (AutocallProtectionWrongSide, "never_called"),
    (AutocallCouponWrongSide, "bond_and_coupon_strip"),
    (AutocallMemoryOffByOne, "every_coupon_paid"),
    (AutocallCouponsAfterCall, "called_on_first_date"),
    (AutocallStrictCoupon, "fixings_at_the_levels"),
    (AutocallStrictTrigger, "called_at_the_trigger"),
    (AutocallProtectionWrongSide, "zero_coupon_bond"),
    (AutocallCouponAsComplement, "increasing_in_coupon"),
    (AutocallCouponWrongSide, "decreasing_in_coupon_barrier"),
    (AutocallProtectionWrongSide, "decreasing_in_protection"),
    (AutocallCouponCompounded, "linear_in_coupon"),
    (AutocallLastCouponTwice, "below_sure_coupons"),
    (AutocallMemoryOffByOne, "increasing_in_memory"),
]


@pytest.mark.parametrize("broken, case", BROKEN, ids=[f"{b.__name__}-{c}" for b, c in BROKEN])
def test_broken_twin_is_caught(broken, case):
    assert_caught(broken, case, paths=PATHS)


def test_every_declared_check_has_a_broken_twin():
    assert_every_check_has_a_twin(SHIPPED, BROKEN)


# ---------------------------------------------------------------------------------------
# the references, against computations that share nothing with them


def test_quadrature_meets_the_digital_closed_form_when_never_called():
    for terms in ({}, {"protection": 0.0}, {"coupon_barrier": 0.0}, {"coupon_barrier": 1.2, "protection": 0.9},
                  {"observations": 1}, {"observations": 12, "maturity": 2.0}):
        never = Autocallable(trigger=math.inf, memory=0, **terms).reference(SCENARIO)
        assert never == pytest.approx(DigitalCouponNote(**terms).reference(SCENARIO), rel=1e-11)


def test_quadrature_with_trigger_zero_is_the_first_date_bond():
    note = Autocallable(trigger=0.0)
    expected = note.notional * (1 + note.coupon) * math.exp(-SCENARIO.rate * note.dates()[0])
    assert note.reference(SCENARIO) == pytest.approx(expected, rel=1e-12)


def _two_dates_by_quad(note: Autocallable, model: BlackScholes) -> tuple[float, float]:
    """The two-date autocallable written out and integrated with scipy: date 1 calls or pays
    the coupon; the surviving paths' date-2 coupon (doubled with memory after a miss) and
    redemption are integrated against the density of X(t1) = log S(t1)/S(0), in closed form
    given X(t1)."""
    r, q, v = model.rate, model.dividend, model.vol
    t1, t2 = note.dates()
    mu, dt = r - q - 0.5 * v * v, t2 - t1
    s = v * math.sqrt(dt)
    b, cl, pl = math.log(note.trigger), math.log(note.coupon_barrier), math.log(note.protection)
    l1 = min(cl, b)
    n, c = note.notional, note.coupon
    x1 = norm(mu * t1, v * math.sqrt(t1))

    def alive(x):
        owed = 1.0 + (note.memory and x < l1)
        coupon = c * n * owed * norm.cdf((x + mu * dt - cl) / s)
        repaid = norm.cdf((x + mu * dt - pl) / s) + math.exp(x + mu * dt + 0.5 * s * s) * norm.cdf((pl - x - mu * dt) / s - s)
        return x1.pdf(x) * (coupon + n * repaid)

    lo = mu * t1 - 12 * v * math.sqrt(t1)
    parts = [integrate.quad(alive, a, z, epsabs=1e-13, epsrel=1e-12, limit=200) for a, z in ((lo, l1), (l1, b))]
    first = math.exp(-r * t1) * (n * (1 + c) * x1.sf(b) + c * n * (x1.cdf(b) - x1.cdf(l1)))
    value = first + math.exp(-r * t2) * sum(p[0] for p in parts)
    return value, math.exp(-r * t2) * sum(p[1] for p in parts)


@pytest.mark.parametrize("memory", [0, 1])
def test_quadrature_meets_scipy_on_two_dates(memory):
    note = Autocallable(observations=2, maturity=1.0, trigger=1.05, coupon=0.05, coupon_barrier=0.8,
                        protection=0.65, memory=memory)
    value, err = _two_dates_by_quad(note, SCENARIO)
    assert note.reference(SCENARIO) == pytest.approx(value, abs=max(100 * err, 1e-9 * value))


def test_quadrature_has_converged(monkeypatch):
    note = Autocallable()
    coarse = note.reference(SCENARIO)
    monkeypatch.setattr(ac, "NODES_PER_SD", 2 * ac.NODES_PER_SD)
    assert note.reference(SCENARIO) == pytest.approx(coarse, rel=1e-12)


def test_digital_note_closed_form_by_quadrature():
    # coupons: exp(-r t) P(S(t) >= B S0) with the normal CDF; redemption: quadrature of
    # N (1{x >= ln Bp} + e^x 1{x < ln Bp}) against the density of x = ln S(T)/S0
    note = DigitalCouponNote()
    r, q, v = SCENARIO.rate, SCENARIO.dividend, SCENARIO.vol
    t = note.dates()
    mu = r - q - 0.5 * v * v
    coupons = sum(math.exp(-r * ti) * norm.sf((math.log(note.coupon_barrier) - mu * ti) / (v * math.sqrt(ti))) for ti in t)
    x_t = norm(mu * t[-1], v * math.sqrt(t[-1]))
    pl = math.log(note.protection)
    below, err = integrate.quad(lambda x: math.exp(x) * x_t.pdf(x), pl - 15 * v * math.sqrt(t[-1]), pl, epsabs=1e-14)
    value = note.notional * (note.coupon * coupons + math.exp(-r * t[-1]) * (x_t.sf(pl) + below))
    assert note.reference(SCENARIO) == pytest.approx(value, rel=1e-10)


def test_references_refuse_what_they_cannot_price():
    with pytest.raises(NoReference, match="volatility > 0"):
        Autocallable().reference(BlackScholes(vol=0.0))
    with pytest.raises(NoReference, match="limited to 24 dates"):
        Autocallable(observations=25).reference(SCENARIO)
    with pytest.raises(NoReference, match="BlackScholes only"):
        DigitalCouponNote().reference(MultiBlackScholes(spots=(100.0,), correlation=1.0))


def test_terms_are_validated():
    with pytest.raises(ParamError, match=r"protection=1\.5 is outside \[0, 1\] for Autocallable"):
        Autocallable(protection=1.5)
    with pytest.raises(ParamError, match=r"memory=0\.5 is not a whole number"):
        Autocallable(memory=0.5)
