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

Size
----
A quote file over :data:`MAX_QUOTE_FILE_BYTES` (4 MiB) or with more than :data:`MAX_QUOTES`
(20,000) quotes is refused before it is parsed, with its size and an estimate of its quote
count (:func:`check_quote_file`).

Modules: :mod:`.market` (curves, market, limits), :mod:`.records` (quote, warning, set),
:mod:`.reading` (the quote file), :mod:`.arbitrage` (warnings, description).
"""

from __future__ import annotations

from .arbitrage import arbitrage_warnings, describe
from .market import (
    DAYS_PER_YEAR,
    MARKET_KEYS,
    MAX_EXPIRY,
    MAX_IV,
    MAX_QUOTE_FILE_BYTES,
    MAX_QUOTES,
    QUOTE_COLUMNS,
    Curve,
    Market,
    parse_curve,
    read_market_file,
    resolve_market,
)
from .reading import check_quote_file, load_quotes
from .records import ArbitrageWarning, Quote, QuoteSet

__all__ = [
    "Curve",
    "Market",
    "Quote",
    "QuoteSet",
    "ArbitrageWarning",
    "QUOTE_COLUMNS",
    "MARKET_KEYS",
    "DAYS_PER_YEAR",
    "MAX_EXPIRY",
    "MAX_IV",
    "MAX_QUOTE_FILE_BYTES",
    "MAX_QUOTES",
    "parse_curve",
    "read_market_file",
    "resolve_market",
    "load_quotes",
    "check_quote_file",
    "arbitrage_warnings",
    "describe",
]
