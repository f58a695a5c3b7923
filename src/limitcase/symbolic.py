"""The sympy side of a product: its payoff stated as a formula, checked against its code.

A product may state its payoff (the amount paid at the last date) as a sympy expression
through the ``Product.formula()`` hook. Conventions (see :func:`formula_symbols`):

* ``S_1, ..., S_n`` are the prices at the product's dates ``dates()[0], ..., dates()[n-1]``
  (positive symbols) and ``S_0`` the price today (``obs.s0``); for a product with
  ``multi_asset = True``, ``S<a>_<j>`` is asset ``a`` (1-based) at date ``j`` and
  ``S<a>_0`` today;
* the formula states the amount paid, before discounting: for a payoff paid at the last
  date that is the payoff; for one paying at several dates (an array per date, or
  ``Cashflows``), the sum of its amounts, the timing being left out of the comparison;
* a declared parameter appears either as its value or as a symbol named after it
  (``Symbol("strike")``, any assumptions); the value is substituted by name, ``inf`` as
  sympy's ``oo``;
* nothing else: a free symbol that is neither a price nor a parameter is an error.

What is done with a formula:

:func:`cross_check`
    The numpy payoff and the lambdified formula are evaluated on the same paths, simulated
    from the product's scenario, and on edge paths built from the formula itself: for every
    kink (an argument of ``Max``/``Min``/``Abs``/``Heaviside``, a comparison in a
    ``Piecewise`` condition) and every price it is linear in, a path is moved so that the
    kink is hit exactly (a price equal to the barrier at one date, an average exactly at the
    strike), plus flat paths at every positive parameter value. They must agree on every
    path to floating-point tolerance; a ``<`` written ``<=`` in the code shows up on the
    edge paths, which random paths almost never hit.
:func:`recognise`
    For a reduction, the formula of the product at the limit and the base product's formula
    are put on one footing (each price symbol renamed after its date) and their difference
    is reduced: cheap rewritings first (``piecewise_fold``, ``expand``), then
    ``sympy.simplify`` unless the difference holds more than :data:`SIMPLIFY_MOST_CONDITIONS`
    comparisons (a knock-in touched today on 52 monitoring dates: simplify spends about a
    minute on the 53 comparisons and leaves them as they are). Zero means the base case is
    recognised exactly; otherwise a numerical probe looks for a point where they differ.

Text from a file is never parsed by sympy here: formulas are Python objects built by the
product's own code.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import sympy as sp
from sympy.printing.latex import LatexPrinter

from .errors import LimitcaseError, PayoffError
from .models.base import Model
from .product import Cashflows, Observed, Product
from .reduce import Reduction, limit_product

__all__ = [
    "FormulaSymbols",
    "formula_symbols",
    "price_symbols",
    "spot_symbols",
    "substituted",
    "FormulaCheck",
    "cross_check",
    "Recognition",
    "recognise",
    "compact_instance",
    "to_latex",
    "to_text",
]

RTOL = 1e-9
ATOL = 1e-9
MOST_SOLVED = 24
"""Kinks not linear in a price whose roots are asked of ``sympy.solve`` (it can be slow)."""
SIMPLIFY_MOST_CONDITIONS = 8
"""A difference with more comparisons (``<``, ``>=``, ...) than this is not given to
``sympy.simplify`` when the cheap rewritings leave it non-zero: simplify's cost grows
steeply with the comparisons of a ``Piecewise`` condition (about 50 CPU seconds for the 53
of a discretely monitored knock-in touched today) while what it returns there is the
folded ``Piecewise`` the cheap route already has. Eight is ``sympy.simplify_logic``'s own
limit of variables for a full simplification of a condition."""


class FormulaSymbols:
    """The symbols a product's formula is written in.

    Attributes
    ----------
    S : tuple of sympy.Symbol
        ``S_1..S_n``, the prices at the product's dates (single asset); for a multi-asset
        product a tuple of rows, ``S[j-1][a-1]`` being ``S<a>_<j>``.
    S_T : sympy.Symbol or tuple
        The last row of ``S`` (the price(s) at the last date).
    S_0 : sympy.Symbol or tuple
        The price(s) today.
    params : dict of str to sympy.Symbol
        One real symbol per declared parameter, named after it; also reachable as
        attributes (``x.strike``).
    """

    def __init__(self, product: Product) -> None:
        self.S = price_symbols(product)
        self.S_T = self.S[-1]
        self.S_0 = spot_symbols(product)
        self.params = {name: sp.Symbol(name, real=True) for name in type(product).param_specs()}

    def __getattr__(self, name: str) -> Any:
        params = self.__dict__.get("params", {})
        if name in params:
            return params[name]
        raise AttributeError(name)


def formula_symbols(product: Product) -> FormulaSymbols:
    """The price and parameter symbols for writing ``product.formula()``."""
    return FormulaSymbols(product)


def price_symbols(product: Product) -> tuple[Any, ...]:
    """``(S_1, ..., S_n)`` for the product's ``n`` dates (rows of ``S<a>_<j>`` if multi-asset)."""
    n = len(product.validated_dates())
    if product.multi_asset:
        m = int(product.n_assets)
        return tuple(tuple(sp.Symbol(f"S{a}_{j}", positive=True) for a in range(1, m + 1)) for j in range(1, n + 1))
    return tuple(sp.Symbol(f"S_{j}", positive=True) for j in range(1, n + 1))


def spot_symbols(product: Product) -> Any:
    """``S_0`` (single asset) or ``(S1_0, ..., Sm_0)``: the price(s) today."""
    if product.multi_asset:
        return tuple(sp.Symbol(f"S{a}_0", positive=True) for a in range(1, int(product.n_assets) + 1))
    return sp.Symbol("S_0", positive=True)


def _flat_prices(product: Product) -> list[sp.Symbol]:
    s = price_symbols(product)
    if product.multi_asset:
        return [x for row in s for x in row]
    return list(s)


def _flat_spots(product: Product) -> list[sp.Symbol]:
    s0 = spot_symbols(product)
    return list(s0) if product.multi_asset else [s0]


def _sympy_number(v: Any) -> sp.Expr:
    if isinstance(v, (bool, np.bool_)):
        return sp.Integer(int(v))
    v = float(v) if not isinstance(v, (int, np.integer)) else int(v)
    if isinstance(v, int):
        return sp.Integer(v)
    if math.isinf(v):
        return sp.oo if v > 0 else -sp.oo
    if v.is_integer():
        return sp.Integer(int(v))
    return sp.Float(v)


def _formula(product: Product) -> sp.Expr | None:
    name = type(product).__name__
    try:
        expr = product.formula()
    except Exception as exc:
        raise PayoffError(f"{name}.formula() raised {type(exc).__name__}: {exc}") from exc
    if expr is None:
        return None
    if not isinstance(expr, sp.Basic):
        raise PayoffError(
            f"{name}.formula() returned {type(expr).__name__}; expected a sympy expression or None"
        )
    return expr


def substituted(product: Product, expr: sp.Basic | None = None) -> sp.Expr:
    """The product's formula with every parameter symbol replaced by its value.

    Raises
    ------
    PayoffError
        When the formula has a free symbol that is neither a price nor a parameter.
    """
    expr = _formula(product) if expr is None else expr
    if expr is None:
        raise PayoffError(f"{type(product).__name__} states no formula")
    values = product.params()
    prices = {s.name for s in _flat_prices(product) + _flat_spots(product)}
    subs = {}
    for sym in expr.free_symbols:
        if sym.name in values:
            subs[sym] = _sympy_number(values[sym.name])
        elif sym.name not in prices:
            raise PayoffError(
                f"{type(product).__name__}.formula() uses the symbol {sym.name!r}, which is neither a "
                f"price (S_0..S_{len(product.validated_dates())}) nor a parameter ({', '.join(values) or 'none'}); "
                "use limitcase.symbolic.formula_symbols(self)"
            )
    return expr.xreplace(subs) if subs else expr


# ----------------------------------------------------------------------------------------
# cross-check on generated and edge paths


@dataclass(frozen=True)
class FormulaCheck:
    """The numpy payoff against the lambdified formula, path by path.

    ``status`` is ``"agree"``, ``"disagree"``, ``"none"`` (no formula), ``"not comparable"``
    (the payoff does not pay one amount at the last date) or ``"error"``.
    """

    product: str
    status: str
    paths: int = 0
    edge_paths: int = 0
    mismatches: int = 0
    edge_mismatches: int = 0
    worst: float = 0.0
    worst_kind: str = ""
    worst_prices: tuple[float, ...] = ()
    payoff_value: float | None = None
    formula_value: float | None = None
    message: str = ""

    @property
    def ok(self) -> bool:
        return self.status in ("agree", "none", "not comparable")


def _kinks(expr: sp.Basic) -> list[sp.Expr]:
    """Expressions whose zero set is a kink of ``expr``."""
    out: list[sp.Expr] = []
    seen: set[sp.Basic] = set()
    for node in sp.preorder_traversal(expr):
        cand: list[sp.Expr] = []
        if isinstance(node, (sp.Max, sp.Min)):
            args = list(node.args)
            cand = [args[i] - args[j] for i in range(len(args)) for j in range(i + 1, len(args))]
        elif isinstance(node, sp.core.relational.Relational) and not isinstance(node, (sp.Eq, sp.Ne)):
            cand = [node.lhs - node.rhs]
        elif isinstance(node, (sp.Heaviside, sp.Abs, sp.sign)):
            cand = [node.args[0]]
        for g in cand:
            if g.free_symbols and g not in seen:
                seen.add(g)
                out.append(g)
    return out


def _observe(product: Product, s: np.ndarray, model: Model, step_var: np.ndarray, rng: np.random.Generator) -> Observed:
    t = product.validated_dates()
    view = s.view()
    view.flags.writeable = False
    s0 = model.initial() if product.multi_asset else float(model.initial()[0])
    dividend = model.dividend_yields() if product.multi_asset else float(model.dividend_yields()[0])
    u = rng.random(s.shape)
    u.flags.writeable = False
    return Observed(t, view, s0, model.short_rate, lambda: step_var, dividend, lambda: u)


def _edge_paths(
    product: Product, expr: sp.Expr, symbols: list[sp.Symbol], base: np.ndarray, per_kink: int, most: int
) -> tuple[np.ndarray, list[str]]:
    """Paths (rows of ``base`` moved) on which a kink of ``expr`` is hit exactly."""
    rows: list[np.ndarray] = []
    kinds: list[str] = []
    flat = base.reshape(base.shape[0], -1)
    seeds = flat[:per_kink]
    index = {s: i for i, s in enumerate(symbols)}
    roots = []  # (kink g, price x, an expression of the other prices putting x on the kink)
    solved = 0
    for g in _kinks(expr):
        for x in sorted(g.free_symbols & set(symbols), key=lambda s: index[s]):
            d = sp.diff(g, x)
            if x not in d.free_symbols:
                roots.append((g, x, x - g / d))  # linear in x: one Newton step is exact
            elif solved < MOST_SOLVED:
                solved += 1  # not linear (a geometric average): ask sympy for the roots
                try:
                    found = sp.solve(g, x)
                except (NotImplementedError, ValueError, TypeError):
                    found = []
                roots.extend((g, x, r) for r in found if x not in r.free_symbols)
        if len(roots) * seeds.shape[0] >= most:
            break
    if roots:
        # one lambdify for every kink: generating code per kink costs far more
        f = sp.lambdify(symbols, [r for _, _, r in roots], modules="numpy")
        cols = [seeds[:, i] for i in range(seeds.shape[1])]
        with np.errstate(all="ignore"):
            values = [np.broadcast_to(np.asarray(v, dtype=complex), (seeds.shape[0],)) for v in f(*cols)]
        for (g, x, _), root in zip(roots, values):
            for r, row in zip(root, seeds):
                if abs(r.imag) <= 1e-12 * (1.0 + abs(r.real)) and math.isfinite(r.real) and r.real > 0.0:
                    moved = row.copy()
                    moved[index[x]] = r.real
                    rows.append(moved)
                    kinds.append(f"{x} at the kink {sp.sstr(g)} = 0")
    levels = sorted({float(v) for v in product.params().values() if isinstance(v, (int, float))
                     and math.isfinite(float(v)) and float(v) > 0.0})
    for c in levels:
        rows.append(np.full(flat.shape[1], c))
        kinds.append(f"every price equal to {c:g}")
    if not rows:
        return np.empty((0,) + base.shape[1:]), []
    return np.asarray(rows).reshape((-1,) + base.shape[1:]), kinds


def cross_check(
    product: Product,
    model: Model | None = None,
    *,
    paths: int = 2000,
    seed: int = 20261201,
    per_kink: int = 3,
    most_edges: int = 4000,
) -> FormulaCheck:
    """Compare ``product.payoff`` with its lambdified ``formula()`` on generated and edge paths.

    Parameters
    ----------
    product
        A product whose ``formula()`` is a sympy expression (else status ``"none"``).
    model
        The model paths are simulated from (default: the product's scenario).
    paths
        Generated paths.
    seed
        Seed of the generated paths (and of the uniforms a payoff may read).
    per_kink
        Generated paths moved onto each kink, per price the kink is linear in.
    most_edges
        Cap on the number of edge paths.

    Notes
    -----
    Agreement is to floating-point tolerance: ``|a - b| <= 1e-9 + 1e-9 max(|a|, |b|)``,
    the tolerance of the engine's path-by-path identities.
    """
    name = type(product).__name__
    try:
        raw = _formula(product)
        if raw is None:
            return FormulaCheck(name, "none", message=f"{name} states no formula")
        expr = substituted(product, raw)
        model = product.scenario() if model is None else model
        spots = dict(zip(_flat_spots(product), (float(x) for x in np.asarray(model.initial()).reshape(-1))))
        expr = expr.xreplace({k: _sympy_number(v) for k, v in spots.items() if k in expr.free_symbols})
        symbols = _flat_prices(product)
        t = product.validated_dates()
        rng = np.random.default_rng(np.random.SeedSequence(seed))
        z = rng.standard_normal((paths, len(t), model.normals_per_step()))
        sim = model.simulate(t, z, rng)
        s = sim.s if product.multi_asset else sim.s[:, :, 0]
        step_var = np.broadcast_to(sim.step_var, sim.s.shape)
        step_var = step_var if product.multi_asset else step_var[:, :, 0]
        edges, kinds = _edge_paths(product, expr, symbols, s, per_kink, most_edges)
        allpaths = np.concatenate([s, edges], axis=0) if len(edges) else s
        sv = np.broadcast_to(step_var[:1], allpaths.shape).copy()
        labels = ["generated"] * s.shape[0] + kinds
        obs = _observe(product, np.ascontiguousarray(allpaths), model, sv, rng)
        try:
            got = product.payoff(obs)
        except Exception as exc:
            raise PayoffError(f"{name}.payoff raised {type(exc).__name__}: {exc}") from exc
        timing = ""
        if isinstance(got, Cashflows):
            got, timing = np.asarray(got.amount, dtype=float), " (amounts summed; payment times not compared)"
        got = np.asarray(got, dtype=float)
        n_all = allpaths.shape[0]
        if got.ndim == 2 and got.shape[0] == n_all:
            got, timing = got.sum(axis=1), timing or " (amounts summed; payment times not compared)"
        if got.shape != (n_all,):
            return FormulaCheck(
                name, "not comparable", paths=paths, edge_paths=len(kinds),
                message=f"{name}.payoff returned shape {got.shape}; expected one amount per path "
                "(or per path and date)",
            )
        f = sp.lambdify(symbols, expr, modules="numpy")
        flat = allpaths.reshape(allpaths.shape[0], -1)
        with np.errstate(all="ignore"):
            want = np.broadcast_to(np.asarray(f(*[flat[:, i] for i in range(flat.shape[1])]), dtype=float),
                                   got.shape)
    except LimitcaseError as exc:
        return FormulaCheck(name, "error", message=str(exc))
    except Exception as exc:  # sympy could not handle the formula
        return FormulaCheck(name, "error", message=f"the formula could not be evaluated: {type(exc).__name__}: {exc}")
    diff = np.abs(got - want)
    tol = ATOL + RTOL * np.maximum(np.abs(got), np.abs(want))
    bad = ~(diff <= tol)  # NaN counts as a mismatch
    n_gen = s.shape[0]
    mism, edge_mism = int(bad[:n_gen].sum()), int(bad[n_gen:].sum())
    score = np.where(np.isnan(diff), np.inf, diff - tol)
    j = int(np.argmax(score))
    status = "agree" if not bad.any() else "disagree"
    worst = float(diff[j]) if math.isfinite(diff[j]) else math.inf
    message = (
        f"payoff and formula agree on {n_gen} generated and {len(kinds)} edge paths{timing}"
        if status == "agree"
        else f"payoff and formula differ on {mism} of {n_gen} generated and {edge_mism} of {len(kinds)} edge paths; "
        f"worst: payoff {got[j]:.10g}, formula {want[j]:.10g} on a path with {labels[j]}"
    )
    return FormulaCheck(
        name, status, paths=n_gen, edge_paths=len(kinds), mismatches=mism, edge_mismatches=edge_mism,
        worst=worst, worst_kind=labels[j], worst_prices=tuple(float(x) for x in flat[j]),
        payoff_value=float(got[j]), formula_value=float(want[j]), message=message,
    )


# ----------------------------------------------------------------------------------------
# recognising the base case


@dataclass(frozen=True)
class Recognition:
    """Whether the formula at a limit is the base product's formula.

    ``status``: ``"equal"`` (the difference reduces to 0, see :func:`recognise`),
    ``"differs"`` (a point was found where they differ), ``"undecided"`` (the reduction left a
    non-zero expression but no point was found where it is non-zero), ``"n/a"`` (a formula
    is missing) or ``"error"``.
    """

    product: str
    case: str
    status: str
    limit_formula: sp.Expr | None = None
    base_formula: sp.Expr | None = None
    difference: sp.Expr | None = None
    base: str = ""
    message: str = ""


def _timed(product: Product, expr: sp.Expr) -> sp.Expr:
    """Rename each price symbol after its date, so two products' formulas compare."""
    t = product.validated_dates()
    s = price_symbols(product)
    subs = {}
    for j, tj in enumerate(t):
        row = s[j] if product.multi_asset else (s[j],)
        for a, sym in enumerate(row):
            tag = f"{a + 1}," if product.multi_asset else ""
            subs[sym] = sp.Symbol(f"S({tag}t={tj:.12g})", positive=True)
    return expr.xreplace(subs)


def _reduced(diff: sp.Expr) -> tuple[sp.Expr, str]:
    """``diff`` reduced, and how: 0 as soon as a cheap rewriting gives 0 (the difference as
    built, ``piecewise_fold``, ``expand``); otherwise ``sympy.simplify``'s result, unless the
    difference holds more than :data:`SIMPLIFY_MOST_CONDITIONS` comparisons: then the folded
    difference (what simplify returns there, at a small fraction of its cost)."""
    if diff == 0:
        return diff, "the subtraction"
    folded = sp.piecewise_fold(diff) if diff.has(sp.Piecewise) else diff
    if folded == 0:
        return folded, "sympy.piecewise_fold"
    try:
        if sp.expand(folded) == 0:
            return sp.Integer(0), "sympy.expand"
    except Exception:  # expand cannot handle every construct: simplify decides
        pass
    conditions = len(folded.atoms(sp.core.relational.Relational))
    if conditions > SIMPLIFY_MOST_CONDITIONS:
        return folded, (f"sympy.piecewise_fold (sympy.simplify not tried: {conditions} comparisons, above "
                        f"{SIMPLIFY_MOST_CONDITIONS})")
    return sp.simplify(diff), "sympy.simplify"


def recognise(product: Product, reduction: Reduction, *, probes: int = 256, seed: int = 7) -> Recognition:
    """Substitute the reduction's limit into the product's formula and compare it with the
    formula of the product it becomes: their difference reduced to 0 (cheap rewritings
    first, then ``sympy.simplify`` where it is affordable, :func:`_reduced`) is ``"equal"``;
    a non-zero remainder is probed at random points for a difference."""
    name = type(product).__name__
    try:
        at_limit = limit_product(product, reduction)
        base = reduction.becomes(at_limit)
        fl_raw, fb_raw = _formula(at_limit), _formula(base)
        if fl_raw is None or fb_raw is None:
            missing = [type(p).__name__ for p, f in ((at_limit, fl_raw), (base, fb_raw)) if f is None]
            return Recognition(name, reduction.name, "n/a", base=base.label(),
                               message=f"no formula stated by {' and '.join(sorted(set(missing)))}")
        fl = substituted(at_limit, fl_raw)
        fb = substituted(base, fb_raw)
        dl, db = _timed(at_limit, fl), _timed(base, fb)
        diff, route = _reduced(dl - db)
    except LimitcaseError as exc:
        return Recognition(name, reduction.name, "error", message=str(exc))
    except Exception as exc:
        return Recognition(name, reduction.name, "error", message=f"{type(exc).__name__}: {exc}")
    if diff == 0:
        return Recognition(name, reduction.name, "equal", fl, fb, diff, base.label(),
                           f"the formula at the limit simplifies to {base.label()}'s")
    symbols = sorted(diff.free_symbols, key=lambda s: s.name)
    rng = np.random.default_rng(seed)
    scale = max([abs(float(v)) for v in product.params().values() if isinstance(v, (int, float))
                 and math.isfinite(float(v)) and float(v) > 0] or [1.0])
    try:
        f = sp.lambdify(symbols, diff, modules="numpy")
        pts = scale * np.exp(rng.normal(0.0, 0.5, size=(probes, len(symbols))))
        with np.errstate(all="ignore"):
            vals = np.broadcast_to(np.asarray(f(*pts.T), dtype=float), (probes,))
    except Exception:
        vals = np.zeros(0)
    big = np.flatnonzero(np.abs(vals) > ATOL * (1.0 + scale))
    if big.size:
        k = int(big[0])
        where = ", ".join(f"{s}={x:.6g}" for s, x in zip(symbols, pts[k]))
        return Recognition(name, reduction.name, "differs", fl, fb, diff, base.label(),
                           f"the formula at the limit differs from {base.label()}'s, e.g. by {vals[k]:.6g} at {where}")
    return Recognition(name, reduction.name, "undecided", fl, fb, diff, base.label(),
                       f"{route} left {sp.sstr(diff)[:200]}, which vanished at {probes} probe points")


# ----------------------------------------------------------------------------------------
# display


def compact_instance(product: Product, most_dates: int = 6, small: int = 3) -> tuple[Product, str]:
    """A copy with few dates for display: each count parameter above ``small`` is lowered to
    ``small`` if that reduces the number of dates, when the product has more than
    ``most_dates`` dates. Returns the copy and a note saying what was changed ('' if none)."""
    n = len(product.validated_dates())
    if n <= most_dates:
        return product, ""
    changes: dict[str, int] = {}
    shown = product
    for pname, spec in type(product).param_specs().items():
        v = product.params()[pname]
        if spec.integer and isinstance(v, int) and v > small and spec.contains(float(small)):
            try:
                trial = shown.replace(**{pname: small})
                if len(trial.validated_dates()) < len(shown.validated_dates()):
                    shown, changes[pname] = trial, small
            except LimitcaseError:
                continue
    if not changes:
        return product, ""
    what = ", ".join(f"{k}={v}" for k, v in changes.items())
    was = ", ".join(f"{k}={product.params()[k]}" for k in changes)
    return shown, f"shown with {what} to keep it short (the product has {was})"


class _Printer(LatexPrinter):
    """LaTeX that matplotlib's mathtext can typeset: no ``cases`` environment, and
    parameter names upright."""

    def _print_Symbol(self, expr: sp.Symbol, style: str = "plain") -> str:  # type: ignore[override]
        name = expr.name
        if "_" not in name and len(name) > 1:
            return r"\mathrm{" + name.replace("_", r"\_") + "}"
        return super()._print_Symbol(expr, style=style)

    def _print_Piecewise(self, expr: sp.Piecewise) -> str:  # type: ignore[override]
        parts = []
        for value, cond in expr.args:
            if cond == sp.true:
                parts.append(self._print(value) + r"\ \mathrm{otherwise}")
            else:
                parts.append(self._print(value) + r"\ \mathrm{if}\ " + self._print(cond))
        return r";\ ".join(parts)


def to_latex(expr: sp.Basic) -> str:
    """LaTeX of ``expr`` in the subset matplotlib's mathtext typesets."""
    return _Printer({"mul_symbol": None}).doprint(expr)


def to_text(expr: sp.Basic) -> str:
    """sympy's two-dimensional text rendering (Unicode)."""
    return sp.pretty(expr, use_unicode=True, wrap_line=False)
