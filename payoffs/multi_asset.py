"""Options on several assets under correlated geometric Brownian motion.

Every product here sets ``multi_asset = True``: its payoff reads ``obs.s`` of shape
``(paths, dates, assets)``, and its scenario is :func:`correlated_market`, an invented market of
correlated assets (illustrative numbers, not market data).

How the limits are checked. A multi-asset option collapses to a one-asset option in three
ways, each declared below:

* the other assets drop out of the payoff (all basket weight on one asset, a riskless
  second asset in an exchange or spread): checked path by path against :class:`AssetCall`
  or :class:`AssetPut` on the same correlated paths, then against Black-Scholes on that
  asset's own marginal model;
* the model has one asset: checked against Black-Scholes under the one-asset model;
* the assets move as one (correlation 1, equal volatilities and dividend yields): the
  basket, the best and the worst of the assets are each a single geometric Brownian motion
  started at the weighted sum, the largest or the smallest spot; checked against
  Black-Scholes on that combined asset.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
from numpy.polynomial.polynomial import polyval

from limitcase import (
    BlackScholes,
    Bound,
    Convex,
    Model,
    Monotone,
    MultiBlackScholes,
    NoReference,
    Param,
    ParamError,
    Product,
    Reduction,
    Identity,
)
from limitcase.references import (
    MAX_QUADRATURE_ASSETS,
    margrabe_exchange,
    two_asset_rainbow_call,
    weighted_sum_option,
)

from ._common import own_closed_form
from .vanilla import EuropeanCall, EuropeanPut

MAX_ASSETS = 20
RATE = 0.05
_SPOTS = (100.0, 95.0, 105.0, 90.0, 110.0)
_VOLS = (0.25, 0.30, 0.20, 0.35, 0.15)
_DIVIDENDS = (0.01, 0.02, 0.0, 0.03, 0.015)
_CORRELATION_DECAY = 0.5  # correlation between assets i and j in the scenario: 0.5 ** |i - j|


def correlated_market(n: int) -> MultiBlackScholes:
    """The scenario of the multi-asset checks: ``n`` correlated assets (invented numbers).

    Asset ``i`` takes the ``i % 5``-th of the spots (100, 95, 105, 90, 110), volatilities
    (0.25, 0.30, 0.20, 0.35, 0.15) and dividend yields (0.01, 0.02, 0, 0.03, 0.015); the
    correlation of assets ``i`` and ``j`` is ``0.5 ** |i - j|`` (positive definite: the
    correlation matrix of a first-order autoregression); the short rate is 0.05.
    """
    i = np.arange(n)
    pick = lambda table: tuple(np.asarray(table)[i % len(table)].tolist())  # noqa: E731
    return MultiBlackScholes(
        spots=pick(_SPOTS),
        vols=pick(_VOLS),
        dividends=pick(_DIVIDENDS),
        correlation=_CORRELATION_DECAY ** np.abs(i[:, None] - i[None, :]),
        rate=RATE,
    )


def marginal(model: Model, asset: int) -> BlackScholes:
    """The one-asset Black-Scholes model of asset ``asset`` of a :class:`MultiBlackScholes`.

    Each asset of a correlated geometric Brownian motion is, on its own, a geometric
    Brownian motion with its own spot, dividend yield and volatility (Black and Scholes
    1973); the correlation only matters for payoffs that read several assets.
    """
    if not isinstance(model, MultiBlackScholes):
        raise NoReference(f"a marginal Black-Scholes model exists for MultiBlackScholes, not {type(model).__name__}")
    return BlackScholes(
        spot=float(model.spots[asset]),
        rate=model.rate,
        dividend=float(model.dividends[asset]),
        vol=float(model.vols[asset]),
    )


def combined_asset(spot_of: Callable[[Product, np.ndarray], float]) -> Callable[[Model, Product], BlackScholes]:
    """A ``reference_model`` for assets that move as one.

    With correlation 1 and equal volatilities and dividend yields, every asset is
    ``S_i(T) = S_i(0) X(T)`` for one geometric Brownian motion ``X`` with ``X(0) = 1``, so
    a payoff of ``max_i``, ``min_i`` or ``sum_i w_i`` of the assets is the same payoff of a
    single asset started at ``spot_of(product, spots)``.
    """

    def mapping(model: Model, product: Product) -> BlackScholes:
        if not isinstance(model, MultiBlackScholes):
            raise NoReference(f"comonotone assets need MultiBlackScholes, not {type(model).__name__}")
        vols, dividends = model.vols, model.dividends
        if not (np.all(model.correlation == 1.0) and np.all(vols == vols[0]) and np.all(dividends == dividends[0])):
            raise NoReference(
                "the assets move as one only with correlation 1 and equal volatilities and dividend yields; "
                f"got vols={vols.tolist()!r}, dividends={dividends.tolist()!r}"
            )
        spot = float(spot_of(product, model.spots))
        return BlackScholes(spot=spot, rate=model.rate, dividend=float(dividends[0]), vol=float(vols[0]))

    return mapping


# Model changes of the reductions, from the scenario's numbers: each sets every number its limit
# depends on, so it holds whatever model the checks start from.
ONE_ASSET = correlated_market(1).params()
COMONOTONE = {"vols": _VOLS[0], "dividends": _DIVIDENDS[0], "correlation": 1.0}
RISKLESS_SECOND = {"spots": _SPOTS[:2], "vols": (_VOLS[0], 0.0), "dividends": (_DIVIDENDS[0], RATE), "rate": RATE}
"""Asset 2 with no volatility and a dividend yield equal to the rate stays at S2(0) = 95."""

_first_alone = lambda model, product: marginal(model, 0)  # noqa: E731


def at_expiry(obs) -> np.ndarray:
    """S_i(T) of every asset, shape ``(paths, assets)``: the one date of a European option."""
    return obs.s[:, -1, :]


def weighted_by_decay(decay: float, values: np.ndarray) -> float:
    """sum_i decay**i v_i / sum_i decay**i by Horner's rule (``numpy.polynomial`` polyval).

    The basket of ``values`` (spots, forwards), written apart from the payoff's weights so
    that the checks test them.
    """
    return float(polyval(decay, values) / polyval(decay, np.ones_like(values)))


def _prepaid(model: Model, asset: int, maturity: float) -> float:
    """S_i(0) exp(-q_i T): today's price of asset ``asset`` delivered at ``maturity``."""
    return float(model.initial()[asset] * np.exp(-model.dividend_yields()[asset] * maturity))


def _market_of(model: Model, assets: int, product: Product, method: str) -> MultiBlackScholes:
    """The model, if it is a MultiBlackScholes on exactly ``assets`` assets; NoReference otherwise."""
    name = type(product).__name__
    if not isinstance(model, MultiBlackScholes):
        raise NoReference(f"{name}: {method} needs MultiBlackScholes, not {type(model).__name__}")
    if model.n_assets != assets:
        raise NoReference(f"{name}: the contract has {assets} assets; the model {model.n_assets}")
    return model


def _weighted_sum(product: Product, model: Model, kind: str, weights: np.ndarray, strike: float) -> float:
    """Gauss-Hermite reference of a call or put on sum_i w_i S_i(T) - K from the terms."""
    method = "the Gauss-Hermite weighted-sum reference"
    if weights.size > MAX_QUADRATURE_ASSETS:
        raise NoReference(
            f"{type(product).__name__} with {weights.size} assets: {method} handles at most "
            f"{MAX_QUADRATURE_ASSETS} (its cost grows as nodes**(assets - 1))"
        )
    m = _market_of(model, weights.size, product, method)
    try:
        price, _ = weighted_sum_option(
            kind, weights, strike, product.maturity, m.spots, m.vols, m.dividends, m.correlation, m.rate
        )
    except ParamError as exc:  # a degenerate market the quadrature refuses: no trusted price
        raise NoReference(f"{type(product).__name__}: {exc}") from exc
    return price


def _rainbow(product: Product, model: Model, kind: str) -> float:
    """Stulz's call on the max/min of two assets from the terms and the model's numbers."""
    if product.assets != 2:
        raise NoReference(
            f"{type(product).__name__} with assets={product.assets}: the closed form (Stulz 1982) is for two assets"
        )
    m = _market_of(model, 2, product, "Stulz's closed form")
    s, q, v = m.spots, m.dividends, m.vols
    try:
        return two_asset_rainbow_call(
            kind, s[0], s[1], product.strike, product.maturity, m.rate, q[0], q[1], v[0], v[1], m.correlation[0, 1]
        )
    except ParamError as exc:
        raise NoReference(f"{type(product).__name__}: {exc}") from exc


class _SeveralAssets(Product):
    """Shared by the products with an ``assets`` count: dates, asset count, scenario."""

    abstract = True
    multi_asset = True

    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")
    assets = Param(2, low=1, high=MAX_ASSETS, integer=True, doc="number of assets the model simulates")

    @property
    def n_assets(self) -> int:
        return self.assets

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def scenario(self) -> MultiBlackScholes:
        return correlated_market(self.assets)


# ---------------------------------------------------------------------------------------
# one asset of several


class _OneAsset(_SeveralAssets):
    abstract = True
    european: type[Product] = EuropeanCall

    asset = Param(0, low=0, high=MAX_ASSETS - 1, integer=True, doc="which asset (0-based) the option is on")

    def _check(self) -> None:
        if self.asset >= self.assets:
            raise ParamError(
                f"asset={self.asset!r} is outside [0, {self.assets - 1}] for {type(self).__name__} with "
                f"assets={self.assets}; the asset index counts from 0 and must be below assets"
            )

    def reference(self, model: Model) -> float:
        vanilla = self.european(strike=self.strike, maturity=self.maturity)
        return vanilla.reference(marginal(model, self.asset))

    def reference_source(self) -> str:
        return f"Black-Scholes {self.european.__name__} on the asset's marginal"


class AssetCall(_OneAsset):
    """Pays max(S_i(T) - K, 0) at T on asset i of a multi-asset model.

    Limits: the other assets play no part, so the price is Black-Scholes on asset i's own
    spot, dividend yield and volatility whatever the correlation. The base case of the
    multi-asset reductions, checked here on the last asset.
    """

    reductions = (
        Reduction(
            "marginal_of_last_asset",
            {"asset": lambda p: p.assets - 1},
            becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity),
            reference_model=lambda model, p: marginal(model, p.asset),
            note="a call on one asset of several is the Black-Scholes call on that asset's marginal",
        ),
    )
    relations = (
        Monotone("strike", -1, to=lambda p: p.strike + 10.0, pathwise=True),
        Bound(
            "below_prepaid_forward", "<=", lambda p, m: _prepaid(m, p.asset, p.maturity),
            source="the call pays at most S_i(T), worth S_i(0) exp(-q_i T)",
        ),
    )

    def payoff(self, obs):
        return np.maximum(at_expiry(obs)[:, self.asset] - self.strike, 0.0)


class AssetPut(_OneAsset):
    """Pays max(K - S_i(T), 0) at T on asset i of a multi-asset model.

    Limits: as :class:`AssetCall`, the Black-Scholes put on asset i's marginal.
    """

    european = EuropeanPut
    reductions = (
        Reduction(
            "marginal_of_last_asset",
            {"asset": lambda p: p.assets - 1},
            becomes=lambda p: EuropeanPut(strike=p.strike, maturity=p.maturity),
            reference_model=lambda model, p: marginal(model, p.asset),
            note="a put on one asset of several is the Black-Scholes put on that asset's marginal",
        ),
    )
    relations = (
        Monotone("strike", +1, to=lambda p: p.strike + 10.0, pathwise=True),
        Bound(
            "below_discounted_strike", "<=", lambda p, m: p.strike * np.exp(-m.short_rate * p.maturity),
            source="the put pays at most K, worth K exp(-rT)",
        ),
    )

    def payoff(self, obs):
        return np.maximum(self.strike - at_expiry(obs)[:, self.asset], 0.0)


# ---------------------------------------------------------------------------------------
# baskets


class _Basket(_SeveralAssets):
    abstract = True

    assets = Param(3, low=1, high=MAX_ASSETS, integer=True, doc="number of assets in the basket")
    decay = Param(
        1.0, low=0.0, high=1.0,
        doc="ratio of each asset's weight to the previous one's: 1 equal weights, 0 all on the first asset",
    )

    @property
    def weights(self) -> np.ndarray:
        """w_i = decay**i / sum_j decay**j (i = 0..assets-1): they sum to 1."""
        w = self.decay ** np.arange(self.assets)
        return w / w.sum()

    def basket(self, obs) -> np.ndarray:
        """B(T) = sum_i w_i S_i(T), shape (paths,)."""
        return at_expiry(obs) @ self.weights

    kind = "call"

    def reference(self, model: Model) -> float:
        raw = self.decay ** np.arange(self.assets)
        return _weighted_sum(self, model, self.kind, raw / raw.sum(), self.strike)

    def reference_source(self) -> str:
        return f"Gauss-Hermite quadrature, last asset in closed form (up to {MAX_QUADRATURE_ASSETS} assets)"


def _basket_reductions(european: type[Product], one_asset: type[Product]) -> tuple[Reduction, ...]:
    name = european.__name__
    return (
        Reduction(
            "one_asset",
            {"assets": 1},
            becomes=lambda p: european(strike=p.strike, maturity=p.maturity),
            model_changes=ONE_ASSET,
            reference_model=_first_alone,
            note=f"a basket of one asset is that asset: the Black-Scholes {name}",
        ),
        Reduction(
            "all_weight_on_first_asset",
            {"decay": 0.0},
            becomes=lambda p: one_asset(strike=p.strike, maturity=p.maturity, assets=p.assets, asset=0),
            note="decay 0 puts weight 1 on the first asset: the option on it alone, on every path",
        ),
        Reduction(
            "comonotone_assets",
            {"decay": 0.5},
            becomes=lambda p: european(strike=p.strike, maturity=p.maturity),
            model_changes=COMONOTONE,
            reference_model=combined_asset(lambda p, spots: weighted_by_decay(p.decay, spots)),
            note=(
                "correlation 1 with equal volatilities and dividends: the basket is one geometric Brownian "
                f"motion started at sum_i w_i S_i(0), the Black-Scholes {name} on it (unequal weights, decay 0.5)"
            ),
        ),
    )


def _basket_forward(p: _Basket, m: Model) -> float:
    """sum_i w_i S_i(0) exp(-q_i T): today's price of the basket delivered at T."""
    return weighted_by_decay(p.decay, m.initial() * np.exp(-m.dividend_yields() * p.maturity))


class BasketCall(_Basket):
    """Pays max(B(T) - K, 0) at T, B = sum_i w_i S_i with w_i proportional to decay**i
    (equal weights by default).

    Limits: one asset -> the European call; decay 0 -> the call on the first asset (on
    every path); assets moving as one -> the European call on one asset started at
    sum_i w_i S_i(0). Decreasing and convex in the strike (on every path); between
    the discounted intrinsic value and the basket's prepaid forward.
    """

    reductions = (
        own_closed_form("gauss_hermite_quadrature", note="the basket call against its Gauss-Hermite reference"),
    ) + _basket_reductions(EuropeanCall, AssetCall)
    relations = (
        Monotone("strike", -1, to=lambda p: p.strike + 10.0, pathwise=True),
        Convex("strike", step=10.0, pathwise=True),
        Bound("below_basket_forward", "<=", _basket_forward, source="the call pays at most B(T)"),
        Bound(
            "above_intrinsic", ">=",
            lambda p, m: max(_basket_forward(p, m) - p.strike * np.exp(-m.short_rate * p.maturity), 0.0),
            source="max(E[B(T)] - K, 0) exp(-rT) by Jensen's inequality",
        ),
    )

    def payoff(self, obs):
        return np.maximum(self.basket(obs) - self.strike, 0.0)


class BasketPut(_Basket):
    """Pays max(K - B(T), 0) at T, B = sum_i w_i S_i with w_i proportional to decay**i
    (equal weights by default).

    Limits: one asset -> the European put; decay 0 -> the put on the first asset (on
    every path); assets moving as one -> the European put on one asset started at
    sum_i w_i S_i(0). Increasing and convex in the strike (on every path); at most the
    discounted strike.
    """

    kind = "put"
    reductions = (
        own_closed_form("gauss_hermite_quadrature", note="the basket put against its Gauss-Hermite reference"),
    ) + _basket_reductions(EuropeanPut, AssetPut)
    relations = (
        Monotone("strike", +1, to=lambda p: p.strike + 10.0, pathwise=True),
        Convex("strike", step=10.0, pathwise=True),
        Bound(
            "below_discounted_strike", "<=", lambda p, m: p.strike * np.exp(-m.short_rate * p.maturity),
            source="the put pays at most K",
        ),
    )

    def payoff(self, obs):
        return np.maximum(self.strike - self.basket(obs), 0.0)


# ---------------------------------------------------------------------------------------
# two assets: exchange and spread


class _TwoAssets(Product):
    abstract = True
    multi_asset = True
    n_assets = 2

    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def scenario(self) -> MultiBlackScholes:
        return correlated_market(2)


def _riskless_second(strike: Callable[[Product], float]) -> Reduction:
    s2 = RISKLESS_SECOND["spots"][1]
    return Reduction(
        "second_asset_riskless",
        {},
        becomes=lambda p: AssetCall(strike=strike(p) + s2, maturity=p.maturity, assets=2, asset=0),
        model_changes=RISKLESS_SECOND,
        note=(
            f"asset 2 with volatility 0 and dividend yield = rate stays at S2(0) = {s2:g}: a call on asset 1 "
            "struck that much higher, on every path"
        ),
    )


class ExchangeOption(_TwoAssets):
    """Pays max(S1(T) - S2(T), 0) at T: the right to exchange asset 2 for asset 1.

    Reference: Margrabe (1978), volatility sqrt(s1^2 + s2^2 - 2 rho s1 s2), no rate.
    Limits: asset 2 riskless (volatility 0, dividend yield = rate) -> a call on asset 1
    struck at S2(0), on every path. Between max(F1 - F2, 0) exp(-rT) and asset 1's
    prepaid forward.
    """

    reductions = (
        own_closed_form("margrabe_closed_form", note="Margrabe: the exchange option has a closed form under correlated GBM"),
        _riskless_second(lambda p: 0.0),
    )
    relations = (
        Bound("below_prepaid_forward_1", "<=", lambda p, m: _prepaid(m, 0, p.maturity),
              source="the exchange pays at most S1(T)"),
        Bound(
            "above_intrinsic", ">=",
            lambda p, m: max(_prepaid(m, 0, p.maturity) - _prepaid(m, 1, p.maturity), 0.0),
            source="max(S1(0) exp(-q1 T) - S2(0) exp(-q2 T), 0) by Jensen's inequality",
        ),
    )

    def payoff(self, obs):
        s = at_expiry(obs)
        return np.maximum(s[:, 0] - s[:, 1], 0.0)

    def reference(self, model: Model) -> float:
        if not isinstance(model, MultiBlackScholes) or model.n_assets != 2:
            raise NoReference(f"Margrabe's formula needs a two-asset MultiBlackScholes, not {model!r}")
        s, q, v = model.spots, model.dividends, model.vols
        return margrabe_exchange(s[0], s[1], self.maturity, q[0], q[1], v[0], v[1], model.correlation[0, 1])

    def reference_source(self) -> str:
        return "Margrabe (1978)"


class SpreadCall(_TwoAssets):
    """Pays max(S1(T) - S2(T) - K, 0) at T.

    Limits: strike 0 -> the exchange option (on every path; Margrabe); asset 2 riskless
    (volatility 0, dividend yield = rate) -> a call on asset 1 struck at K + S2(0), on every
    path. Decreasing and convex in the strike, below the exchange option (on every path).
    """

    strike = Param(5.0, low=0.0, doc="strike on the spread S1 - S2")

    reductions = (
        own_closed_form("gauss_hermite_quadrature", note="the spread call against its Gauss-Hermite reference"),
        Reduction(
            "zero_strike",
            {"strike": 0.0},
            becomes=lambda p: ExchangeOption(maturity=p.maturity),
            note="strike 0: the spread call is the exchange option on every path, priced by Margrabe",
        ),
        _riskless_second(lambda p: p.strike),
    )
    relations = (
        Monotone("strike", -1, to=lambda p: p.strike + 5.0, pathwise=True),
        Convex("strike", step=2.5, pathwise=True),
        Bound(
            "below_exchange", "<=", lambda p, m: ExchangeOption(maturity=p.maturity).reference(m),
            pathwise_leg=lambda p: ExchangeOption(maturity=p.maturity),
            source="Margrabe: a positive strike only lowers the payoff",
        ),
    )

    def payoff(self, obs):
        s = at_expiry(obs)
        return np.maximum(s[:, 0] - s[:, 1] - self.strike, 0.0)

    def reference(self, model: Model) -> float:
        return _weighted_sum(self, model, "call", np.array([1.0, -1.0]), self.strike)

    def reference_source(self) -> str:
        return "Gauss-Hermite quadrature, asset 1 in closed form given asset 2"


# ---------------------------------------------------------------------------------------
# best-of and worst-of


def _best_plus_worst(p: _SeveralAssets):
    """max(a - K, 0) + max(b - K, 0) is the same sum whichever of a, b is the larger."""
    if p.assets != 2:
        raise ParamError(f"best + worst = call 1 + call 2 holds for two assets; this product has assets={p.assets!r}")
    kw = dict(strike=p.strike, maturity=p.maturity, assets=2)
    other = WorstOfCall if isinstance(p, BestOfCall) else BestOfCall
    return [(1.0, p), (1.0, other(**kw)), (-1.0, AssetCall(asset=0, **kw)), (-1.0, AssetCall(asset=1, **kw))]


def _versus_asset_call(side: str, which: str) -> Bound:
    index = (lambda p: 0) if which == "first" else (lambda p: p.assets - 1)
    call = lambda p: AssetCall(strike=p.strike, maturity=p.maturity, assets=p.assets, asset=index(p))  # noqa: E731
    word = "above" if side == ">=" else "below"
    return Bound(
        f"{word}_call_on_{which}_asset", side, lambda p, m: call(p).reference(m), pathwise_leg=call,
        source=f"Black-Scholes call on the {which} asset's marginal",
    )


_ONE_ASSET_RAINBOW = dict(
    changes={"assets": 1},
    becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity),
    model_changes=ONE_ASSET,
    reference_model=_first_alone,
)


class BestOfCall(_SeveralAssets):
    """Pays max(max_i S_i(T) - K, 0) at T: a call on the best of the assets.

    Limits: one asset -> the European call; assets moving as one -> the European call on
    one asset started at max_i S_i(0). At least each single-asset call and, with two
    assets, best-of + worst-of = call on asset 1 + call on asset 2 (both on every path).
    Decreasing in the strike.
    """

    reductions = (
        own_closed_form("stulz_closed_form", note="the best-of call against Stulz (1982), two assets"),
        Reduction("one_asset", **_ONE_ASSET_RAINBOW, note="the best of one asset is that asset: the European call"),
        Reduction(
            "comonotone_assets",
            {},
            becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity),
            model_changes=COMONOTONE,
            reference_model=combined_asset(lambda p, spots: spots.max()),
            note="assets moving as one: the best is always the asset with the largest spot",
        ),
    )
    relations = (
        Identity("best_plus_worst", _best_plus_worst),
        _versus_asset_call(">=", "first"),
        _versus_asset_call(">=", "last"),
        Monotone("strike", -1, to=lambda p: p.strike + 10.0, pathwise=True),
    )

    def payoff(self, obs):
        return np.maximum(at_expiry(obs).max(axis=1) - self.strike, 0.0)

    def reference(self, model: Model) -> float:
        return _rainbow(self, model, "max")

    def reference_source(self) -> str:
        return "Stulz (1982), call on the maximum of two assets"


class WorstOfCall(_SeveralAssets):
    """Pays max(min_i S_i(T) - K, 0) at T: a call on the worst of the assets.

    Limits: one asset -> the European call; assets moving as one -> the European call on
    one asset started at min_i S_i(0). At most each single-asset call and, with two assets,
    best-of + worst-of = call on asset 1 + call on asset 2 (both on every path).
    Decreasing in the strike.
    """

    strike = Param(90.0, low=0.0, doc="strike")

    reductions = (
        own_closed_form("stulz_closed_form", note="the worst-of call against Stulz (1982), two assets"),
        Reduction("one_asset", **_ONE_ASSET_RAINBOW, note="the worst of one asset is that asset: the European call"),
        Reduction(
            "comonotone_assets",
            {},
            becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity),
            model_changes=COMONOTONE,
            reference_model=combined_asset(lambda p, spots: spots.min()),
            note="assets moving as one: the worst is always the asset with the smallest spot",
        ),
    )
    relations = (
        Identity("best_plus_worst", _best_plus_worst),
        _versus_asset_call("<=", "first"),
        _versus_asset_call("<=", "last"),
        Monotone("strike", -1, to=lambda p: p.strike + 10.0, pathwise=True),
    )

    def payoff(self, obs):
        return np.maximum(at_expiry(obs).min(axis=1) - self.strike, 0.0)

    def reference(self, model: Model) -> float:
        return _rainbow(self, model, "min")

    def reference_source(self) -> str:
        return "Stulz (1982), call on the minimum of two assets"
