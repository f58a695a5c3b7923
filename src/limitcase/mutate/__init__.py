"""Mutation testing of product code: how many payoff bugs do a product's checks catch?

A *mutant* is a copy of a product class with one small change in its payoff code, the
kind of slip a product author makes: ``<`` for ``<=``, ``np.maximum`` for ``np.minimum``,
the second-to-last fixing for the last, a discount factor dropped, a call written as a put.
Each mutant is checked with the product's own declared reductions and relations
(:func:`limitcase.reduce.checks_for` on the mutant class, :func:`limitcase.suite.run_checks`);
a mutant the checks fail (or that errors: a crash is a visible failure) is *caught*, one that
passes every check is a *survivor*. The mutation score is::

    score = (caught + error) / (caught + error + survived)

Equivalent mutants, which change no cash flow, are excluded from the score and listed apart.

Scope: what is mutated
----------------------
The methods that produce cash flows and their timing, ``payoff``, ``exercise_value``,
``dates`` and ``exercise_dates``, as the product class resolves them (inherited ones
included), and every helper they reach that is defined in the product's own module:
module-level functions they call or name, and methods, properties, static and class
methods they reach through ``self.`` (transitively). Out of scope: code of other modules
(``limitcase`` itself, ``_common.even_dates``), the declarations (``reductions``,
``relations``, ``reference``, ``scenario``), ``regression_state`` (it only steers the
Longstaff-Schwartz policy), ``_check`` (validation), nested functions with closures, and
code under ``raise``/``assert`` and inside f-strings (messages, not cash flows).

How a mutant is built
---------------------
The module's source is parsed (:mod:`ast`); one node of one in-scope function is replaced;
the function is unparsed (:func:`ast.unparse`) and compiled in a *copy* of its module's
namespace, so its imports and module globals resolve. Every in-scope function is rebound
to that copy, so a mutated module helper is seen by the methods that call it; the product
class is then subclassed with the rebound methods. The subclass keeps the original's name,
parameters, reductions and relations, so exactly the same checks apply, on the same random
streams (case keys are made from the product's name). Only the mutant class sees the
change: the other legs of its checks (the vanilla of in + out = vanilla) are the originals.
A mutant that does not compile is discarded and not counted.

Equivalent mutants
------------------
A mutant is declared equivalent only if it pays exactly what the original pays (to the
engine's path-rule tolerance, rtol = atol = 1e-9) on every path tried at every parameter
point the checks use (each leg of each check that is the product itself, with that check's
model; the defaults and every reduction's limit among them): deterministic *edge paths*
built from the product's parameters (flat at each level, ending exactly on it, touching it
on one date, touching one level and ending on another) and random paths of the point's
model through :func:`limitcase.engine.evaluate` with a :class:`~limitcase.engine.PathRule`
comparing the two on every path. Dates and exercise dates must agree too. Otherwise the
mutant is real, even if it differs only on an edge path (a path sitting exactly on the
barrier): such survivors are flagged ``edge_only``.

Equivalent at the check points only
-----------------------------------
An equivalent mutant is also compared at one point no check uses (every real parameter up
10%, every count up one: :func:`probe_point`). If it pays differently there, it is still
equivalent by the definition above (no check can see it) and still not scored, but it is
flagged with advice: the checks sit only where that code is invisible (every check with
the strike at the spot, say).

Budget and verdicts
-------------------
Mutants run in parallel on the worker pool every command shares (:mod:`limitcase.workers`).
The equivalence test runs first (it is cheap, and spares dead-code mutants the checks),
then the checks with a small path budget (``quick_paths``); only the survivors run again
with the full budget (``paths``) before being declared survivors. Checks are sampled as
``limitcase check`` samples them (``method="auto"`` by default), and a mutant is judged as
``limitcase check`` judges one product: Holm over that product's checks. Its checks run one
by one, cheapest first (by the original's CPU time), each on its own streams, and stop at
the first check the original passes that is certain to fail under Holm whatever the others
give (a broken path-by-path identity, or ``p < alpha / M`` over the product's ``M``
checks): the verdict is the one the whole run would give. Mutant and original share every
random stream, so a mutant is caught by its effect, not by the luck of the draw. The
original products' checks run at both budgets: a case the original fails at its own level
cannot catch its mutants (it is set aside), and a case that fails under Holm over the whole
run, as ``limitcase check`` would report it on the same products, is a false alarm.

Limits
------
A mutant stage that outlasts the time limit (``time_limit``) is stopped, its worker
replaced, and the mutant reported as ``timeout`` (a visible failure: counted as detected,
with the crashes under ``error``, and apart in :meth:`MutationReport.catch`); a mutant
that exhausts memory is stopped only by the system (its dead worker is then reported as an
error); checks of *other* products that use this one as a leg are not run on its mutants
(only its own declared checks count, a conservative score); ``run_mutation`` is not
re-entrant (the worker registry is module state).

Layout
------
:mod:`~limitcase.mutate.operators` (the slips), :mod:`~limitcase.mutate.mutants` (scope,
mutations of one function, compiled mutant classes), :mod:`~limitcase.mutate.equivalence` (with :mod:`~limitcase.mutate.dead`: a mutant whose
statement the original never runs on a point's paths reuses the original's comparison with
itself, the same numbers bit for bit; :mod:`~limitcase.mutate.infection`: so does one whose
mutated expression, probed in one run of the original per point, gives the original's value
at every evaluation; and :mod:`~limitcase.mutate.shared`: the mutants of a
point share its simulated paths and the original's present values on them),
:mod:`~limitcase.mutate.running` (the checks on the mutants, over the shared pool; with
:mod:`~limitcase.mutate.same_checks`: a mutant whose statement the check building never
runs takes the original's checks with itself in the original's place),
:mod:`~limitcase.mutate.advice` (what check would catch a survivor),
:mod:`~limitcase.mutate.scores` (records and scores). Import from ``limitcase.mutate``.
"""

from __future__ import annotations

from .advice import suggest, suggest_hidden
from .equivalence import (
    EQUIVALENCE_PATHS,
    Equivalence,
    Point,
    PointDifference,
    check_points,
    edge_paths,
    equivalence,
    probe_difference,
    probe_point,
)
from .mutants import (
    Discarded,
    Mutant,
    Mutation,
    Scoped,
    build_mutant_class,
    function_mutations,
    make_mutants,
    payoff_scope,
)
from .operators import OPERATORS, Context, Operator
from .running import QUICK_PATHS, mutation_scores, run_mutation
from .scores import MutantResult, MutationReport, ProductScore, family_of, product_scores, score_of, scores_from_json

__all__ = [
    "OPERATORS",
    "Operator",
    "Context",
    "Mutation",
    "Mutant",
    "Discarded",
    "Scoped",
    "MutantResult",
    "PointDifference",
    "Equivalence",
    "Point",
    "ProductScore",
    "MutationReport",
    "QUICK_PATHS",
    "EQUIVALENCE_PATHS",
    "payoff_scope",
    "function_mutations",
    "make_mutants",
    "build_mutant_class",
    "equivalence",
    "check_points",
    "edge_paths",
    "probe_point",
    "probe_difference",
    "suggest",
    "suggest_hidden",
    "run_mutation",
    "product_scores",
    "scores_from_json",
    "mutation_scores",
    "score_of",
    "family_of",
]
