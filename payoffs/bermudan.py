"""Options with early exercise, valued by Longstaff-Schwartz regression."""

from __future__ import annotations

import numpy as np

from limitcase import Param, Product, Reduction

from ._common import even_dates
from .vanilla import EuropeanPut


class BermudanPut(Product):
    """Pays max(K - S(t), 0) at the exercise date t the holder chooses among n equally
    spaced dates ending at T.

    Limits: one exercise date (T) -> the European put (exercise at T exactly when in the
    money, on every path).
    """

    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="last exercise date in years")
    exercises = Param(12, low=1, high=1000, integer=True, doc="number of exercise dates")

    reductions = (
        Reduction(
            "one_exercise_date",
            {"exercises": 1},
            becomes=lambda p: EuropeanPut(strike=p.strike, maturity=p.maturity),
            note="a single exercise date at maturity: the European put on every path",
        ),
    )

    def dates(self) -> np.ndarray:
        return even_dates(self.maturity, self.exercises)

    def exercise_dates(self) -> np.ndarray:
        return self.dates()

    def exercise_value(self, obs):
        return np.maximum(self.strike - obs.s, 0.0)
