"""Make the demo quote set of the Fablewood 50, a fictional equity index.

INVENTED DATA, for the demo and its tests only: the quotes are Heston (1993) prices at the
parameters below, made noisy and given a bid-ask the way a screen would show them. No
market ever quoted them. Run ``python examples/quotes/make_quotes.py`` to rewrite
``fablewood50.csv`` and ``fablewood50.market`` beside this script (seeded: the same files
every time).

How a quote is made, for each expiry and strike:

1. the true price P by the reference Heston formula (:func:`limitcase.references.heston_price`)
   with the zero rate R(T) and the dividend yield to that expiry;
2. a half-spread h = max(0.4 vol points x vega, 0.25 index points);
3. a noisy mid m = P + e, e uniform on [-h/2, h/2];
4. bid = m - h rounded down and ask = m + h rounded up to the tick 0.05; the quoted price is
   the mid (bid + ask)/2.

So P always lies inside [bid, ask], and the price column differs from P by e plus the tick
rounding: variance h^2/12 + tick^2/24 (see :func:`noise_sd`), which is what the
calibration test uses to state how closely the parameters can be recovered.
"""

from __future__ import annotations

import math
from datetime import date
from pathlib import Path

import numpy as np

from limitcase.references import heston_price, implied_vol

NAME = "Fablewood 50"
SEED = 20260302
VALUATION = date(2026, 3, 2)
SPOT = 2840.0
RATES = ((0.25, 0.028), (0.5, 0.030), (1.0, 0.032), (2.0, 0.035))
DIVIDEND = 0.018
TRUE_PARAMS = {"v0": 0.035, "kappa": 1.8, "theta": 0.05, "vol_of_vol": 0.55, "rho": -0.65}
EXPIRIES = (date(2026, 4, 17), date(2026, 6, 19), date(2026, 9, 18), date(2027, 3, 19), date(2028, 3, 17))
MONEYNESS = (-2.0, -1.5, -1.0, -0.5, 0.0, 0.5, 1.0, 1.5)
"""Strikes at F exp(x sigma_atm sqrt(T)) for these x, rounded to 25 index points; puts below
the forward, calls above, both at the money."""
HALF_SPREAD_VOL = 0.004
MIN_HALF_SPREAD = 0.25
TICK = 0.05

HERE = Path(__file__).resolve().parent


def year_fraction(d: date) -> float:
    """ACT/365 fixed, as the quote reader."""
    return (d - VALUATION).days / 365.0


def zero_rate(t: float) -> float:
    """Linear between the nodes, flat outside, as the quote reader."""
    ts, rs = zip(*RATES)
    return float(np.interp(t, ts, rs))


def _vega(k: float, t: float, r: float, vol: float) -> float:
    srt = vol * math.sqrt(t)
    d1 = (math.log(SPOT / k) + (r - DIVIDEND) * t) / srt + 0.5 * srt
    return SPOT * math.exp(-DIVIDEND * t) * math.exp(-0.5 * d1 * d1) / math.sqrt(2.0 * math.pi) * math.sqrt(t)


def true_price(k: float, t: float, kind: str) -> float:
    p = TRUE_PARAMS
    return float(heston_price(SPOT, k, t, zero_rate(t), DIVIDEND, p["v0"], p["kappa"], p["theta"],
                              p["vol_of_vol"], p["rho"], kind=kind))


def half_spread(k: float, t: float, kind: str) -> float:
    """h = max(0.4 vol points x Black-Scholes vega at the true implied vol, 0.25)."""
    r = zero_rate(t)
    vol = float(implied_vol(true_price(k, t, kind), SPOT, k, t, r, DIVIDEND, kind))
    return max(HALF_SPREAD_VOL * _vega(k, t, r, vol), MIN_HALF_SPREAD)


def noise_sd(k: float, t: float, kind: str) -> float:
    """Standard deviation of the quoted mid around the true price: sqrt(h^2/12 + tick^2/24)
    (uniform noise of width h, plus the mid of two independent roundings to the tick)."""
    h = half_spread(k, t, kind)
    return math.sqrt(h * h / 12.0 + TICK * TICK / 24.0)


def strikes_for(t: float) -> list[tuple[float, str]]:
    r = zero_rate(t)
    f = SPOT * math.exp((r - DIVIDEND) * t)
    atm = float(implied_vol(true_price(f, t, "call"), SPOT, f, t, r, DIVIDEND, "call"))
    out: list[tuple[float, str]] = []
    for x in MONEYNESS:
        k = 25.0 * round(f * math.exp(x * atm * math.sqrt(t)) / 25.0)
        if x == 0.0:
            out += [(k, "put"), (k, "call")]
        else:
            out.append((k, "put" if x < 0 else "call"))
    return out


def generate() -> tuple[str, str]:
    """The text of the quote file and of the market file."""
    rng = np.random.default_rng(SEED)
    p = TRUE_PARAMS
    lines = [
        f"# {NAME} index options on {VALUATION.isoformat()}: INVENTED demo data, not market quotes.",
        "# Heston prices at v0={v0}, kappa={kappa}, theta={theta}, vol_of_vol={vol_of_vol}, rho={rho}".format(**p),
        "# plus uniform noise and a bid-ask; made by make_quotes.py (seed {}).".format(SEED),
        "expiry,strike,type,price,bid,ask",
    ]
    for d in EXPIRIES:
        t = year_fraction(d)
        for k, kind in strikes_for(t):
            true = true_price(k, t, kind)
            h = half_spread(k, t, kind)
            mid = true + rng.uniform(-0.5 * h, 0.5 * h)
            bid = math.floor(round((mid - h) / TICK, 9)) * TICK
            ask = math.ceil(round((mid + h) / TICK, 9)) * TICK
            bid = max(bid, 0.0)
            lines.append(f"{d.isoformat()},{k:g},{kind},{0.5 * (bid + ask):.3f},{bid:.2f},{ask:.2f}")
    market = [
        f"# Market of the {NAME} (fictional index) on {VALUATION.isoformat()}: INVENTED demo data.",
        f"spot = {SPOT:g}",
        "rate = " + " ".join(f"{t:g}:{r:g}" for t, r in RATES) + "   # zero rates by time, continuously compounded",
        f"dividend = {DIVIDEND:g}   # continuous yield",
        f"valuation_date = {VALUATION.isoformat()}",
    ]
    return "\n".join(lines) + "\n", "\n".join(market) + "\n"


def main() -> None:
    quotes, market = generate()
    (HERE / "fablewood50.csv").write_text(quotes, encoding="utf-8")
    (HERE / "fablewood50.market").write_text(market, encoding="utf-8")


if __name__ == "__main__":
    main()
