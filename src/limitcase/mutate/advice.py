"""What check would catch a survivor: advice from the parameters a mutant reads.

Part of :mod:`limitcase.mutate` (the package docstring describes the method).
"""

from __future__ import annotations

import math
from typing import Sequence

from scipy.stats import norm

from ..product import Product
from ..reduce import Check
from ..suite import DEFAULT_ALPHA
from ..verdict import POWER
from .equivalence import Equivalence, PointDifference
from .mutants import Mutant

__all__ = ["suggest", "suggest_hidden"]

# ----------------------------------------------------------------------------------------
# what check would catch a survivor


_BARRIER_WORDS = ("barrier", "knock", "level", "autocall", "protection")
_COUNT_WORDS = ("fixing", "monitoring", "exercise", "steps", "dates", "periods", "observations")


def _role(param: str) -> str:
    p = param.lower()
    if "rebate" in p:
        return "rebate"
    if any(w in p for w in _BARRIER_WORDS):
        return "barrier"
    if "strike" in p or "trigger" in p:
        return "strike"
    if any(w in p for w in _COUNT_WORDS):
        return "count"
    if "maturity" in p or "expiry" in p:
        return "maturity"
    return "other"


def _declared(cls: type[Product]) -> tuple[list[str], list[str]]:
    """Short descriptions of the declared reductions and relations."""
    reds = []
    for r in cls.reductions:
        moved = ", ".join(r.changes) if r.changes else "no parameter"
        reds.append(f"{r.name} ({moved})")
    rels = []
    for r in cls.relations:
        kind = type(r).__name__
        name = getattr(r, "name", "") or getattr(r, "param", "")
        rels.append(f"{name or kind} [{kind}]")
    return reds, rels


def _paths_needed(p: PointDifference, alpha: float, m: int) -> int | None:
    """Paths a two-sided check of the mutant against a trusted price at this point would
    need to see its mean shift with 90% power at the strictest Holm level over ``m``
    checks: ``n = ((z_{1-alpha/(2m)} + z_{0.9}) sd / |shift|)^2``, ``sd`` the standard
    deviation of the mutant's present value per path (the check's noise)."""
    if p.difference is None or p.price_sd is None or p.difference == 0:
        return None
    z = norm.isf(alpha / max(m, 1) / 2.0) + norm.isf(1.0 - POWER)
    return int(math.ceil((z * p.price_sd / abs(p.difference)) ** 2))


def suggest(mutant: Mutant, eq: Equivalence | None, checks: Sequence[Check] | None = None,
            alpha: float = DEFAULT_ALPHA) -> str:
    """What kind of check would catch a surviving mutant, from the mutation's nature and
    location and from where it changes the cash flows.

    The text has two parts: the evidence (at which parameter points of the checks the
    mutant pays differently, and by how much on average), and a recommendation keyed on
    the operator and the parameters the mutated expression reads (a barrier, a strike, a
    rebate, a count of dates).
    """
    mu = mutant.mutation
    cls = mutant.original
    involved = ", ".join(mu.params_involved) or "the payoff"
    reds, rels = _declared(cls)
    parts: list[str] = []

    if eq is not None:
        differ = [p for p in eq.points if p.differs]
        same = [p.point for p in eq.points if not p.differs]
        if eq.edge_only:
            n_random = max((p.random_paths for p in eq.points), default=0)
            parts.append(
                "It pays differently only on the deterministic edge paths (paths on or touching the levels "
                f"{involved} compares with), never on the {n_random:,} simulated paths of each check point: "
                "the difference needs a price exactly on a level (probability 0 under a continuous model) or "
                "an event too rare to move a price check."
            )
        elif differ:
            shown = []
            for p in differ[:3]:
                if p.difference is not None and p.stderr is not None:
                    rel = f", {abs(p.difference) / abs(p.reference_price):.2%} of the price" \
                        if p.reference_price else ""
                    shown.append(f"{p.point}: mean change {p.difference:+.4g} +/- {p.stderr:.2g}{rel}, "
                                 f"{p.random_violations} of {p.random_paths} paths differ")
                elif p.note:
                    shown.append(f"{p.point}: {p.note}")
                else:
                    shown.append(f"{p.point}: {p.edge_differences} of {p.edge_paths} edge paths differ")
            parts.append("It changes the cash flows at " + "; ".join(shown) + ".")
            if same:
                parts.append("It pays exactly the original at " + "; ".join(same[:4])
                             + (" ..." if len(same) > 4 else "")
                             + ": those checks cannot see it.")
            best = max((p for p in differ if p.difference is not None and p.stderr),
                       key=lambda p: abs(p.difference) / p.stderr, default=None)  # type: ignore[operator]
            if best is not None:
                need = _paths_needed(best, alpha, max(len(checks or ()), 1))
                if need is not None:
                    parts.append(f"A check of it against a trusted price at {best.point} would see the shift "
                                 f"with {POWER:.0%} power from about {max(need, 2):,} paths.")

    rec = _recommendation(mutant, eq)
    declared = f"Declared: reductions {', '.join(reds) or 'none'}; relations {', '.join(rels) or 'none'}."
    return " ".join(parts + [rec, declared])


_BARRIER_ADVICE = (
    "Add a path-by-path Identity in + out = vanilla with the matching knock-in (or knock-out), a pathwise "
    "Monotone in the barrier, and a reduction where the barrier is touched: the barrier at the spot "
    "(knocked today), or a closed form with the barrier near the spot (continuous monitoring: "
    "Reiner-Rubinstein)."
)


def _recommendation(mutant: Mutant, eq: Equivalence | None) -> str:
    """The kind of check that would catch a surviving mutant, from the operator, the
    function it is in and the roles of the parameters the mutated expression reads."""
    mu = mutant.mutation
    cls = mutant.original
    op = mu.operator
    roles = {_role(p) for p in mu.params_involved}
    counts = [p for p in cls.param_specs() if _role(p) == "count"]
    count = counts[0] if counts else None
    one_date = count is not None and any(
        count in r.changes and not callable(r.changes[count]) and r.changes[count] == 1 for r in cls.reductions
    )
    in_dates = mu.function.rsplit(".", 1)[-1] in ("dates", "exercise_dates")
    if eq is not None and eq.edge_only and op == "compare_strict":
        lvl = next((p for p in mu.params_involved if _role(p) in ("barrier", "strike")), None)
        where = f"{lvl} set to the spot" if lvl else "the compared level set to the spot"
        name = lvl or "LEVEL"
        return (
            f"To pin it, declare the tie convention among the relations: Tie({name!r}, 'above') or "
            f"Tie({name!r}, 'below'), the side a fixing exactly on {name} counts as (limitcase.ties: the "
            f"check tie_at_{name} prices the edge paths with fixings on the level). Or add a reduction under a zero-volatility model (model_changes vol=0 and dividend = rate, "
            f"so the price stays at the spot on every date) with {where}: the path then sits exactly on the "
            "level and the contract's strict or non-strict inequality decides the cash flow, against a bond or "
            "the intrinsic value. Or state in the docstring that equality is immaterial under continuous models."
        )
    if in_dates:
        moved = [p.point for p in (eq.points if eq is not None else ()) if "dates differ" in p.note]
        at = f" (they differ at {', '.join(moved[:3])})" if moved else ""
        return (
            f"The schedule is wrong{at}, but no check there depends on when the dates fall (both sides of the "
            "check vanish or ignore the dates). Add a check whose target depends on every date at those "
            "parameters: the product's closed form there, or a path-by-path Identity with a product built on "
            "the intended schedule."
        )
    if op == "strike_spot":
        return (
            "Strike and today's spot are confused: the checks that could see it price the product with the "
            "strike at the spot. Add a check against a trusted price with the strike away from the spot "
            "(own_closed_form with the strike moved, e.g. 10% out of the money), or a path-by-path parity "
            "Identity at such a strike."
        )
    if op == "at_maturity":
        if any(f"`{w}`" in mu.description for w in ("max", "min", "amax", "amin", "nanmax", "nanmin")):
            return (
                "The extreme over the dates is read at the last date only, and the checks cannot tell: a "
                "reduction to one date makes both the same, and bounds such as 'at least the at-the-money "
                "call' hold with equality. Add a path-by-path Identity with another product reading the same "
                "extreme (e.g. floating lookback call = fixed-strike lookback put at K = S0 + forward at S0), "
                f"or a trusted price at several dates{f' ({count} > 1)' if count else ''}."
            )
        return "The barrier is tested on the last date only. " + _BARRIER_ADVICE
    if "rebate" in roles or op == "rebate":
        return (
            "Add a check where the rebate is paid: a reduction with the barrier at the spot (knocked at once: "
            "the rebate alone, a bond paying R), or an Identity in + out = vanilla + R at T with rebates."
        )
    if "barrier" in roles:
        return "The barrier test is not exercised where it matters. " + _BARRIER_ADVICE
    if op == "discount":
        return (
            "Add a check whose target carries the discounting: the product's own closed form at a non-zero "
            "rate and maturity (own_closed_form), or a Bound against a discounted amount."
        )
    if op in ("fixing", "axis", "index_shift") or "count" in roles:
        if count is not None and not one_date:
            return (
                f"Which dates are read is not seen. Add a reduction to a single date ({count} = 1), where the "
                "one date is the only one, so a date left out or shifted changes every cash flow, against what "
                "the product becomes on one date (e.g. a knock-in monitored only at T is a gap option triggered "
                "at the barrier, path by path)."
            )
        return (
            "Which dates are read is not seen: a reduction to one date cannot tell fixings apart. Add a check "
            f"with several dates{f' ({count} > 1)' if count else ''} that depends on each of them: a closed form "
            "there (e.g. the geometric average: Kemna-Vorst), or a path-by-path Identity with a product on the "
            "same schedule (e.g. call - put = forward on the same average)."
        )
    if "strike" in roles or op in ("call_put", "sign", "max_min", "compare_side"):
        return (
            "Add a check at the default strike against a trusted price (own_closed_form), or a path-by-path "
            "parity Identity (call - put = forward) and a pathwise Monotone/Convex in the strike; reductions that "
            "move the strike to 0 or infinity make the strike term vanish."
        )
    if op == "compare_strict":
        return "Add a check where the compared quantities can be equal with positive probability."
    return ("Add a check at the default parameters against a trusted price (own_closed_form), or an Identity "
            "with a product that shares the mutated code's role.")


def suggest_hidden(mutant: Mutant, off: PointDifference) -> str:
    """For a mutant equivalent at every check point but not off them: where it differs, and
    which check would see it (the operator's recommendation)."""
    mu = mutant.mutation
    involved = ", ".join(mu.params_involved) or "the payoff"
    if off.random_violations:
        change = (f": mean change {off.difference:+.4g} +/- {off.stderr:.2g}, {off.random_violations} of "
                  f"{off.random_paths} simulated paths differ" if off.difference is not None else "")
    elif off.note:
        change = f": {off.note}"
    else:
        change = f": {off.edge_differences} of {off.edge_paths} edge paths differ (no simulated path)"
    return (f"Equivalent at every check point, but it pays differently at {off.point}{change}. The checks only "
            f"use points where this change to the code reading {involved} is invisible. "
            + _recommendation(mutant, None))
