"""Reading and validating a quote file (format in :mod:`limitcase.quotes`): its size checked
before it is read, every bad cell listed with its line, column and value."""

from __future__ import annotations

import csv
import math
from datetime import date
from pathlib import Path
from typing import Any, Mapping

from ..errors import InputError, ParamError
from ..references import black_scholes, implied_vol
from .arbitrage import arbitrage_warnings
from .market import (
    _ISO,
    _MAX_SHOWN,
    _SAMPLE_BYTES,
    DAYS_PER_YEAR,
    MAX_EXPIRY,
    MAX_IV,
    MAX_QUOTE_FILE_BYTES,
    MAX_QUOTES,
    QUOTE_COLUMNS,
    Market,
    _number,
)
from .records import Quote, QuoteSet

__all__ = [
    "check_quote_file",
    "load_quotes",
]


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
