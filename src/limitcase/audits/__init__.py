"""Engine audits: before any exotic priced on a model is believed, the simulation itself
must pass its own checks.

Five audits, each yielding :class:`~limitcase.verdict.Outcome` records of kind ``"audit"``
(``product`` = the model's class name, ``case`` = the audit's name), Holm-corrected over the
whole run by :func:`~limitcase.verdict.finalise` in :func:`run_audits`:

``martingale``
    :math:`E[e^{-rt}S_i(t)] = S_i(0)e^{-q_it}` at every date of a grid and for every asset,
    one z-test per (date, asset) with the standard error at that date; the dates and assets
    are combined into one outcome by Bonferroni's min-p,
    :math:`p = \\min(1, L\\,\\min_l p_l)` over the L tests (a valid p-value whatever their
    dependence; Holm then runs over the audits). The error at 1/16 and 1/4 of the paths is
    reported beside it (its decay as paths grow). With ``drift_correction=True`` the same
    test is also run on paths rescaled to the forward (:class:`DriftCorrected`), as a
    separate outcome ``martingale_corrected``: the uncorrected test is always run and
    always decides, so the correction can never hide a bug.
``paths``
    The reported standard error of the reference option against the path count, over
    disjoint groups of paths, on a log-log weighted least-squares fit: the slope must be
    -1/2 (z-test of slope + 1/2; the slope and its interval are reported).
``seeds``
    K independent seeds: :math:`Q = \\sum_k ((v_k - \\bar v)/s_k)^2` with :math:`\\bar v`
    the inverse-variance weighted mean is chi-square with K - 1 degrees of freedom (Cochran
    1954) when the standard errors are right. Two-sided: a spread above what the standard
    errors claim (paths within a run not independent, SE understated) and one below it
    (seeds not independent of each other) are both flagged.
``steps``
    The reference option priced with the step halved three times (dt, dt/2, dt/4, dt/8).
    A discretised scheme (``exact = False`` on the model, e.g. Heston) is stepped through
    its ``substeps`` on common random numbers (the coarse normals are sums of the fine
    ones), the weak order is estimated from successive differences, and the Richardson
    limit :math:`(2^pP_{h} - P_{2h})/(2^p - 1)` (p the scheme's declared weak order) is
    tested against the reference price (``steps_limit``). An exact scheme is stepped by
    refining the date grid on independent normals; its level prices must agree
    (``steps_flat``, chi-square on the differences) and their pooled mean must match the
    reference price (``steps_limit``).
``degenerations``
    Each of the model's declared :class:`~limitcase.models.base.Degeneration` cases, and
    for a multi-asset model each asset alone: the reference option priced by Monte Carlo at
    the degenerate parameters against the reference library's price under the model it
    becomes.

Every audit prices through :func:`limitcase.engine.evaluate` with small products of its own
(a delivery of the asset at a date, a European call, an exchange option), so it tests the
same code path the checks use.

Modules: :mod:`.constants` (names, dates, sizes, default models), :mod:`.probes` (the
audits' own products), :mod:`.registry` (reference prices by model class),
:mod:`.wrappers` (drift correction, step levels), :mod:`.martingale` (martingale, paths,
seeds), :mod:`.steps` (steps, degenerations), :mod:`.runner` (one model, many models).
"""

from __future__ import annotations

from .constants import AUDITS, MARTINGALE_DATES, default_models
from .martingale import audit_martingale, audit_paths, audit_seeds
from .probes import AuditOption, reference_option
from .registry import reference_price, register_reference
from .runner import audit_model, run_audits
from .steps import audit_degenerations, audit_steps
from .wrappers import DriftCorrected, _Level, _Levels

__all__ = [
    "AUDITS",
    "MARTINGALE_DATES",
    "AuditOption",
    "DriftCorrected",
    "default_models",
    "reference_option",
    "reference_price",
    "register_reference",
    "audit_martingale",
    "audit_paths",
    "audit_seeds",
    "audit_steps",
    "audit_degenerations",
    "audit_model",
    "run_audits",
]
