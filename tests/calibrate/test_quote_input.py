"""Reading quote and market files: every malformed file is refused as a whole (exit 2) with
the file, the line, the column and the value named; valid files give the prices and year
fractions their definitions say; model-free no-arbitrage breaks are reported as warnings."""

from __future__ import annotations

import math
import time
from datetime import date

import numpy as np
import pytest
from click.testing import CliRunner

from limitcase.cli import main
from limitcase.errors import InputError
from limitcase.quotes import Curve, load_quotes, parse_curve, resolve_market
from limitcase.references import black_scholes

MARKET = ["--spot", "100", "--rate", "0.03", "--dividend", "0.01"]
GOOD = "expiry,strike,type,price\n0.5,100,call,6.5\n0.5,110,call,2.9\n"


def run(tmp_path, text, *extra, name="quotes.csv"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return CliRunner().invoke(main, ["reprice", str(path), *extra])


# ---------------------------------------------------------------------------------------
# malformed quote files: exit 2, the line, the column and the value named


BAD_FILES = [
    # (what, file text, fragments the message must contain)
    ("missing column", "expiry,type,price\n0.5,call,6.5\n",
     ["line 1", "missing column 'strike'"]),
    ("non-numeric strike", "expiry,strike,type,price\n0.5,100,call,6.5\n0.5,abc,call,2.9\n",
     ["line 3", "column 'strike'", "'abc'", "not a number"]),
    ("negative price", "expiry,strike,type,price\n0.5,100,call,-6.5\n",
     ["line 2", "column 'price'", "'-6.5'", "outside (0, inf)"]),
    ("unknown option type", "expiry,strike,type,price\n0.5,100,straddle,6.5\n",
     ["line 2", "column 'type'", "'straddle'", "call or put"]),
    ("empty file", "", ["is empty", "expiry,strike,type,price"]),
    ("only comments", "# nothing here\n\n", ["is empty"]),
    ("header without quotes", "expiry,strike,type,price\n", ["header (line 1) but no quotes"]),
    ("ISO date without valuation date", "expiry,strike,type,price\n2026-09-18,100,call,6.5\n",
     ["line 2", "column 'expiry'", "'2026-09-18'", "no valuation date"]),
    ("unknown column", "expiry,strike,type,price,volume\n0.5,100,call,6.5,10\n",
     ["line 1", "unknown column 'volume'"]),
    ("both price and iv", "expiry,strike,type,price,iv\n0.5,100,call,6.5,0.2\n", ["keep one of the two"]),
    ("neither price nor iv", "expiry,strike,type\n0.5,100,call\n", ["missing column 'price' (or 'iv')"]),
    ("wrong number of cells", "expiry,strike,type,price\n0.5,100,call\n", ["line 2", "3 cells for 4 columns"]),
    ("bid above ask", "expiry,strike,type,price,bid,ask\n0.5,100,call,6.5,6.9,6.1\n",
     ["line 2", "column 'bid'", "'6.9'", "above the ask"]),
    ("price outside its bid-ask", "expiry,strike,type,price,bid,ask\n0.5,100,call,7.5,6.1,6.9\n",
     ["line 2", "column 'price'", "'7.5'", "outside its bid-ask"]),
    ("bid without ask in a row", "expiry,strike,type,price,bid,ask\n0.5,100,call,6.5,6.1,\n",
     ["line 2", "column 'ask'", "give both"]),
    ("duplicate quote", "expiry,strike,type,price\n0.5,100,call,6.5\n0.5,100,call,6.6\n",
     ["line 3", "duplicate quote T=0.5 K=100 call", "first at line 2"]),
    ("zero expiry", "expiry,strike,type,price\n0,100,call,6.5\n", ["line 2", "column 'expiry'", "'0'"]),
    ("negative weight", "expiry,strike,type,price,weight\n0.5,100,call,6.5,-1\n",
     ["line 2", "column 'weight'", "'-1'"]),
    ("implied vol as a percentage", "expiry,strike,type,iv\n0.5,100,call,20\n",
     ["line 2", "column 'iv'", "'20'", "20% is 0.2"]),
]


@pytest.mark.parametrize("what,text,fragments", BAD_FILES, ids=[b[0] for b in BAD_FILES])
def test_malformed_quote_file_exits_2_naming_line_column_value(tmp_path, what, text, fragments):
    r = run(tmp_path, text, *MARKET, "--paths", "200")
    assert r.exit_code == 2, r.output
    assert "quotes.csv" in r.output
    for f in fragments:
        assert f in r.output, (f, r.output)
    assert "calibration" not in r.output  # refused before anything was computed


def test_every_problem_is_listed_and_nothing_is_half_read(tmp_path):
    text = ("# a comment line counts in the numbering\n"
            "expiry,strike,type,price\n"
            "0.5,100,call,6.5\n"
            "0.5,x,call,2.9\n"      # line 4
            "0.5,120,cal,1.1\n"     # line 5
            "1.0,100,put,6.0\n")
    path = tmp_path / "q.csv"
    path.write_text(text)
    market = resolve_market(spot=100, rate=0.03, dividend=0.0)
    with pytest.raises(InputError) as err:
        load_quotes(path, market)
    msg = str(err.value)
    assert "2 problems; nothing was read" in msg
    assert "line 4, column 'strike': value 'x'" in msg
    assert "line 5, column 'type': value 'cal'" in msg
    assert isinstance(err.value, ValueError)  # ours and the builtin


def test_missing_file_and_folder_are_bad_input(tmp_path):
    r = CliRunner().invoke(main, ["reprice", str(tmp_path / "nope.csv"), *MARKET])
    assert r.exit_code == 2 and "does not exist" in r.output
    r = CliRunner().invoke(main, ["reprice", str(tmp_path), *MARKET])
    assert r.exit_code == 2 and "is a folder" in r.output


# ---------------------------------------------------------------------------------------
# market: options and the key = value file


@pytest.mark.parametrize(
    "args,fragments",
    [
        (["--rate", "0.03", "--dividend", "0"], ["no spot given", "--spot"]),
        (["--spot", "100", "--dividend", "0"], ["no rate given"]),
        (["--spot", "100", "--rate", "0.03"], ["no dividend given", "--dividend 0"]),
        (["--spot", "-5", "--rate", "0.03", "--dividend", "0"], ["--spot", "'-5'", "> 0"]),
        (["--spot", "100", "--rate", "3", "--dividend", "0"], ["--rate", "3.0", "outside [-1, 1]", "0.03"]),
        (["--spot", "100", "--rate", "1:0.03 0.5:0.02", "--dividend", "0"], ["times must increase"]),
        (["--spot", "100", "--rate", "0.5-0.03", "--dividend", "0"], ["not a number"]),
        (["--spot", "100", "--rate", "0.03", "--dividend", "0", "--valuation-date", "2026/03/02"],
         ["valuation_date='2026/03/02'", "ISO date"]),
    ],
)
def test_bad_market_options_exit_2(tmp_path, args, fragments):
    r = run(tmp_path, GOOD, *args)
    assert r.exit_code == 2, r.output
    for f in fragments:
        assert f in r.output, (f, r.output)


def test_market_file_errors_name_the_line(tmp_path):
    (tmp_path / "quotes.market").write_text("spot = 100\nrate = 0.03\nvolatility = 0.2\n")
    r = run(tmp_path, GOOD)
    assert r.exit_code == 2
    assert "quotes.market line 3" in r.output and "unknown key 'volatility'" in r.output
    (tmp_path / "quotes.market").write_text("spot = 100\nspot = 101\n")
    r = run(tmp_path, GOOD)
    assert r.exit_code == 2 and "'spot' is given twice" in r.output
    r = run(tmp_path, GOOD, "--market", str(tmp_path / "other.market"))
    assert r.exit_code == 2 and "does not exist" in r.output


def test_market_file_beside_quotes_and_options_override_it(tmp_path):
    (tmp_path / "q.market").write_text(
        "# comment\nspot = 100\nrate = 0.5:0.02, 2:0.04   # a table\ndividend = 0.01\nvaluation_date = 2026-03-02\n"
    )
    m = resolve_market(market_file=tmp_path / "q.market")
    assert m.spot == 100.0 and m.valuation_date == date(2026, 3, 2)
    # linear between nodes, flat outside
    assert m.rate(0.1) == 0.02 and m.rate(5.0) == 0.04
    assert m.rate(1.25) == pytest.approx(0.03, abs=1e-15)
    m2 = resolve_market(market_file=tmp_path / "q.market", spot="105", rate="0.01")
    assert m2.spot == 105.0 and m2.rate.is_flat and m2.rate(3.0) == 0.01 and m2.dividend(1.0) == 0.01


def test_curve_parsing():
    assert parse_curve("0.03", "rate", "x") == Curve.flat(0.03)
    c = parse_curve("0.25:0.01;1:0.02", "rate", "x")
    assert c.times == (0.25, 1.0) and c.values == (0.01, 0.02)
    with pytest.raises(InputError, match="time 0.0 .* outside"):
        parse_curve("0:0.01 1:0.02", "rate", "x")


# ---------------------------------------------------------------------------------------
# valid files: what the columns mean


def test_iso_dates_are_act_365_and_prices_and_vols_round_trip(tmp_path):
    market = resolve_market(spot=100, rate="0.5:0.02 2:0.04", dividend=0.01, valuation_date="2026-03-02")
    # 2026-09-18 is 200 days after 2026-03-02 (calendar arithmetic), ACT/365: 200/365
    t = 200 / 365
    r = float(np.interp(t, [0.5, 2.0], [0.02, 0.04]))
    iv_text = "expiry,strike,type,iv,bid,ask\n2026-09-18,100,call,0.2,0.19,0.21\n2026-09-18,90,put,0.25,,\n"
    (tmp_path / "iv.csv").write_text(iv_text)
    qs = load_quotes(tmp_path / "iv.csv", market)
    q = qs.quotes[0]
    assert q.expiry == t and q.expiry_text == "2026-09-18" and q.label == "T=2026-09-18 K=100 call"
    # an implied vol is turned into a price by Black-Scholes with R(T) and Q(T); so are its bid and ask
    assert q.price == pytest.approx(black_scholes(100, 100, t, r, 0.01, 0.2, "call"), rel=1e-14)
    assert q.bid == pytest.approx(black_scholes(100, 100, t, r, 0.01, 0.19, "call"), rel=1e-14)
    assert q.iv == 0.2 and q.bid_iv == 0.19 and q.ask_iv == 0.21
    assert not qs.quotes[1].has_spread
    # the same quotes given as prices read back to the same implied volatilities
    p_text = "expiry,strike,type,price\n" + "".join(
        f"{x.expiry_text},{x.strike:g},{x.kind},{x.price!r}\n" for x in qs.quotes)
    (tmp_path / "p.csv").write_text(p_text)
    back = load_quotes(tmp_path / "p.csv", market)
    assert [x.iv for x in back.quotes] == pytest.approx([0.2, 0.25], abs=1e-10)


def test_weight_column_and_comments(tmp_path):
    text = "# header comment\nExpiry , Strike , TYPE , Price , Weight\n\n0.5,100,Call,6.5,2\n0.5,110,put,12,\n"
    (tmp_path / "w.csv").write_text(text)
    qs = load_quotes(tmp_path / "w.csv", resolve_market(spot=100, rate=0.03, dividend=0.0))
    assert [q.weight for q in qs.quotes] == [2.0, 1.0]
    assert [q.line for q in qs.quotes] == [4, 5]
    assert [q.kind for q in qs.quotes] == ["call", "put"]


# ---------------------------------------------------------------------------------------
# no-arbitrage warnings (model-free; Merton 1973, Carr and Madan 2005)


def _bs_file(tmp_path, rows, name="a.csv", spot=100.0, r=0.03, q=0.01):
    """Quotes priced by Black-Scholes (arbitrage-free by construction), then edited."""
    lines = ["expiry,strike,type,price"]
    for t, k, kind, vol, bump in rows:
        lines.append(f"{t},{k},{kind},{float(black_scholes(spot, k, t, r, q, vol, kind)) + bump!r}")
    path = tmp_path / name
    path.write_text("\n".join(lines) + "\n")
    return load_quotes(path, resolve_market(spot=spot, rate=r, dividend=q))


SMILE = [(0.5, 90, "call", 0.24, 0.0), (0.5, 100, "call", 0.21, 0.0), (0.5, 110, "call", 0.19, 0.0),
         (0.5, 90, "put", 0.24, 0.0), (0.5, 100, "put", 0.21, 0.0), (0.5, 110, "put", 0.19, 0.0),
         (1.0, 85, "put", 0.24, 0.0), (1.0, 100, "put", 0.22, 0.0), (1.0, 115, "call", 0.20, 0.0)]


def test_arbitrage_free_quotes_raise_no_warning(tmp_path):
    assert _bs_file(tmp_path, SMILE).warnings == ()


def _kinds(qs):
    return {(w.kind, w.labels) for w in qs.warnings}


def test_call_above_the_spot_bound(tmp_path):
    # S e^{-qT} = 100 e^{-0.005} = 99.50; a call at 99.6 is worth more than the asset
    rows = [(0.5, 1, "call", 0.2, 99.6 - (100 * math.exp(-0.005) - 1 * math.exp(-0.015)))]
    qs = _bs_file(tmp_path, rows)
    assert ("bound", ("T=0.5 K=1 call",)) in _kinds(qs)
    assert "above the upper bound S e^-qT" in qs.warnings[0].message


def test_call_prices_increasing_in_strike(tmp_path):
    rows = [(0.5, 100, "call", 0.2, 0.0), (0.5, 105, "call", 0.2, 4.0)]  # K=105 bumped above K=100
    qs = _bs_file(tmp_path, rows)
    assert ("strike", ("T=0.5 K=100 call", "T=0.5 K=105 call")) in _kinds(qs)
    assert any("call prices increase with the strike" in w.message for w in qs.warnings)


def test_put_prices_decreasing_in_strike(tmp_path):
    rows = [(0.5, 95, "put", 0.2, 3.0), (0.5, 100, "put", 0.2, 0.0)]  # K=95 bumped above K=100
    qs = _bs_file(tmp_path, rows)
    assert ("strike", ("T=0.5 K=95 put", "T=0.5 K=100 put")) in _kinds(qs)
    assert any("put prices decrease with the strike" in w.message for w in qs.warnings)


def test_butterfly_with_negative_price(tmp_path):
    rows = [(0.5, 95, "call", 0.2, 0.0), (0.5, 100, "call", 0.2, 0.8), (0.5, 105, "call", 0.2, 0.0)]
    qs = _bs_file(tmp_path, rows)
    assert ("strike", ("T=0.5 K=95 call", "T=0.5 K=100 call", "T=0.5 K=105 call")) in _kinds(qs)


def test_calendar_arbitrage_in_total_implied_variance(tmp_path):
    # same forward moneyness: at T=0.5 w = 0.3^2 * 0.5 = 0.045 > at T=1 w = 0.2^2 * 1 = 0.04
    spot, r, q = 100.0, 0.03, 0.01
    f1, f2 = spot * math.exp((r - q) * 0.5), spot * math.exp((r - q) * 1.0)
    text = ("expiry,strike,type,iv\n"
            f"0.5,{f1!r},call,0.3\n"
            f"1,{f2 * math.exp(-0.1)!r},put,0.2\n"
            f"1,{f2 * math.exp(0.1)!r},call,0.2\n")
    (tmp_path / "cal.csv").write_text(text)
    qs = load_quotes(tmp_path / "cal.csv", resolve_market(spot=spot, rate=r, dividend=q))
    cal = [w for w in qs.warnings if w.kind == "calendar"]
    assert len(cal) == 1
    assert cal[0].labels[0].startswith("T=0.5 K=") and len(cal[0].labels) == 3
    assert "total implied variance 0.045" in cal[0].message and "0.04 at the later expiry T=1" in cal[0].message
    # and with the later vol high enough (w = 0.22^2 = 0.0484 > 0.045) there is none
    (tmp_path / "ok.csv").write_text(text.replace(",0.2\n", ",0.22\n"))
    assert not load_quotes(tmp_path / "ok.csv", resolve_market(spot=spot, rate=r, dividend=q)).warnings


def test_warnings_are_shown_by_the_command_and_do_not_stop_it(tmp_path):
    rows = [(0.5, 100, "call", 0.2, 0.0), (0.5, 105, "call", 0.2, 4.0), (0.5, 110, "call", 0.2, 0.0)]
    lines = ["expiry,strike,type,price"] + [
        f"{t},{k},{kind},{float(black_scholes(100, k, t, 0.03, 0.01, v, kind)) + b!r}" for t, k, kind, v, b in rows]
    r = run(tmp_path, "\n".join(lines) + "\n", *MARKET, "--model", "black-scholes", "--paths", "4096")
    assert r.exit_code in (0, 1), r.output
    assert "warning: call prices increase with the strike: T=0.5 K=100 call" in r.output
    assert "Black-Scholes calibration" in r.output


def test_missing_quote_file_without_market_names_the_file_not_the_spot(tmp_path):
    # before: with no market options and no .market file beside it, a missing quote file
    # was reported as "no spot given"
    missing = tmp_path / "nope.csv"
    r = CliRunner().invoke(main, ["reprice", str(missing)])
    assert r.exit_code == 2
    assert "nope.csv" in r.output and "does not exist" in r.output
    assert "no spot" not in r.output and "Traceback" not in r.output


def test_oversized_quote_file_is_refused_at_once_with_an_estimate(tmp_path):
    # a 100 MB quote file used to take minutes and 5 GB before any message; the size is now
    # checked before reading. The file is sparse past its first lines (quick to make): the
    # estimate comes from the length of those lines.
    from limitcase.quotes import MAX_QUOTE_FILE_BYTES, check_quote_file

    big = tmp_path / "big.csv"
    head = GOOD + "".join(f"0.5,{100 + i},call,{6.5 - i * 0.01:.2f}\n" for i in range(5000))
    assert len(head) > 1 << 16
    with open(big, "wb") as fh:
        fh.write(head.encode())
        fh.truncate(100_000_000)
    start = time.perf_counter()
    with pytest.raises(InputError) as err:
        check_quote_file(big)
    assert time.perf_counter() - start < 1.0
    msg = str(err.value)
    assert "big.csv" in msg and "100.0 MB" in msg and "MiB" in msg
    n = int(msg.split("about ")[1].split(" lines")[0].replace(",", ""))
    per_line = (1 << 16) / head.encode()[: 1 << 16].count(b"\n")
    assert abs(n - 100_000_000 / per_line) <= 1
    r = CliRunner().invoke(main, ["reprice", str(big), *MARKET])
    assert r.exit_code == 2 and "big.csv" in r.output and "Traceback" not in r.output
    # at the limit the file is read
    ok = tmp_path / "ok.csv"
    ok.write_text(GOOD, encoding="utf-8")
    assert check_quote_file(ok) == len(GOOD) <= MAX_QUOTE_FILE_BYTES


def test_too_many_quotes_are_refused(tmp_path, monkeypatch):
    from limitcase.quotes import reading as quotes_module

    monkeypatch.setattr(quotes_module, "MAX_QUOTES", 1)
    r = run(tmp_path, GOOD, *MARKET)
    assert r.exit_code == 2 and "2 quotes" in r.output and "MAX_QUOTES" in r.output
