"""Engine audits: every shipped model passes them at the default settings; deliberately
broken models fail the audit meant to catch them.

The audits' references are the reference library's closed forms and trusted numerical
prices (Black-Scholes 1973, Margrabe 1978, Heston 1993 by Lewis' integral, Merton 1976 by
the Poisson series), each tested against published values in tests/references. Every
decision here is the audits' own: z * SE after Holm's correction at alpha = 0.01.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

from limitcase import engine
from limitcase.audits import (
    AUDITS,
    AuditOption,
    DriftCorrected,
    _Level,
    _Levels,
    audit_model,
    audit_seeds,
    default_models,
    reference_price,
    run_audits,
)
from limitcase.errors import InputError, NoReference
from limitcase.models import BlackScholes, Heston, Merton, Model, MultiBlackScholes
from limitcase.models.base import Simulated
from limitcase.report import outcomes_document

# ---------------------------------------------------------------------------------------
# deliberately broken models
# ---------------------------------------------------------------------------------------


class NoDividend(BlackScholes):
    """Bug: the drift forgets the dividend yield (r - sigma^2/2 instead of r - q - sigma^2/2)."""

    def _simulate(self, times, z, rng):
        dt = np.diff(times, prepend=0.0)
        x = z * (self.vol * np.sqrt(dt))[None, :, None] + ((self.rate - 0.5 * self.vol**2) * dt)[None, :, None]
        return Simulated(s=self.spot * np.exp(np.cumsum(x, axis=1)), step_var=(self.vol**2 * dt)[None, :, None])


class VarianceByDt(BlackScholes):
    """Bug: the Brownian increment is scaled by dt instead of sqrt(dt)."""

    def _simulate(self, times, z, rng):
        dt = np.diff(times, prepend=0.0)
        x = z * (self.vol * dt)[None, :, None] + ((self.rate - self.dividend - 0.5 * self.vol**2) * dt)[None, :, None]
        return Simulated(s=self.spot * np.exp(np.cumsum(x, axis=1)), step_var=(self.vol**2 * dt)[None, :, None])


class CorrelationTwice(MultiBlackScholes):
    """Bug: the correlation factor is applied to the normals twice."""

    def _simulate(self, times, z, rng):
        return super()._simulate(times, z @ self._chol.T, rng)


class RepeatedNormals(BlackScholes):
    """Bug: a wrong reshape reuses the first quarter of the block's normals four times, so
    the paths are not independent and the reported standard error is half the true one."""

    def _simulate(self, times, z, rng):
        q = -(-z.shape[0] // 4)
        z[:] = np.concatenate([z[:q]] * 4)[: z.shape[0]]
        return super()._simulate(times, z, rng)


class FrozenGenerator(BlackScholes):
    """Bug: ignores the engine's normals and draws from a generator seeded with a constant,
    so every block and every seed sees the same paths."""

    def _simulate(self, times, z, rng):
        z[...] = np.random.default_rng(0).standard_normal(z.shape)
        return super()._simulate(times, z, rng)


def _euler_variant(name, bug, variance_in_drift, diffusion_variance, next_variance):
    """A Heston Euler step with the variance's treatment below zero swapped out."""

    def step(self, x, v, h, zv, zs):
        vd, vs = variance_in_drift(v), diffusion_variance(v)
        root = np.sqrt(vs * h)
        x_new = x + (self.rate - self.dividend - 0.5 * vd) * h + root * (
            self.rho * zv + math.sqrt(1.0 - self.rho**2) * zs)
        return x_new, next_variance(v + self.kappa * (self.theta - vd) * h + self.vol_of_vol * root * zv)

    return type(name, (Heston,), {"_euler_step": step, "__doc__": f"Bug: {bug}."})


def _same(v):
    return v


def _plus(v):
    return np.maximum(v, 0.0)


HestonNoTruncation = _euler_variant(
    "HestonNoTruncation", "plain Euler, the variance goes below zero and sqrt(v) is NaN", _same, _same, _same)
HestonNegativeDrift = _euler_variant(
    "HestonNegativeDrift", "a negative variance kept in the drift (sqrt(v+) in the diffusion)", _same, _plus, _same)
HestonReflection = _euler_variant(
    "HestonReflection", "absolute-value reflection of the variance", _same, _same, np.abs)


class Uncompensated(Merton):
    """Bug: the drift lacks the jump compensator -lambda * kbar."""

    @property
    def jump_compensator(self) -> float:
        return 0.0


# ---------------------------------------------------------------------------------------
# the shipped models pass
# ---------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def default_run():
    return run_audits()


def test_every_shipped_model_passes_every_audit(default_run):
    from limitcase.report import render_table

    assert default_run.ok, render_table(default_run.outcomes) + "\n" + "\n".join(
        f"{o.product}/{o.case}: {o.message}" for o in default_run.outcomes if o.verdict != "pass")
    names = {o.product for o in default_run.outcomes}
    assert names == {"BlackScholes", "MultiBlackScholes", "Heston", "Merton", "LocalVol", "DividendBlackScholes"}
    for name in names:
        cases = {o.case for o in default_run.outcomes if o.product == name}
        for audit in ("martingale", "paths", "seeds", "steps_limit"):
            assert audit in cases, (name, cases)
    cases = {(o.product, o.case) for o in default_run.outcomes}
    assert ("Heston", "degenerations:vol_of_vol_to_zero") in cases
    assert ("LocalVol", "degenerations:flat_surface") in cases
    assert ("Merton", "degenerations:intensity_to_zero") in cases and ("Merton", "degenerations:jump_sizes_to_zero") in cases
    assert ("MultiBlackScholes", "degenerations:asset2_alone") in cases
    assert ("BlackScholes", "steps_flat") in cases and ("Merton", "steps_flat") in cases
    assert all(o.kind == "audit" and o.p_adjusted is not None for o in default_run.outcomes)


def test_run_records_timings_and_models(default_run):
    timings = default_run.extra["timings"]
    assert set(timings) == {"BlackScholes", "MultiBlackScholes", "Heston", "Merton", "LocalVol", "DividendBlackScholes"}
    assert all(set(t) == set(AUDITS) and all(s >= 0 for s in t.values()) for t in timings.values())
    doc = outcomes_document(default_run, "audit")
    assert doc["command"] == "audit" and doc["settings"]["models"]["Heston"].startswith("Heston(")
    assert doc["summary"]["fail"] == 0 and doc["summary"]["total"] == len(default_run.outcomes)


def test_euler_heston_passes_with_its_order_checked():
    """Full-truncation Euler is biased at a quarter-year step but converges: the steps
    audit sees the bias shrink at least as fast as order 1 and the Richardson limit match
    the Heston price."""
    result = run_audits([Heston(scheme="euler")])
    assert result.ok, [(o.case, o.z, o.message) for o in result.outcomes if o.verdict != "pass"]
    order = [o for o in result.outcomes if o.case == "steps_order"]
    assert order and "estimated weak order" in order[0].message


# ---------------------------------------------------------------------------------------
# broken models fail
# ---------------------------------------------------------------------------------------
BROKEN = [
    (NoDividend(), ("martingale",), {"martingale"}),
    (VarianceByDt(), ("martingale", "steps"), {"martingale", "steps_flat", "steps_limit"}),
    (CorrelationTwice(), ("steps",), {"steps_limit"}),
    (RepeatedNormals(), ("seeds",), {"seeds"}),
    (FrozenGenerator(), ("martingale", "seeds"), {"martingale", "seeds"}),
    (HestonNegativeDrift(scheme="euler", substeps=1), ("martingale",), {"martingale"}),
    (HestonReflection(scheme="euler"), ("steps",), {"steps_order"}),
    (Uncompensated(), ("martingale",), {"martingale"}),
]


@pytest.mark.parametrize("model, audits, caught", BROKEN, ids=[type(b[0]).__name__ for b in BROKEN])
def test_broken_model_fails(model, audits, caught):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        result = run_audits([model], audits)
    failed = {o.case for o in result.outcomes if o.verdict == "fail"}
    assert caught <= failed, [(o.case, o.verdict, o.z) for o in result.outcomes]
    assert not result.ok


def test_heston_variance_below_zero_is_an_error_not_a_number():
    """Plain Euler without truncation takes sqrt of a negative variance: the audits report
    the NaN prices as errors naming the cause, never as a price."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        result = run_audits([HestonNoTruncation(scheme="euler")], ("martingale", "steps"))
    assert {o.verdict for o in result.outcomes} == {"error"}
    assert all("NaN or inf prices" in o.message for o in result.outcomes)


def test_paths_audit_catches_a_standard_error_that_falls_like_one_over_n(monkeypatch):
    """A broken engine whose standard error divides the spread by n instead of sqrt(n):
    the fitted slope is -1, far outside its interval around -1/2."""
    honest = engine.Joint.estimate

    def wrong(self, weights, **kwargs):
        est = honest(self, weights, **kwargs)
        return engine.Estimate(est.value, est.stderr / math.sqrt(self.paths), est.paths)

    monkeypatch.setattr(engine.Joint, "estimate", wrong)
    result = run_audits([BlackScholes()], ("paths",))
    (o,) = result.outcomes
    assert o.verdict == "fail" and abs(o.value + 1.0) < 0.05, (o.value, o.stderr)


def test_drift_correction_never_hides_a_bug():
    """With the correction on, the corrected paths meet the forward by construction, but
    the uncorrected test still runs and still fails the run."""
    result = run_audits([NoDividend()], ("martingale",), drift_correction=True)
    by_case = {o.case: o for o in result.outcomes}
    assert by_case["martingale"].verdict == "fail"
    assert by_case["martingale_corrected"].verdict == "pass"
    assert abs(by_case["martingale_corrected"].difference) < 1e-9 * by_case["martingale_corrected"].reference
    assert "the uncorrected error" in by_case["martingale_corrected"].message
    assert not result.ok


def test_drift_corrected_paths_have_the_forward_as_block_mean():
    model = DriftCorrected(Merton())
    times = np.array([0.5, 1.0, 2.0])
    rng = np.random.default_rng(3)
    s = model.simulate(times, rng.standard_normal((3000, 3, 1)), rng).s
    np.testing.assert_allclose(s.mean(axis=0), Merton().forward(times), rtol=1e-12)


# ---------------------------------------------------------------------------------------
# mechanics: levels, seeds, references, reproducibility, bad input
# ---------------------------------------------------------------------------------------
def test_levels_on_common_normals_are_the_same_black_scholes_path():
    """The steps audit's common random numbers: the coarse normals are the sums of the fine
    ones over each coarse step, scaled by 1/sqrt(group), so an exact scheme gives the same
    price on every path at every step size."""
    model = BlackScholes()
    levels = _Levels(model, [_Level(model, f, f) for f in (1, 2, 4)], 1, common=True)
    times = np.array([0.25, 0.5, 1.0])
    z = np.random.default_rng(9).standard_normal((200, 3, levels.normals_per_step()))
    s = levels.simulate(times, z, np.random.default_rng(0)).s
    np.testing.assert_allclose(s[:, :, 0], s[:, :, 1], rtol=1e-12)
    np.testing.assert_allclose(s[:, :, 0], s[:, :, 2], rtol=1e-12)


def test_levels_through_substeps_match_the_model_run_alone():
    """A Heston level stepped through substeps on the aggregated normals is exactly the model
    with those substeps run on the same aggregated normals."""
    model = Heston()
    levels = _Levels(model, [_Level(model.replace(substeps=f), f, 1) for f in (1, 2)], 2, common=True)
    times = np.array([0.25, 0.5])
    z = np.random.default_rng(10).standard_normal((100, 2, levels.normals_per_step()))
    s = levels.simulate(times, z.copy(), np.random.default_rng(0)).s
    coarse = (z.reshape(100, 2, 1, 2, 2).sum(axis=3) / math.sqrt(2.0)).reshape(100, 2, 2)
    alone = model.replace(substeps=1).simulate(times, coarse, np.random.default_rng(0)).s
    fine = model.replace(substeps=2).simulate(times, z.copy(), np.random.default_rng(0)).s
    np.testing.assert_allclose(s[:, :, :1], alone, rtol=1e-12)
    np.testing.assert_allclose(s[:, :, 1:], fine, rtol=1e-12)


def test_seeds_are_spawned_and_independent_of_the_main_streams():
    """The same seed reproduces the audit; another seed gives other numbers."""
    a = audit_seeds(BlackScholes(), paths=40_000, seed=5)[0]
    b = audit_seeds(BlackScholes(), paths=40_000, seed=5)[0]
    c = audit_seeds(BlackScholes(), paths=40_000, seed=6)[0]
    assert a.value == b.value and a.value != c.value
    assert a.reference == 31.0 and a.stderr == pytest.approx(math.sqrt(62.0))


def test_reference_registry_follows_the_class_hierarchy():
    option = AuditOption("call", 1.0, strike=100.0)
    value, source = reference_price(HestonReflection(), option)
    assert source.startswith("Heston") and value == reference_price(Heston(), option)[0]

    class Unknown(Model):
        abstract = True  # declares no simulation: only its (missing) reference is asked for
        rate = BlackScholes.rate

    with pytest.raises(NoReference, match="no reference price registered for Unknown; register one"):
        reference_price(Unknown(), option)
    with pytest.raises(NoReference, match="calls only"):
        reference_price(Heston(), AuditOption("exchange", 1.0, columns=(0, 1)))


def test_unknown_audit_is_bad_input():
    with pytest.raises(InputError, match=r"unknown audit 'drift'; the audits are: martingale, paths, seeds, steps, degenerations"):
        audit_model(BlackScholes(), ["drift"])


def test_too_few_paths_is_an_error_outcome_with_the_fix():
    result = run_audits([BlackScholes()], ("martingale", "paths", "seeds"), paths=2500)
    assert {o.verdict for o in result.outcomes} == {"error"}
    messages = " ".join(o.message for o in result.outcomes)
    assert "paths=2500 is too few for the martingale audit; it needs at least 8192" in messages
    assert "use at least 7000" in messages and "paths=2500 is too few for 3 seeds; use at least 3000" in messages


def test_fewer_seeds_when_paths_are_few():
    o = audit_seeds(BlackScholes(), paths=12_000, seed=1)[0]
    assert o.reference == 11.0 and "12 seeds x 1000 paths" in o.message


def test_default_models_are_the_shipped_defaults():
    models = default_models()
    assert models["Heston"] == Heston() and models["Merton"] == Merton()
    assert models["BlackScholes"] == BlackScholes() and models["MultiBlackScholes"] == MultiBlackScholes()
