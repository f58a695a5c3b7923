"""The market of a quote set: spot, zero-rate and dividend-yield curves, valuation date;
read from options and a ``key = value`` file (format in :mod:`limitcase.quotes`). Also the
limits of the quote file."""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from datetime import date
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import InputError

__all__ = [
    "QUOTE_COLUMNS",
    "MARKET_KEYS",
    "DAYS_PER_YEAR",
    "MAX_EXPIRY",
    "MAX_IV",
    "_MAX_SHOWN",
    "MAX_QUOTE_FILE_BYTES",
    "MAX_QUOTES",
    "_SAMPLE_BYTES",
    "_ISO",
    "Curve",
    "Market",
    "_number",
    "parse_curve",
    "read_market_file",
    "resolve_market",
]


QUOTE_COLUMNS = ("expiry", "strike", "type", "price", "iv", "bid", "ask", "weight")
MARKET_KEYS = ("spot", "rate", "dividend", "valuation_date")
DAYS_PER_YEAR = 365.0
"""ACT/365 fixed: the year fraction of an ISO-date expiry (common practice)."""

MAX_EXPIRY = 100.0
MAX_IV = 5.0
_MAX_SHOWN = 25
MAX_QUOTE_FILE_BYTES = 4 << 20
"""Largest quote file read: 4 MiB, some 80,000 quotes of 50 bytes. Checked from the file's
size before anything is read, so a wrong file is refused at once with an estimate."""
MAX_QUOTES = 20_000
"""Most quotes in one file. A Heston fit prices every quote a few thousand times and the
repricing simulates every expiry; a listed-options surface has a few hundred quotes."""
_SAMPLE_BYTES = 1 << 16
_ISO = re.compile(r"^\d{4}-\d{2}-\d{2}$")


# ----------------------------------------------------------------------------------------
# market


@dataclass(frozen=True, slots=True)
class Curve:
    """A rate or yield as a function of time: linear between nodes, flat outside.

    ``Curve((0.0,), (0.03,))`` is a flat 3%.
    """

    times: tuple[float, ...]
    values: tuple[float, ...]

    @classmethod
    def flat(cls, value: float) -> "Curve":
        return cls((0.0,), (float(value),))

    @property
    def is_flat(self) -> bool:
        return len(set(self.values)) == 1

    def __call__(self, t: float) -> float:
        if len(self.times) == 1:
            return self.values[0]
        return float(np.interp(t, self.times, self.values))

    def text(self) -> str:
        if self.is_flat:
            return f"{self.values[0]:g}"
        return " ".join(f"{t:g}:{v:g}" for t, v in zip(self.times, self.values))


@dataclass(frozen=True, slots=True)
class Market:
    """Spot, zero-rate curve, dividend-yield curve and (optionally) the valuation date."""

    spot: float
    rate: Curve
    dividend: Curve
    valuation_date: date | None = None
    source: str = ""

    def discount(self, t: float) -> float:
        """Zero-coupon bond price ``exp(-R(t) t)``."""
        return math.exp(-self.rate(t) * t)

    def forward(self, t: float) -> float:
        """Forward price ``S exp((R(t) - Q(t)) t)``."""
        return self.spot * math.exp((self.rate(t) - self.dividend(t)) * t)

    def to_dict(self) -> dict[str, Any]:
        return {
            "spot": self.spot,
            "rate": self.rate.text(),
            "dividend": self.dividend.text(),
            "valuation_date": self.valuation_date.isoformat() if self.valuation_date else None,
            "source": self.source,
        }


def _number(text: str) -> float | None:
    try:
        x = float(text)
    except ValueError:
        return None
    return x


def parse_curve(text: str, what: str, where: str) -> Curve:
    """A flat value (``0.03``) or a table of ``time:value`` pairs (``0.5:0.03 1:0.032``).

    Parameters
    ----------
    text
        The value as written.
    what
        ``"rate"`` or ``"dividend"``, for messages.
    where
        Where the text came from (``"quotes.market line 3"``, ``"--rate"``), for messages.

    Raises
    ------
    InputError
        Not a number or table; a time that is not > 0 or not increasing; a value outside
        [-1, 1] (decimals: 3% is 0.03).
    """
    raw = text.strip()
    if not raw:
        raise InputError(f"{where}: {what} is empty; give one number (0.03) or a table like '0.5:0.03 1:0.032'")
    items = [p for p in re.split(r"[\s,;]+", raw) if p]
    times: list[float] = []
    values: list[float] = []
    if len(items) == 1 and ":" not in items[0]:
        v = _number(items[0])
        if v is None or not math.isfinite(v):
            raise InputError(
                f"{where}: {what}={raw!r} is not a number; give a decimal such as 0.03, "
                f"or a table of time:{what} pairs such as '0.5:0.03 1:0.032'"
            )
        times, values = [0.0], [v]
    else:
        for item in items:
            t_text, sep, v_text = item.partition(":")
            t, v = _number(t_text), _number(v_text)
            if not sep or t is None or v is None or not (math.isfinite(t) and math.isfinite(v)):
                raise InputError(
                    f"{where}: {what} entry {item!r} is not a time:{what} pair of numbers; "
                    f"write the table as '0.5:0.03 1:0.032' (times in years)"
                )
            if t <= 0.0 or t > MAX_EXPIRY:
                raise InputError(
                    f"{where}: {what} time {t!r} in {item!r} is outside (0, {MAX_EXPIRY:g}]; "
                    f"times are year fractions > 0"
                )
            if times and t <= times[-1]:
                raise InputError(
                    f"{where}: {what} times must increase; {t!r} in {item!r} follows {times[-1]!r}"
                )
            times.append(t)
            values.append(v)
    for v in values:
        if not -1.0 <= v <= 1.0:
            raise InputError(
                f"{where}: {what} {v!r} is outside [-1, 1]; rates and yields are decimals "
                f"(3% is 0.03)"
            )
    return Curve(tuple(times), tuple(values))


def _parse_date(text: str, where: str) -> date:
    try:
        return date.fromisoformat(text.strip())
    except ValueError as exc:
        raise InputError(f"{where}: valuation_date={text.strip()!r} is not an ISO date; write it as 2026-03-02") from exc


def read_market_file(path: str | Path) -> dict[str, tuple[str, str]]:
    """The ``key = value`` lines of a market file as ``{key: (value, "file line n")}``.

    Raises
    ------
    InputError
        Missing or unreadable file, a line without ``=``, an unknown or repeated key.
    """
    p = Path(path)
    try:
        lines = p.read_text(encoding="utf-8-sig").splitlines()
    except FileNotFoundError as exc:
        raise InputError(f"market file {str(path)!r} does not exist; give --market FILE or the market as options") from exc
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"market file {str(path)!r} cannot be read as UTF-8 text: {exc}") from exc
    out: dict[str, tuple[str, str]] = {}
    for n, line in enumerate(lines, start=1):
        body = line.split("#", 1)[0].strip()
        if not body:
            continue
        where = f"{path} line {n}"
        key, sep, value = body.partition("=")
        key = key.strip().lower()
        if not sep:
            raise InputError(f"{where}: {line.strip()!r} is not a 'key = value' line; keys are {', '.join(MARKET_KEYS)}")
        if key not in MARKET_KEYS:
            raise InputError(f"{where}: unknown key {key!r}; the keys are {', '.join(MARKET_KEYS)}")
        if key in out:
            raise InputError(f"{where}: {key!r} is given twice (first at {out[key][1]}); keep one")
        out[key] = (value.strip(), where)
    return out


def resolve_market(
    *,
    market_file: str | Path | None = None,
    spot: float | str | None = None,
    rate: float | str | None = None,
    dividend: float | str | None = None,
    valuation_date: date | str | None = None,
) -> Market:
    """The market from a market file and/or explicit values (explicit values win).

    Raises
    ------
    InputError
        A value missing from both, or malformed (see :func:`parse_curve`).
    """
    raw: dict[str, tuple[str, str]] = read_market_file(market_file) if market_file is not None else {}
    given = {"spot": spot, "rate": rate, "dividend": dividend, "valuation_date": valuation_date}
    for key, value in given.items():
        if value is not None:
            raw[key] = (value.isoformat() if isinstance(value, date) else str(value), f"--{key.replace('_', '-')}")
    src = f"market file {market_file}" if market_file is not None else "command options"
    for key in ("spot", "rate", "dividend"):
        if key not in raw:
            hint = f" or a line '{key} = ...' in {market_file}" if market_file is not None else " or a market file (--market FILE)"
            raise InputError(
                f"no {key} given: pass --{key}{hint}"
                + ("; use --dividend 0 for none" if key == "dividend" else "")
            )
    s_text, s_where = raw["spot"]
    s = _number(s_text)
    if s is None or not math.isfinite(s) or s <= 0.0:
        raise InputError(f"{s_where}: spot={s_text!r} must be a number > 0 (the underlying's price today)")
    r = parse_curve(raw["rate"][0], "rate", raw["rate"][1])
    q = parse_curve(raw["dividend"][0], "dividend", raw["dividend"][1])
    vd = _parse_date(*raw["valuation_date"]) if "valuation_date" in raw else None
    return Market(spot=s, rate=r, dividend=q, valuation_date=vd, source=src)
