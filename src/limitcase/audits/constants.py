"""The audits' names, dates and sizes, and the models audited by default."""

from __future__ import annotations

from ..models.base import Model
from ..models.gbm import BlackScholes, MultiBlackScholes
from ..models.heston import Heston
from ..models.dividends import DividendBlackScholes
from ..models.localvol import LocalVol, example_surface
from ..models.merton import Merton

__all__ = [
    "AUDITS",
    "MARTINGALE_DATES",
    "PATHS_GROUP_MIN",
    "SEED_PATHS_MIN",
    "OPTION_MATURITY",
    "OPTION_DATES",
    "default_models",
]


AUDITS = ("martingale", "paths", "seeds", "steps", "degenerations")
"""The audits, in the order :func:`run_audits` runs them."""

MARTINGALE_DATES = (1.0 / 12.0, 0.25, 0.5, 1.0, 2.0)
"""Dates of the martingale audit: one month to two years, unevenly spaced on purpose."""

PATHS_GROUP_MIN = 1000
"""Fewest paths in a group of the paths audit (the delta-method variance of a log standard
error, about (kurtosis - 1)/(4n), is then below 0.01 for the audit options' payoffs)."""

SEED_PATHS_MIN = 1000
"""Fewest paths per seed in the seeds audit (each seed's mean is then close to normal for
the audit options, so Q is close to chi-square)."""

OPTION_MATURITY = 1.0
OPTION_DATES = 4
"""The reference option expires in one year and is observed quarterly (the quarterly grid
is the coarsest step ``dt`` of the steps audit; the payoff reads the last date)."""


def default_models() -> dict[str, Model]:
    """Every shipped model at its default parameters, by name (the ``audit`` default)."""
    return {
        "BlackScholes": BlackScholes(),
        "MultiBlackScholes": MultiBlackScholes(),
        "Heston": Heston(),
        "Merton": Merton(),
        "LocalVol": LocalVol(surface=example_surface()),
        "DividendBlackScholes": DividendBlackScholes(),
    }
