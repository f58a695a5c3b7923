"""Trusted reference prices: closed forms and numerical base cases.

This package is the trusted side of every check. It shares no code with the Monte Carlo
engine: its closed-form modules import only numpy, scipy, math and :mod:`limitcase.errors`.
Every function broadcasts its numeric arguments and returns a float for scalar input.
"""

from limitcase.references.blackscholes import (
    black76,
    black_scholes,
    implied_vol,
    prepaid_forward,
    put_call_parity_gap,
)
from limitcase.references.barriers import (
    BARRIER_KINDS,
    BGK_BETA,
    barrier_option,
    bgk_barrier_shift,
    discrete_barrier_option,
)
from limitcase.references.digitals import asset_or_nothing, cash_or_nothing, gap_option
from limitcase.references.asians import geometric_asian, geometric_asian_continuous
from limitcase.references.lookbacks import lookback_fixed, lookback_floating
from limitcase.references.exotics import (
    forward_start,
    kirk_spread_approx,
    margrabe_exchange,
    power_option,
    simple_chooser,
)

# numerical references
from limitcase.references.heston import heston_charfn, heston_price
from limitcase.references.lattice import lattice_price, lattice_price_dividends, lattice_price_payoff
from limitcase.references.merton import merton_charfn, merton_jump_price
from limitcase.references.quadrature import european_by_quadrature
from limitcase.references.fourier import FOURIER_KINDS, FOURIER_METHOD, FOURIER_TOL, fourier_price

# numerical references from the contract terms (the caller builds the dates from them)
from limitcase.references.discrete_barriers import (
    DISCRETE_BARRIER_KINDS,
    DOUBLE_BARRIER_KINDS,
    discrete_barrier_by_quadrature,
    discrete_double_barrier_by_quadrature,
)
from limitcase.references.arithmetic_asians import (
    arithmetic_asian,
    arithmetic_asian_continuous,
    arithmetic_asian_floating,
)
from limitcase.references.barrier_series import (
    binary_barrier,
    double_barrier_option,
    double_touch,
    touch_option,
)
from limitcase.references.compound import bivariate_normal_cdf, complex_chooser, compound_option
from limitcase.references.corridor import range_accrual
from limitcase.references.multi_asset import (
    MAX_QUADRATURE_ASSETS,
    WEIGHTED_SUM_TOL,
    two_asset_rainbow_call,
    weighted_sum_option,
)
from limitcase.references.cliquets import cliquet_by_convolution
from limitcase.references.discrete_lookbacks import DISCRETE_LOOKBACK_KINDS, discrete_lookback
from limitcase.references.local_vol_pde import LOCAL_VOL_BARRIER_KINDS, local_vol_barrier_by_pde

__all__ = [
    # blackscholes
    "black76",
    "black_scholes",
    "implied_vol",
    "prepaid_forward",
    "put_call_parity_gap",
    # barriers
    "BARRIER_KINDS",
    "BGK_BETA",
    "barrier_option",
    "bgk_barrier_shift",
    "discrete_barrier_option",
    # digitals
    "asset_or_nothing",
    "cash_or_nothing",
    "gap_option",
    # asians
    "geometric_asian",
    "geometric_asian_continuous",
    # lookbacks
    "lookback_fixed",
    "lookback_floating",
    # exotics
    "forward_start",
    "kirk_spread_approx",
    "margrabe_exchange",
    "power_option",
    "simple_chooser",
    # lattice
    "lattice_price",
    "lattice_price_payoff",
    "lattice_price_dividends",
    # quadrature
    "european_by_quadrature",
    # heston
    "heston_charfn",
    "heston_price",
    # merton
    "merton_charfn",
    "merton_jump_price",
    # fourier (any model's characteristic function)
    "FOURIER_KINDS",
    "FOURIER_METHOD",
    "FOURIER_TOL",
    "fourier_price",
    # discrete barriers (recursive quadrature)
    "DISCRETE_BARRIER_KINDS",
    "DOUBLE_BARRIER_KINDS",
    "discrete_barrier_by_quadrature",
    "discrete_double_barrier_by_quadrature",
    # arithmetic Asians (Vecer's PDE)
    "arithmetic_asian",
    "arithmetic_asian_continuous",
    "arithmetic_asian_floating",
    # continuous double barriers, touches, binary barriers
    "binary_barrier",
    "double_barrier_option",
    "double_touch",
    "touch_option",
    # compound options and the complex chooser
    "bivariate_normal_cdf",
    "complex_chooser",
    "compound_option",
    # corridors
    "range_accrual",
    # several assets: Stulz rainbow calls, Gauss-Hermite weighted sums
    "MAX_QUADRATURE_ASSETS",
    "WEIGHTED_SUM_TOL",
    "two_asset_rainbow_call",
    "weighted_sum_option",
    # cliquets
    "cliquet_by_convolution",
    # discrete lookbacks
    "DISCRETE_LOOKBACK_KINDS",
    "discrete_lookback",
    # local volatility (finite differences)
    "LOCAL_VOL_BARRIER_KINDS",
    "local_vol_barrier_by_pde",
]
