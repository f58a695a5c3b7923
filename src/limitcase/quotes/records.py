"""The records of a quote set: one validated quote, a no-arbitrage warning, the set."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Iterable

from .market import Market

__all__ = [
    "Quote",
    "ArbitrageWarning",
    "QuoteSet",
]


# ----------------------------------------------------------------------------------------
# quotes


@dataclass(frozen=True, slots=True)
class Quote:
    """One validated quote. Prices are in currency; ``iv`` is None when no volatility
    reproduces the price (it breaks a bound: see the warnings)."""

    line: int
    label: str
    expiry: float
    expiry_text: str
    strike: float
    kind: str
    price: float
    iv: float | None
    bid: float | None = None
    ask: float | None = None
    bid_iv: float | None = None
    ask_iv: float | None = None
    weight: float = 1.0

    @property
    def has_spread(self) -> bool:
        return self.bid is not None and self.ask is not None

    @property
    def spread(self) -> float | None:
        return None if self.bid is None or self.ask is None else self.ask - self.bid


@dataclass(frozen=True, slots=True)
class ArbitrageWarning:
    """A model-free no-arbitrage condition broken by the named quotes."""

    kind: str  # "bound", "strike", "calendar"
    labels: tuple[str, ...]
    message: str

    def to_dict(self) -> dict[str, Any]:
        return {"kind": self.kind, "labels": list(self.labels), "message": self.message}


@dataclass(frozen=True)
class QuoteSet:
    """Validated quotes, their market, and the no-arbitrage warnings they raise."""

    path: str
    quotes: tuple[Quote, ...]
    market: Market
    quoted: str  # "price" or "iv"
    warnings: tuple[ArbitrageWarning, ...] = field(default_factory=tuple)

    def __len__(self) -> int:
        return len(self.quotes)

    def expiries(self) -> list[float]:
        return sorted({q.expiry for q in self.quotes})

    def by_expiry(self) -> list[tuple[float, list[int]]]:
        """``[(T, [indices of its quotes, by strike then type])]`` in increasing T."""
        groups: dict[float, list[int]] = {}
        for i, q in enumerate(self.quotes):
            groups.setdefault(q.expiry, []).append(i)
        return [
            (t, sorted(groups[t], key=lambda i: (self.quotes[i].strike, self.quotes[i].kind)))
            for t in sorted(groups)
        ]

    def select(self, indices: Iterable[int]) -> "QuoteSet":
        idx = list(indices)
        return QuoteSet(self.path, tuple(self.quotes[i] for i in idx), self.market, self.quoted, self.warnings)
