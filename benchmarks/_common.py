"""Helpers shared by the benchmark scripts (not part of the package)."""

from __future__ import annotations

import os
import statistics
import time
from typing import Callable

import numpy as np

from limitcase import BlackScholes, Product


def load_text() -> str:
    """The 1-minute load average against the cores: benchmarks on a shared machine say how busy it was."""
    try:
        one, five, fifteen = os.getloadavg()
    except OSError:  # pragma: no cover
        return "unknown"
    return f"{one:.2f} (1 min), {five:.2f} (5 min) on {os.cpu_count()} cores"


def timed(fn: Callable[[], object]) -> tuple[float, object]:
    t0 = time.perf_counter()
    out = fn()
    return time.perf_counter() - t0, out


def median(xs) -> float:
    return float(statistics.median(xs))


def asian_with_control(fixings: int = 52) -> tuple[Product, str]:
    """The catalogue's arithmetic Asian call when its control_variates hook (the geometric
    Asian, Kemna-Vorst) is there; otherwise a benchmark-only twin with that hook."""
    from limitcase_payoffs.asians import ArithmeticAsianCall

    model = BlackScholes()
    p = ArithmeticAsianCall(fixings=fixings)
    if p.control_variates(model):
        return p, "limitcase_payoffs.asians.ArithmeticAsianCall (its own geometric-Asian control)"

    from limitcase.references import geometric_asian

    class _Geometric(ArithmeticAsianCall):
        def payoff(self, obs):
            return np.maximum(np.exp(np.log(obs.s).mean(axis=1)) - self.strike, 0.0)

    class BenchAsian(ArithmeticAsianCall):
        def control_variates(self, m):
            g = _Geometric(**self.params())
            ref = geometric_asian(m.spot, self.strike, self.dates(), m.rate, m.dividend, m.vol, "call")
            return ((g, float(ref)),)

    return BenchAsian(fixings=fixings), "benchmark-only twin of ArithmeticAsianCall with a geometric-Asian control"
