"""``limitcase new NAME``: write the skeleton of a product module, NAME.py with class NAME.

The skeleton cannot pass by accident: its payoff raises ``NotImplementedError`` (the engine
reports it as an error for the product) and its one reduction's ``becomes`` raises too
(the reducer reports an error naming the unfinished reduction), so ``limitcase check`` on
the new file exits 1 until the author has filled in both.
"""

from __future__ import annotations

import keyword
from pathlib import Path

import click

from ..cli_support import InputFailure, handle_errors

TEMPLATE = '''\
"""{name}: a new product for limitcase. Fill in the three places marked TODO, then run

    limitcase check {filename}

Until they are filled in, the check reports errors (never a silent pass).
"""

from __future__ import annotations

import numpy as np

from limitcase import Param, Product, Reduction

# Base products with trusted prices to reduce to, for example:
# from limitcase_payoffs.vanilla import EuropeanCall, EuropeanPut, PrepaidForward, ZeroCouponBond


def _base_case(p: "{name}") -> Product:
    """The product {name} becomes at the limit of the reduction below (``p`` is {name}
    with the reduction's changes applied), for example
    ``return EuropeanCall(strike=p.strike, maturity=p.maturity)``."""
    # TODO 2: return the base product of this reduction.
    raise NotImplementedError(
        "complete this reduction: 'unfinished_limit' of {name} must say which parameter moves to "
        "which limit (changes) and return the base product (becomes, _base_case); see {filename}"
    )


class {name}(Product):
    """Pays ... at T.  (TODO: say what the product pays, in words, and its limits.)

    Limits: ... -> ...
    """

    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry and payment date, in years")
    fixings = Param(12, low=1, high=10_000, integer=True, doc="number of observation dates")

    reductions = (
        # TODO 3: name the limit, set the parameter(s) it moves (e.g. {{"fixings": 1}}) and
        # complete _base_case above. Add more Reduction entries, and relations
        # (Identity, Monotone, Convex, Bound from limitcase) where the product admits them.
        Reduction(
            "unfinished_limit",
            {{"fixings": 1}},
            becomes=_base_case,
            note="TODO: the limit behaviour in words, for the dossier",
        ),
    )

    def dates(self) -> np.ndarray:
        """Observation dates T/n, 2T/n, ..., T (change to the product's schedule)."""
        return self.maturity * np.arange(1, self.fixings + 1) / self.fixings

    def payoff(self, obs) -> np.ndarray:
        """The amount paid at the last date, one per path; ``obs.s`` has shape
        (paths, dates) and must not be written to."""
        # TODO 1: compute the payoff from obs.s, e.g. np.maximum(obs.s[:, -1] - self.strike, 0.0)
        raise NotImplementedError("{name}.payoff is not written yet; see TODO 1 in {filename}")
'''


def render(name: str, filename: str) -> str:
    """The skeleton module for a product class ``name`` saved as ``filename``."""
    return TEMPLATE.format(name=name, filename=filename)


def check_name(name: str) -> None:
    """Raise :class:`InputFailure` unless ``name`` can be both a module file and a class."""
    if not name.isidentifier() or keyword.iskeyword(name):
        raise InputFailure(
            f"NAME={name!r} is not a Python identifier; use letters, digits and underscores, "
            "not starting with a digit, e.g. CappedAsianCall"
        )
    if name.startswith("_"):
        raise InputFailure(
            f"NAME={name!r} starts with an underscore, and files starting with '_' are skipped when a "
            "folder is checked; choose a name such as CappedAsianCall"
        )


@click.command("new")
@click.argument("name")
@click.option("-o", "--output", "outdir", type=click.Path(file_okay=False), default=".", show_default=True,
              help="Folder to write NAME.py into (created if missing).")
@click.option("--force", is_flag=True, help="Overwrite NAME.py if it exists.")
@click.option("--debug", is_flag=True, help="Show tracebacks for bad input.")
@handle_errors
def command(name: str, outdir: str, force: bool, debug: bool) -> None:
    """Write NAME.py with a product class NAME: parameters, a payoff to fill in and a
    reduction to complete. `limitcase check` reports it as an error until both are done."""
    check_name(name)
    folder = Path(outdir)
    path = folder / f"{name}.py"
    if path.exists() and not force:
        raise InputFailure(f"{path} exists; pass --force to overwrite it, or choose another NAME or -o DIR")
    try:
        folder.mkdir(parents=True, exist_ok=True)
        path.write_text(render(name, str(path)), encoding="utf-8")
    except OSError as exc:
        raise InputFailure(f"{path}: cannot be written ({exc}); choose another -o DIR") from exc
    click.echo(f"wrote {path}")
    click.echo(f"next: fill in the payoff and the reduction, then: limitcase check {path}")
