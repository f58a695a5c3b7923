"""The time-step audit and the model's degenerate cases."""

from __future__ import annotations

import math

import numpy as np
from scipy.stats import chi2

from ..engine import BLOCK, Joint, case_key
from ..errors import ModelError, ParamError
from ..models.base import Model
from ..settings import DEFAULT_ALPHA, DEFAULT_PATHS, DEFAULT_SEED
from ..verdict import Outcome, p_value
from .constants import OPTION_MATURITY
from .probes import AuditOption, reference_option
from .registry import _marginal, reference_price
from .wrappers import _Level, _Levels
from .common import _check_paths, _error, _evaluate, _name, _outcome, _seed_int, _z

__all__ = [
    "audit_steps",
    "audit_degenerations",
]


# ----------------------------------------------------------------------------------------
# steps


def audit_steps(
    model: Model,
    *,
    paths: int = DEFAULT_PATHS,
    seed: int = DEFAULT_SEED,
    levels: int = 4,
    alpha: float = DEFAULT_ALPHA,
    option: AuditOption | None = None,
) -> list[Outcome]:
    r"""Prices at dt, dt/2, ..., dt/2^(levels-1) (dt = a quarter of the option's year).

    A model with ``exact = False`` (a discretisation, e.g. :class:`~limitcase.models.Heston`)
    is stepped through its ``substeps`` parameter (set to 1, 2, 4, ... on the option's
    quarterly grid, whatever the model's own setting), every level on the same normals; with
    :math:`d_l = P_{l} - P_{l+1}` the successive differences, the weak order is estimated as
    :math:`\hat p = \log_2(d_{L-2}/d_{L-1})` (delta-method standard error; reported only),
    and the Richardson limit with the declared order p (``model.weak_order``),
    :math:`P^* = (2^pP_L - P_{L-1})/(2^p - 1)`, is tested against the reference price.

    A model without ``exact = False`` is taken to be exact in time: it is stepped by
    refining the date grid, each level on its own normals, and the differences
    :math:`P_l - P_L` are tested jointly, :math:`d^T\Sigma^{-1}d \sim \chi^2_{L-1}`
    (``steps_flat``); the pooled (inverse-variance weighted) price is tested against the
    reference price (``steps_limit``).
    """
    if levels < 3:
        raise ParamError(f"levels={levels!r} must be at least 3 (two differences)")
    _check_paths(paths, 2 * BLOCK, "steps")
    option = option or reference_option(model)
    ref, source = reference_price(model, option)
    exact = bool(getattr(model, "exact", True))
    factors = [2**i for i in range(levels)]
    a = model.n_assets
    has_substeps = "substeps" in type(model).param_specs()
    if exact:
        lv = [_Level(model, f, f) for f in factors]
        per = model.normals_per_step()
    elif has_substeps:
        lv = [_Level(model.replace(substeps=f), f, 1) for f in factors]
        per = model.replace(substeps=1).normals_per_step()
    else:
        raise ModelError(f"{_name(model)} declares exact = False but has no substeps parameter to step through")
    stacked = _Levels(model, lv, per, common=not exact)
    legs = [option.probe(stacked.n_assets, offset=i * a, name=f"{option.describe()} dt={option.maturity / option.dates_count / f:g}")
            for i, f in enumerate(factors)]
    joint = _evaluate(legs, stacked, paths=paths, seed=seed, key=case_key(_name(model), "steps"))
    prices = joint.mean
    dts = [option.maturity / option.dates_count / f for f in factors]
    table = ", ".join(f"{p:.5g} at dt={h:.4g}" for p, h in zip(prices, dts))
    base = dict(paths=joint.paths, seed=_seed_int(seed), legs=tuple(leg.label() for leg in legs))
    L = levels
    if not exact:
        p_dec = float(getattr(model, "weak_order", 1.0))
        w = np.zeros(L)
        w[-1], w[-2] = 2**p_dec / (2**p_dec - 1), -1.0 / (2**p_dec - 1)
        est = joint.estimate(w)
        diff = est.value - ref
        order_text = _order_text(joint, L)
        out = [_outcome(
            model, "steps_limit", value=est.value, stderr=est.stderr, reference=ref, difference=diff,
            z=_z(diff, est.stderr), p_value=p_value(diff, est.stderr, "=="), target_source=source,
            message=(f"Richardson limit with weak order {p_dec:g} from the two finest steps; {order_text}; "
                     f"prices {table}; common random numbers across steps; {option.describe()}"),
            **base,
        )]
        # the bias must shrink at least as fast as the declared order says: with the
        # coarser difference resolved (|d1| >= 3 SE, so its sign is known), the contrast
        # sign(d1) (d1 - 2^p d2) must be >= 0
        e = np.eye(L)
        d1w, d2w = e[L - 3] - e[L - 2], e[L - 2] - e[L - 1]
        d1 = joint.estimate(d1w)
        if abs(d1.value) >= 3.0 * d1.stderr:
            sign = math.copysign(1.0, d1.value)
            contrast = joint.estimate(sign * (d1w - 2**p_dec * d2w))
            out.append(_outcome(
                model, "steps_order", value=contrast.value, stderr=contrast.stderr, reference=0.0,
                difference=contrast.value, z=_z(contrast.value, contrast.stderr),
                p_value=p_value(contrast.value, contrast.stderr, ">="), sense=">=",
                target_source=f"step bias shrinks by at least 2^{p_dec:g} per halving (declared weak order)",
                message=(f"|d1| - 2^{p_dec:g} |d2| with d1 = P(dt={dts[L - 3]:.4g}) - P(dt={dts[L - 2]:.4g}) = "
                         f"{d1.value:.4g}, d2 = P(dt={dts[L - 2]:.4g}) - P(dt={dts[L - 1]:.4g}) = "
                         f"{joint.estimate(d2w).value:.4g}; {order_text}"),
                **base,
            ))
        return out
    # exact scheme: flat in the step, and right
    cov = joint.cov / joint.paths
    dmat = np.zeros((L - 1, L))
    for i in range(L - 1):
        dmat[i, i], dmat[i, -1] = 1.0, -1.0
    d = dmat @ prices
    sd = dmat @ cov @ dmat.T
    stat = float(d @ np.linalg.solve(sd, d))
    dse = np.sqrt(np.diag(sd))
    worst = int(np.argmax(np.abs(d) / dse))
    flat = _outcome(
        model, "steps_flat", value=float(d[worst]), stderr=float(dse[worst]), reference=0.0,
        difference=float(d[worst]), z=float(d[worst] / dse[worst]), p_value=float(chi2.sf(stat, L - 1)),
        target_source=f"an exact scheme does not depend on the step (chi-square {stat:.3g}, {L - 1} dof)",
        message=(f"largest difference: dt={dts[worst]:.4g} minus dt={dts[-1]:.4g}; prices {table}; "
                 f"independent normals per step; {option.describe()}"),
        **base,
    )
    inv = np.linalg.inv(cov)
    one = np.ones(L)
    wts = inv @ one / (one @ inv @ one)
    est = joint.estimate(wts)
    diff = est.value - ref
    limit = _outcome(
        model, "steps_limit", value=est.value, stderr=est.stderr, reference=ref, difference=diff,
        z=_z(diff, est.stderr), p_value=p_value(diff, est.stderr, "=="), target_source=source,
        message=f"pooled over {L} steps (exact scheme); {option.describe()}", **base,
    )
    return [flat, limit]


def _order_text(joint: Joint, L: int) -> str:
    """The estimated weak order from the two finest differences, or why it is not resolved."""
    e = np.eye(L)
    d1w, d2w = e[L - 3] - e[L - 2], e[L - 2] - e[L - 1]
    d1, d2 = joint.estimate(d1w), joint.estimate(d2w)
    if abs(d1.value) < 3 * d1.stderr or abs(d2.value) < 3 * d2.stderr or d1.value * d2.value <= 0:
        return (f"weak order not resolved (differences {d1.value:.3g} +/- {d1.stderr:.2g}, "
                f"{d2.value:.3g} +/- {d2.stderr:.2g}: the step bias is within the noise)")
    c = joint.cov / joint.paths
    g = np.array([1.0 / d1.value, -1.0 / d2.value]) / math.log(2.0)
    m = np.vstack([d1w, d2w])
    se = math.sqrt(max(float(g @ (m @ c @ m.T) @ g), 0.0))
    order = math.log2(d1.value / d2.value)
    return f"estimated weak order {order:.2f} +/- {se:.2f}"


# ----------------------------------------------------------------------------------------
# degenerations


def audit_degenerations(
    model: Model,
    *,
    paths: int = DEFAULT_PATHS,
    seed: int = DEFAULT_SEED,
    alpha: float = DEFAULT_ALPHA,
) -> list[Outcome]:
    """Each declared degeneration of ``model`` (and, for several assets, each asset alone):
    the reference option priced by Monte Carlo at the degenerate parameters against the
    reference price under the model it becomes."""
    _check_paths(paths, 2 * BLOCK, "degenerations")
    out: list[Outcome] = []
    for deg in type(model).degenerations:
        case = f"degenerations:{deg.name}"
        try:
            changes = {k: (v(model) if callable(v) else v) for k, v in deg.changes.items()}
            at_limit = model.replace(**changes)
            becomes = deg.becomes(at_limit)
            option = reference_option(at_limit)
            ref, source = reference_price(becomes, option)
            out.append(_priced_against(at_limit, case, option, ref, f"{becomes.label()} by {source}",
                                       paths, seed, deg.note or f"becomes {becomes.label()}"))
        except Exception as exc:  # a declaration or the model failed: report, go on
            out.append(_error(model, case, exc, paths, _seed_int(seed) or 0))
    if model.n_assets > 1:
        for i in range(model.n_assets):
            alone = _marginal(model, i)
            if alone is None:
                continue
            case = f"degenerations:asset{i + 1}_alone"
            try:
                option = AuditOption("call", OPTION_MATURITY, strike=float(model.initial()[i]), columns=(i,))
                ref, source = reference_price(alone, AuditOption("call", OPTION_MATURITY, strike=option.strike))
                out.append(_priced_against(model, case, option, ref, f"{alone.label()} by {source}", paths, seed,
                                           f"asset {i + 1} alone is Black-Scholes with its own vol and dividend"))
            except Exception as exc:
                out.append(_error(model, case, exc, paths, _seed_int(seed) or 0))
    return out


def _priced_against(model: Model, case: str, option: AuditOption, ref: float, source: str,
                    paths: int, seed: int, note: str) -> Outcome:
    leg = option.probe(model.n_assets)
    joint = _evaluate([leg], model, paths=paths, seed=seed, key=case_key(_name(model), case))
    est = joint.estimate([1.0])
    diff = est.value - ref
    return _outcome(
        model, case, value=est.value, stderr=est.stderr, reference=ref, difference=diff, z=_z(diff, est.stderr),
        p_value=p_value(diff, est.stderr, "=="), paths=joint.paths, seed=_seed_int(seed), target_source=source,
        message=option.describe(), note=f"{note}; {model.label()}", legs=(leg.label(),),
    )
