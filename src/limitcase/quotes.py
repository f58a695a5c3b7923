"""Vanilla option quotes and their market: reading, validating, no-arbitrage warnings.

The quote file
--------------
A CSV file with a header line; blank lines and lines whose first non-blank character is
``#`` are skipped (line numbers in messages are those of the file). Columns, in any order,
names case-insensitive:

========== ========= ===============================================================
column     required  meaning
========== ========= ===============================================================
expiry     yes       year fraction (``0.5``) or ISO date (``2026-09-18``; needs a
                     valuation date, year fraction = days / 365, ACT/365 fixed)
strike     yes       strike > 0
type       yes       ``call`` or ``put``
price      one of    the option's market price (mid or mark), > 0
iv         the two   or its Black-Scholes implied volatility, a decimal in (0, 5]
bid, ask   no        both or neither (a row may leave both blank); in the unit of the
                     quote column (prices with ``price``, volatilities with ``iv``);
                     0 <= bid <= price <= ask
weight     no        weight >= 0 in the calibration (default 1; 0 keeps the quote out of
                     the fit but it is still repriced)
========== ========= ===============================================================

A file with any bad cell is refused as a whole: every problem found is listed, each with
the file, the line, the column and the value, and nothing is returned.

The market file
---------------
Spot, rates and dividend yield come from command options or from a small text file of
``key = value`` lines (``#`` starts a comment), by default the quote file with the suffix
``.market`` (``quotes.csv`` -> ``quotes.market``)::

    spot = 2840.0
    rate = 0.25:0.028 0.5:0.030 1:0.032 2:0.035   # zero rates by time, or one number
    dividend = 0.018                              # continuous yield, or a table
    valuation_date = 2026-03-02                   # needed only for ISO-date expiries

``rate`` and ``dividend`` are continuously compounded decimals (3% is ``0.03``), either one
number (flat) or a table of ``time:value`` pairs (year fractions, increasing) separated by
blanks or commas. Between the times the value is interpolated linearly, outside them it
is held flat. An option expiring at T is priced with the zero rate R(T) and the yield Q(T)
held flat to T: for a European payoff that depends on S(T) alone this is exact under
deterministic rates, since only the integrals of r and q up to T enter the law of S(T).

No-arbitrage warnings
---------------------
Quotes that break a model-free bound are valid input but suspect; :func:`arbitrage_warnings`
names them (Merton 1973 bounds; Carr and Madan 2005 conditions on strikes and expiries):

* bounds: ``max(S e^{-qT} - K e^{-rT}, 0) <= call <= S e^{-qT}`` and
  ``max(K e^{-rT} - S e^{-qT}, 0) <= put <= K e^{-rT}``;
* strikes, per expiry and type: calls non-increasing, puts non-decreasing in the strike,
  the price change between two strikes at most ``(K2 - K1) e^{-rT}``, prices convex in
  the strike;
* expiries: total implied variance ``w = sigma^2 T`` non-decreasing in T at the same
  forward moneyness ``ln(K / F(T))``. Each quote of an expiry is compared with the next
  expiry's ``w`` interpolated linearly in moneyness (over the range it spans); for a
  convex smile the interpolation overstates the later ``w``, so a warning is never an
  artefact of the interpolation.
"""

from __future__ import annotations

import csv
import math
import re
from dataclasses import dataclass, field
from datetime import date
from pathlib import Path
from typing import Any, Iterable, Mapping

import numpy as np

from .errors import InputError, ParamError
from .references import black_scholes, implied_vol

__all__ = [
    "Curve",
    "Market",
    "Quote",
    "QuoteSet",
    "ArbitrageWarning",
    "QUOTE_COLUMNS",
    "MARKET_KEYS",
    "parse_curve",
    "read_market_file",
    "resolve_market",
    "load_quotes",
    "check_quote_file",
    "MAX_QUOTE_FILE_BYTES",
    "MAX_QUOTES",
    "arbitrage_warnings",
    "describe",
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


# ----------------------------------------------------------------------------------------
# quotes


@dataclass(frozen=True, slots=True)
class Quote:
    """One validated quote. Prices are in currency; ``iv`` is None when no volatility
    reproduces the price (it breaks a bound: see the warnings)."""

    line: int
    label: str
    expiry: float
    expiry_text: str
    strike: float
    kind: str
    price: float
    iv: float | None
    bid: float | None = None
    ask: float | None = None
    bid_iv: float | None = None
    ask_iv: float | None = None
    weight: float = 1.0

    @property
    def has_spread(self) -> bool:
        return self.bid is not None and self.ask is not None

    @property
    def spread(self) -> float | None:
        return None if self.bid is None or self.ask is None else self.ask - self.bid


@dataclass(frozen=True, slots=True)
class ArbitrageWarning:
    """A model-free no-arbitrage condition broken by the named quotes."""

    kind: str  # "bound", "strike", "calendar"
    labels: tuple[str, ...]
    message: str

    def to_dict(self) -> dict[str, Any]:
        return {"kind": self.kind, "labels": list(self.labels), "message": self.message}


@dataclass(frozen=True)
class QuoteSet:
    """Validated quotes, their market, and the no-arbitrage warnings they raise."""

    path: str
    quotes: tuple[Quote, ...]
    market: Market
    quoted: str  # "price" or "iv"
    warnings: tuple[ArbitrageWarning, ...] = field(default_factory=tuple)

    def __len__(self) -> int:
        return len(self.quotes)

    def expiries(self) -> list[float]:
        return sorted({q.expiry for q in self.quotes})

    def by_expiry(self) -> list[tuple[float, list[int]]]:
        """``[(T, [indices of its quotes, by strike then type])]`` in increasing T."""
        groups: dict[float, list[int]] = {}
        for i, q in enumerate(self.quotes):
            groups.setdefault(q.expiry, []).append(i)
        return [
            (t, sorted(groups[t], key=lambda i: (self.quotes[i].strike, self.quotes[i].kind)))
            for t in sorted(groups)
        ]

    def select(self, indices: Iterable[int]) -> "QuoteSet":
        idx = list(indices)
        return QuoteSet(self.path, tuple(self.quotes[i] for i in idx), self.market, self.quoted, self.warnings)


class _Problems:
    """Every problem found in a file, listed together in one InputError."""

    def __init__(self, path: str) -> None:
        self.path = path
        self.items: list[str] = []

    def add(self, line: int | None, column: str | None, text: str) -> None:
        where = self.path + (f" line {line}" if line is not None else "")
        where += f", column {column!r}" if column else ""
        self.items.append(f"{where}: {text}")

    def raise_if_any(self) -> None:
        if not self.items:
            return
        shown = self.items[:_MAX_SHOWN]
        more = len(self.items) - len(shown)
        head = (
            f"{self.path} is refused ({len(self.items)} problem{'s' if len(self.items) != 1 else ''}; "
            "nothing was read):"
        )
        tail = [f"  ... and {more} more"] if more else []
        raise InputError("\n".join([head] + [f"  {s}" for s in shown] + tail))


def _cell_number(cell: str, line: int, column: str, problems: _Problems, *, low: float, low_open: bool,
                 high: float = math.inf, what: str) -> float | None:
    x = _number(cell)
    if x is None or not math.isfinite(x):
        problems.add(line, column, f"value {cell!r} is not a number; {what}")
        return None
    if (x <= low if low_open else x < low) or x > high:
        lo = "(" if low_open else "["
        hi = "inf)" if math.isinf(high) else f"{high:g}]"
        problems.add(line, column, f"value {cell!r} is outside {lo}{low:g}, {hi}; {what}")
        return None
    return x


def _fmt_num(x: float) -> str:
    return f"{x:g}"


def check_quote_file(path: str | Path) -> int:
    """Size the work before reading: the quote file must exist, be a file and hold at most
    :data:`MAX_QUOTE_FILE_BYTES`; returns its size in bytes.

    Raises
    ------
    InputError
        Missing file, a folder, or a file over the limit (the message gives its size, the
        number of quotes estimated from the length of its first lines, and the limit).
    """
    name = str(path)
    p = Path(path)
    if not p.exists():
        raise InputError(f"quote file {name!r} does not exist; check the path")
    if p.is_dir():
        raise InputError(f"quote file {name!r} is a folder; give a CSV file")
    size = p.stat().st_size
    if size > MAX_QUOTE_FILE_BYTES:
        with open(p, "rb") as fh:
            sample = fh.read(_SAMPLE_BYTES)
        lines = sample.count(b"\n")
        per_line = len(sample) / lines if lines else float(len(sample))
        estimate = int(size / max(per_line, 1.0))
        raise InputError(
            f"quote file {name!r} is {size / 1e6:,.1f} MB, about {estimate:,} lines of quotes (from its first "
            f"{len(sample):,} bytes); the limit is {MAX_QUOTE_FILE_BYTES / 2**20:g} MiB and {MAX_QUOTES:,} quotes "
            f"(limitcase.quotes.MAX_QUOTE_FILE_BYTES): is it the right file? Keep the quotes to calibrate to"
        )
    return size


def load_quotes(path: str | Path, market: Market) -> QuoteSet:
    """Read and validate a quote file (format in the module docstring).

    Parameters
    ----------
    path
        The CSV file.
    market
        Spot, rates, dividend yield and valuation date (:func:`resolve_market`).

    Returns
    -------
    QuoteSet
        Quotes in file order, every one with a price (and its implied volatility where one
        exists), and the no-arbitrage warnings.

    Raises
    ------
    InputError
        The file is missing, over :data:`MAX_QUOTE_FILE_BYTES` or :data:`MAX_QUOTES`, empty
        or has any bad header or cell; the message lists every problem with its line,
        column and value.
    """
    name = str(path)
    p = Path(path)
    check_quote_file(p)
    try:
        text = p.read_text(encoding="utf-8-sig")
    except FileNotFoundError as exc:
        raise InputError(f"quote file {name!r} does not exist; check the path") from exc
    except IsADirectoryError as exc:
        raise InputError(f"quote file {name!r} is a folder; give a CSV file") from exc
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"quote file {name!r} cannot be read as UTF-8 text: {exc}") from exc

    rows: list[tuple[int, list[str]]] = []
    for n, line in enumerate(text.splitlines(), start=1):
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        rows.append((n, [c.strip() for c in next(csv.reader([line]))]))
    example = "expiry,strike,type,price[,bid,ask][,weight]"
    if not rows:
        raise InputError(f"{name} is empty: expected a header line '{example}' and one line per quote")

    problems = _Problems(name)
    header_line, header = rows[0]
    columns = [h.lower() for h in header]
    seen: dict[str, int] = {}
    for j, c in enumerate(columns):
        if c not in QUOTE_COLUMNS:
            problems.add(header_line, c, f"unknown column {header[j]!r}; the columns are {', '.join(QUOTE_COLUMNS)}"
                         + (" (is the header line missing?)" if _number(header[j]) is not None else ""))
        elif c in seen:
            problems.add(header_line, c, f"column {c!r} appears twice (columns {seen[c] + 1} and {j + 1})")
        else:
            seen[c] = j
    for c in ("expiry", "strike", "type"):
        if c not in seen:
            problems.add(header_line, None, f"missing column {c!r}; the header needs at least '{example}'")
    if "price" in seen and "iv" in seen:
        problems.add(header_line, None, "both 'price' and 'iv' columns are given; keep one of the two")
    elif "price" not in seen and "iv" not in seen:
        problems.add(header_line, None, "missing column 'price' (or 'iv'); give one of the two")
    if ("bid" in seen) != ("ask" in seen):
        problems.add(header_line, None, f"column {'bid' if 'bid' in seen else 'ask'!r} without "
                                        f"{'ask' if 'bid' in seen else 'bid'!r}; give both or neither")
    problems.raise_if_any()
    if len(rows) == 1:
        raise InputError(f"{name} has a header (line {header_line}) but no quotes; add one line per quote")
    if len(rows) - 1 > MAX_QUOTES:
        raise InputError(f"{name} has {len(rows) - 1:,} quotes; the limit is {MAX_QUOTES:,} "
                         f"(limitcase.quotes.MAX_QUOTES): keep the quotes to calibrate to")

    quoted = "price" if "price" in seen else "iv"
    parsed: list[dict[str, Any]] = []
    for n, cells in rows[1:]:
        if len(cells) != len(columns):
            problems.add(n, None, f"{len(cells)} cells for {len(columns)} columns ({', '.join(columns)})")
            continue
        row = {c: cells[j] for c, j in seen.items()}
        out: dict[str, Any] = {"line": n}
        # expiry
        e = row["expiry"]
        if _ISO.match(e):
            if market.valuation_date is None:
                problems.add(n, "expiry", f"value {e!r} is a date but no valuation date is given; "
                                          "pass --valuation-date or 'valuation_date = ...' in the market file, "
                                          "or write the expiry as a year fraction")
            else:
                try:
                    d = date.fromisoformat(e)
                except ValueError:
                    problems.add(n, "expiry", f"value {e!r} is not a valid date (YYYY-MM-DD)")
                else:
                    days = (d - market.valuation_date).days
                    if days <= 0:
                        problems.add(n, "expiry", f"value {e!r} is not after the valuation date "
                                                  f"{market.valuation_date.isoformat()}; the option has expired")
                    else:
                        out["expiry"], out["expiry_text"] = days / DAYS_PER_YEAR, e
        else:
            t = _cell_number(e, n, "expiry", problems, low=0.0, low_open=True, high=MAX_EXPIRY,
                             what="an expiry is a year fraction > 0 (0.5) or an ISO date (2026-09-18)")
            if t is not None:
                out["expiry"], out["expiry_text"] = t, _fmt_num(t)
        k = _cell_number(row["strike"], n, "strike", problems, low=0.0, low_open=True,
                         what="a strike is a positive number such as 110")
        out["strike"] = k
        kind = row["type"].lower()
        if kind not in ("call", "put"):
            problems.add(n, "type", f"value {row['type']!r} is not an option type; write call or put")
        out["kind"] = kind
        if quoted == "price":
            out["quote"] = _cell_number(row["price"], n, "price", problems, low=0.0, low_open=True,
                                        what="an option price is a positive amount")
            unit = "a price >= 0"
        else:
            out["quote"] = _cell_number(row["iv"], n, "iv", problems, low=0.0, low_open=True, high=MAX_IV,
                                        what="an implied volatility is a decimal, 20% is 0.2")
            unit = "a volatility >= 0 (the same unit as 'iv')"
        bid = ask = None
        if "bid" in seen:
            b_text, a_text = row["bid"], row["ask"]
            if bool(b_text) != bool(a_text):
                missing = "bid" if not b_text else "ask"
                problems.add(n, missing, f"value '' while {'ask' if missing == 'bid' else 'bid'} is given; "
                                         "give both or leave both blank")
            elif b_text:
                bid = _cell_number(b_text, n, "bid", problems, low=0.0, low_open=False, what=f"a bid is {unit}")
                ask = _cell_number(a_text, n, "ask", problems, low=0.0, low_open=True, what=f"an ask is {unit} > 0")
                if bid is not None and ask is not None:
                    if bid > ask:
                        problems.add(n, "bid", f"value {b_text!r} is above the ask {a_text!r}; swap them")
                    elif out["quote"] is not None and not bid <= out["quote"] <= ask:
                        problems.add(n, quoted, f"value {row[quoted]!r} lies outside its bid-ask "
                                                f"[{b_text}, {a_text}]; the quote is the mid or mark")
        out["bid"], out["ask"] = bid, ask
        w = 1.0
        if "weight" in seen and row["weight"]:
            w = _cell_number(row["weight"], n, "weight", problems, low=0.0, low_open=False,
                             what="a weight is a number >= 0 (0 leaves the quote out of the fit)")
        out["weight"] = w
        parsed.append(out)

    firsts: dict[tuple[float, float, str], int] = {}
    for r in parsed:
        if r.get("expiry") is None or r["strike"] is None or r["kind"] not in ("call", "put"):
            continue
        key = (r["expiry"], r["strike"], r["kind"])
        if key in firsts:
            problems.add(r["line"], None, f"duplicate quote T={r['expiry_text']} K={_fmt_num(r['strike'])} "
                                          f"{r['kind']} (first at line {firsts[key]}); keep one")
        else:
            firsts[key] = r["line"]
    problems.raise_if_any()

    quotes = [_make_quote(r, quoted, market, name) for r in parsed]
    if not any(q.weight > 0 for q in quotes):
        raise InputError(f"{name}: every quote has weight 0; give at least one quote a positive weight")
    qs = QuoteSet(name, tuple(quotes), market, quoted)
    return QuoteSet(name, qs.quotes, market, quoted, tuple(arbitrage_warnings(qs)))


def _iv_or_none(price: float, q: Mapping[str, Any], market: Market) -> float | None:
    t, k = q["expiry"], q["strike"]
    try:
        return float(implied_vol(price, market.spot, k, t, market.rate(t), market.dividend(t), q["kind"]))
    except ParamError:
        return None


def _make_quote(r: dict[str, Any], quoted: str, market: Market, name: str) -> Quote:
    t, k, kind = r["expiry"], r["strike"], r["kind"]
    rt, qt = market.rate(t), market.dividend(t)

    def price_of(vol: float) -> float:
        return float(black_scholes(market.spot, k, t, rt, qt, vol, kind))

    if quoted == "price":
        price = r["quote"]
        iv = _iv_or_none(price, r, market)
        bid, ask = r["bid"], r["ask"]
        bid_iv = _iv_or_none(bid, r, market) if bid is not None else None
        ask_iv = _iv_or_none(ask, r, market) if ask is not None else None
    else:
        iv = r["quote"]
        price = price_of(iv)
        bid_iv, ask_iv = r["bid"], r["ask"]
        bid = price_of(bid_iv) if bid_iv is not None else None
        ask = price_of(ask_iv) if ask_iv is not None else None
    label = f"T={r['expiry_text']} K={_fmt_num(k)} {kind}"
    return Quote(line=r["line"], label=label, expiry=t, expiry_text=r["expiry_text"], strike=k, kind=kind,
                 price=price, iv=iv, bid=bid, ask=ask, bid_iv=bid_iv, ask_iv=ask_iv, weight=r["weight"])


# ----------------------------------------------------------------------------------------
# no-arbitrage warnings


def arbitrage_warnings(qs: QuoteSet, rtol: float = 1e-10) -> list[ArbitrageWarning]:
    """Model-free no-arbitrage conditions broken by the quotes (see the module docstring).

    ``rtol`` (relative to the spot) absorbs floating-point rounding only.

    References
    ----------
    .. [1] R. C. Merton, "Theory of Rational Option Pricing", Bell Journal of Economics and
       Management Science 4(1), 1973 (bounds, monotonicity and convexity in the strike).
    .. [2] P. Carr and D. B. Madan, "A note on sufficient conditions for no arbitrage",
       Finance Research Letters 2(3), 2005 (spreads, butterflies and calendar spreads).
    .. [3] J. Gatheral and A. Jacquier, "Arbitrage-free SVI volatility surfaces",
       Quantitative Finance 14(1), 2014 (no calendar arbitrage: total implied variance
       non-decreasing in expiry at fixed forward moneyness; recalled from memory).
    """
    m = qs.market
    tol = rtol * m.spot
    out: list[ArbitrageWarning] = []
    for q in qs.quotes:
        pf = m.spot * math.exp(-m.dividend(q.expiry) * q.expiry)
        kd = q.strike * m.discount(q.expiry)
        if q.kind == "call":
            hi, lo, hi_text, lo_text = pf, max(pf - kd, 0.0), "S e^-qT", "max(S e^-qT - K e^-rT, 0)"
        else:
            hi, lo, hi_text, lo_text = kd, max(kd - pf, 0.0), "K e^-rT", "max(K e^-rT - S e^-qT, 0)"
        if q.price > hi + tol:
            out.append(ArbitrageWarning("bound", (q.label,), f"{q.label} (line {q.line}): price {q.price:.6g} is above "
                                                             f"the upper bound {hi_text} = {hi:.6g}"))
        elif q.price < lo - tol:
            out.append(ArbitrageWarning("bound", (q.label,), f"{q.label} (line {q.line}): price {q.price:.6g} is below "
                                                             f"the lower bound {lo_text} = {lo:.6g}"))
    groups = qs.by_expiry()
    for t, idx in groups:
        kd1 = m.discount(t)
        for kind in ("call", "put"):
            qq = sorted((qs.quotes[i] for i in idx if qs.quotes[i].kind == kind), key=lambda q: q.strike)
            for a, b in zip(qq, qq[1:]):
                dk = b.strike - a.strike
                change = b.price - a.price  # calls: <= 0, puts: >= 0
                if kind == "call" and change > tol:
                    out.append(ArbitrageWarning("strike", (a.label, b.label),
                                                f"call prices increase with the strike: {a.label} at {a.price:.6g} "
                                                f"< {b.label} at {b.price:.6g}"))
                elif kind == "put" and change < -tol:
                    out.append(ArbitrageWarning("strike", (a.label, b.label),
                                                f"put prices decrease with the strike: {a.label} at {a.price:.6g} "
                                                f"> {b.label} at {b.price:.6g}"))
                elif abs(change) > dk * kd1 + tol:
                    out.append(ArbitrageWarning("strike", (a.label, b.label),
                                                f"the {kind} spread {a.label} / {b.label} is worth {abs(change):.6g}, more "
                                                f"than its largest payoff (K2 - K1) e^-rT = {dk * kd1:.6g}"))
            for a, b, c in zip(qq, qq[1:], qq[2:]):
                lam = (c.strike - b.strike) / (c.strike - a.strike)
                chord = lam * a.price + (1.0 - lam) * c.price
                if b.price > chord + tol:
                    out.append(ArbitrageWarning("strike", (a.label, b.label, c.label),
                                                f"{kind} prices are not convex in the strike: {b.label} at {b.price:.6g} "
                                                f"is above the chord {chord:.6g} of {a.label} and {c.label} "
                                                "(a butterfly with negative price)"))
    # calendar: total implied variance at the same forward moneyness
    points: list[tuple[float, np.ndarray, np.ndarray, list[Quote]]] = []
    for t, idx in groups:
        f = m.forward(t)
        qq = [qs.quotes[i] for i in idx if qs.quotes[i].iv is not None]
        if not qq:
            continue
        by_k: dict[float, list[Quote]] = {}
        for q in qq:
            by_k.setdefault(math.log(q.strike / f), []).append(q)
        ks = np.array(sorted(by_k))
        ws = np.array([np.mean([q.iv**2 * t for q in by_k[k]]) for k in ks])  # type: ignore[operator]
        points.append((t, ks, ws, [by_k[k][0] for k in ks]))
    for (t1, k1, w1, q1), (t2, k2, w2, q2) in zip(points, points[1:]):
        if k2.size < 2:
            continue
        for k, w, q in zip(k1, w1, q1):
            if not k2[0] <= k <= k2[-1]:
                continue
            w_later = float(np.interp(k, k2, w2))
            if w_later < w * (1.0 - 1e-9):
                j = int(np.clip(np.searchsorted(k2, k), 1, k2.size - 1))
                near = (q2[j - 1].label, q2[j].label) if k2[j] != k else (q2[j].label,)
                out.append(ArbitrageWarning(
                    "calendar", (q.label,) + near,
                    f"calendar arbitrage: total implied variance {w:.6g} of {q.label} (moneyness ln(K/F) = {k:.4f}) "
                    f"is above {w_later:.6g} at the later expiry T={q2[0].expiry_text} "
                    f"(interpolated between {' and '.join(near)})"))
    return out


def describe(qs: QuoteSet) -> dict[str, Any]:
    """A JSON-ready summary of a quote set."""
    return {
        "file": qs.path,
        "quotes": len(qs.quotes),
        "expiries": [float(t) for t in qs.expiries()],
        "quoted": qs.quoted,
        "market": qs.market.to_dict(),
        "warnings": [w.to_dict() for w in qs.warnings],
    }
