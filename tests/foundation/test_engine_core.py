"""The engine's promises: reproducibility, common random numbers, bounded memory, clear
errors for broken payoffs, and exact Black-Scholes paths."""

import math
import tracemalloc

import numpy as np
import pytest
from scipy import integrate, stats

from limitcase import BLOCK, BlackScholes, PayoffError, evaluate, price
from limitcase.engine import PathRule
from limitcase_payoffs.asians import ArithmeticAsianCall
from limitcase_payoffs.vanilla import EuropeanCall, EuropeanPut

MODEL = BlackScholes(spot=100.0, rate=0.05, dividend=0.02, vol=0.2)


def test_same_seed_same_numbers_any_batch():
    p = ArithmeticAsianCall()
    a = evaluate([p], MODEL, paths=3 * BLOCK + 17, seed=7, batch=BLOCK)
    b = evaluate([p], MODEL, paths=3 * BLOCK + 17, seed=7, batch=10 * BLOCK)
    assert a.mean.tolist() == b.mean.tolist() and a.cov.tolist() == b.cov.tolist()


def test_different_seeds_differ_and_cases_have_own_streams():
    p = EuropeanCall()
    a = price(p, MODEL, paths=20_000, seed=1)
    b = price(p, MODEL, paths=20_000, seed=2)
    assert a.value != b.value
    c = evaluate([p], MODEL, paths=20_000, seed=1, key=99).estimate([1.0])
    assert c.value != a.value


def test_more_paths_extend_the_same_stream():
    """The first blocks of a longer run are the blocks of a shorter one."""
    x = []

    class Spy(EuropeanCall):
        def payoff(self, obs):
            x.append(obs.s[:3, -1].copy())
            return super().payoff(obs)

    evaluate([Spy()], MODEL, paths=BLOCK, seed=5)
    evaluate([Spy()], MODEL, paths=3 * BLOCK, seed=5)
    assert np.array_equal(x[0], x[1])


def test_common_random_numbers_make_differences_precise():
    call, put = EuropeanCall(strike=100.0), EuropeanCall(strike=101.0)
    joint = evaluate([call, put], MODEL, paths=50_000, seed=3)
    diff = joint.estimate([1.0, -1.0])
    alone = joint.estimate([1.0, 0.0])
    assert diff.stderr < alone.stderr / 10


def test_exact_gbm_terminal_law():
    """log S(T) is normal with mean log S0 + (r - q - sigma^2/2) T and variance sigma^2 T:
    a Kolmogorov-Smirnov test against scipy's normal (the exact Black-Scholes transition)."""
    seen = []

    class Terminal(EuropeanCall):
        def payoff(self, obs):
            seen.append(np.log(obs.s[:, -1]))
            return super().payoff(obs)

    T = 2.0
    evaluate([Terminal(maturity=T)], MODEL, paths=2 * BLOCK, seed=11)
    x = np.concatenate(seen)
    mu = math.log(100.0) + (0.05 - 0.02 - 0.02) * T
    sd = 0.2 * math.sqrt(T)
    assert stats.kstest(x, "norm", args=(mu, sd)).pvalue > 0.001


def test_black_scholes_published_example_by_monte_carlo():
    """Hull, Options, Futures and Other Derivatives, the Black-Scholes-Merton worked
    example: S=42, K=40, r=0.10, sigma=0.20, T=0.5 gives call 4.76 and put 0.81 (published
    to two decimals; from memory, 4.7594 and 0.8086 at full precision). Monte Carlo must
    agree within 3 standard errors plus the published rounding (0.005)."""
    m = BlackScholes(spot=42.0, rate=0.10, dividend=0.0, vol=0.20)
    c = price(EuropeanCall(strike=40.0, maturity=0.5), m, paths=200_000, seed=42)
    p = price(EuropeanPut(strike=40.0, maturity=0.5), m, paths=200_000, seed=42)
    assert abs(c.value - 4.76) <= 0.005 + 3 * c.stderr
    assert abs(p.value - 0.81) <= 0.005 + 3 * p.stderr


def test_monte_carlo_against_scipy_quadrature():
    """The discounted call payoff integrated against the log-normal density with
    scipy.integrate.quad (no code shared with the engine) within 3.5 standard errors."""
    S, K, r, q, v, T = 100.0, 95.0, 0.03, 0.01, 0.3, 1.5
    dist = stats.lognorm(s=v * math.sqrt(T), scale=S * math.exp((r - q - 0.5 * v * v) * T))
    ref, _ = integrate.quad(lambda x: max(x - K, 0.0) * dist.pdf(x), K, np.inf)
    ref *= math.exp(-r * T)
    m = BlackScholes(spot=S, rate=r, dividend=q, vol=v)
    est = price(EuropeanCall(strike=K, maturity=T), m, paths=100_000, seed=8)
    assert abs(est.value - ref) <= 3.5 * est.stderr


def test_path_rule_counts_violations():
    a, b = EuropeanCall(strike=100.0), EuropeanCall(strike=100.5)
    joint = evaluate([a, b], MODEL, paths=BLOCK, seed=1, rules=[PathRule((1.0, -1.0))])
    assert joint.rules[0].violations > 0 and joint.rules[0].worst == pytest.approx(0.5 * math.exp(-0.05), abs=1e-9)
    ok = evaluate([a, a], MODEL, paths=BLOCK, seed=1, rules=[PathRule((1.0, -1.0))])
    assert ok.rules[0].violations == 0


def _peak_bytes(paths):
    tracemalloc.start()
    price(ArithmeticAsianCall(fixings=52), MODEL, paths=paths, seed=1)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak


def test_memory_does_not_grow_with_paths():
    """Peak allocation for 40 blocks is that of 4 blocks (within 10%): paths are made and
    consumed block by block. The bound: about BLOCK x dates x 8 bytes times a few arrays."""
    small, large = _peak_bytes(4 * BLOCK), _peak_bytes(40 * BLOCK)
    assert large <= 1.1 * small
    assert large < 10 * BLOCK * 52 * 8


class NaNPayoff(EuropeanCall):
    def payoff(self, obs):
        out = super().payoff(obs)
        out[5] = np.nan
        return out


class WrongShape(EuropeanCall):
    def payoff(self, obs):
        return np.stack([obs.s[:, -1]] * 2, axis=1)  # two columns for one date


class Raises(EuropeanCall):
    def payoff(self, obs):
        raise KeyError("fixing schedule")


class Negative(EuropeanCall):
    def payoff(self, obs):
        return obs.s[:, -1] - self.strike  # forgot the max


class WritesPaths(EuropeanCall):
    def payoff(self, obs):
        obs.s[:, -1] *= 2
        return obs.s[:, -1]


@pytest.mark.parametrize(
    "cls, pattern",
    [
        (NaNPayoff, r"NaNPayoff.payoff returned NaN or inf on 1 of \d+ paths \(first at path 5\)"),
        (WrongShape, r"WrongShape.payoff returned shape \(\d+, 2\)"),
        (Raises, r"Raises.payoff raised KeyError"),
        (Negative, r"Negative pays a negative amount"),
        (WritesPaths, r"WritesPaths.payoff raised ValueError"),
    ],
)
def test_broken_payoffs_raise_clear_errors(cls, pattern):
    with pytest.raises(PayoffError, match=pattern):
        price(cls(), MODEL, paths=1000, seed=1)


def test_bad_path_count_and_seed():
    from limitcase import ParamError

    with pytest.raises(ParamError, match="paths=1 must be an integer >= 2"):
        price(EuropeanCall(), MODEL, paths=1)
    with pytest.raises(ParamError, match="seed=-3"):
        price(EuropeanCall(), MODEL, paths=100, seed=-3)


def test_multi_asset_mismatch_is_reported():
    from limitcase import MultiBlackScholes, ParamError

    with pytest.raises(ParamError, match="single-asset product but the model simulates 2 assets"):
        price(EuropeanCall(), MultiBlackScholes(), paths=100)
