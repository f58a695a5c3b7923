"""Models of the underlying(s): each declares bounded parameters and simulates on any grid."""

from .base import Degeneration, Model, Simulated
from .dividends import DividendBlackScholes
from .gbm import BlackScholes, MultiBlackScholes
from .heston import HESTON_SCHEMES, Heston
from .merton import Merton
from .localvol import LocalVol

__all__ = [
    "Model",
    "Simulated",
    "Degeneration",
    "BlackScholes",
    "MultiBlackScholes",
    "Heston",
    "HESTON_SCHEMES",
    "Merton",
    "LocalVol",
    "DividendBlackScholes",
]
