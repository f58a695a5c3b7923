"""Bounded, validated parameters.

A :class:`Param` is declared as a class attribute of a product or a model. Its two ends are
not only a validation rule: they are the limits the reducer pushes a product to (a barrier
that may go to ``inf``, a number of fixings that may go down to ``1``).
"""

from __future__ import annotations

import inspect
import math
import numbers
from dataclasses import dataclass, field
from typing import Any, ClassVar, Iterator, Mapping

from .errors import DeclarationError, ParamError

__all__ = ["Param", "Parametrised"]


@dataclass(frozen=True, slots=True)
class Param:
    """A bounded parameter with a default and a one-line description.

    Parameters
    ----------
    default
        The value used when none is given.
    low, high
        The ends of the allowed range; either may be infinite.
    low_open, high_open
        Whether an end is excluded from the range (``(0, 5]`` for a volatility that must
        be positive, ``[0, inf]`` for a barrier that may be pushed to infinity). An
        infinite end is part of the range unless declared open.
    integer
        The value must be a whole number (a count of fixings, of exercise dates).
    doc
        One line saying what the parameter is, shown in listings and errors.
    """

    default: float
    low: float = -math.inf
    high: float = math.inf
    low_open: bool = False
    high_open: bool = False
    integer: bool = False
    doc: str = ""
    name: str = field(default="", compare=False)

    def __post_init__(self) -> None:
        if self.low > self.high:
            raise ParamError(f"Param declared with low={self.low!r} above high={self.high!r}")

    def __set_name__(self, owner: type, name: str) -> None:
        object.__setattr__(self, "name", name)

    # descriptor: on an instance the attribute reads the instance's value
    def __get__(self, obj: Any, objtype: type | None = None) -> Any:
        if obj is None:
            return self
        try:
            return obj._values[self.name]
        except (AttributeError, KeyError):
            raise AttributeError(self.name) from None

    def __set__(self, obj: Any, value: Any) -> None:
        raise AttributeError(
            f"{type(obj).__name__}.{self.name} is read-only; use .replace({self.name}=...)"
        )

    def range_text(self) -> str:
        """The allowed range in interval notation, e.g. ``(0, inf)`` or ``[1, 500] integer``."""
        left = "(" if self.low_open else "["
        right = ")" if self.high_open else "]"
        text = f"{left}{_fmt(self.low)}, {_fmt(self.high)}{right}"
        return text + (" integer" if self.integer else "")

    def contains(self, value: float) -> bool:
        """Whether ``value`` lies in the declared range (ends included where closed)."""
        if math.isnan(value):
            return False
        if value < self.low or (value == self.low and self.low_open):
            return False
        if value > self.high or (value == self.high and self.high_open):
            return False
        return True

    def validate(self, value: Any, owner: str = "") -> float | int:
        """Return ``value`` as a number in range, or raise :class:`ParamError`.

        The message names the owner, the parameter, the value and the allowed range.
        """
        where = f" for {owner}" if owner else ""
        if isinstance(value, bool) or not isinstance(value, numbers.Real):
            raise ParamError(
                f"{self.name}={value!r} is not a number{where}; "
                f"expected a value in {self.range_text()}"
            )
        number = float(value)
        if self.integer:
            if not math.isfinite(number) or number != int(number):
                if not (math.isinf(number) and self.contains(number)):
                    raise ParamError(
                        f"{self.name}={value!r} is not a whole number{where}; "
                        f"{self.name} is a count in {self.range_text()}"
                    )
        if not self.contains(number):
            hint = f" ({self.doc})" if self.doc else ""
            raise ParamError(
                f"{self.name}={value!r} is outside {self.range_text()}{where}{hint}"
            )
        if self.integer and math.isfinite(number):
            return int(number)
        return number


def _fmt(x: float) -> str:
    if x == math.inf:
        return "inf"
    if x == -math.inf:
        return "-inf"
    return f"{x:g}"


class Parametrised:
    """Base of everything that declares :class:`Param` class attributes.

    ``Cls(**overrides)`` validates every given value against its declared range;
    ``obj.replace(**changes)`` returns a validated copy; ``obj.params()`` the values.
    Subclasses inherit and may redeclare their parents' parameters.
    """

    _param_specs: ClassVar[dict[str, Param]] = {}

    def __init_subclass__(cls, **kwargs: Any) -> None:
        super().__init_subclass__(**kwargs)
        specs: dict[str, Param] = {}
        for klass in reversed(cls.__mro__):
            for name, value in vars(klass).items():
                if isinstance(value, Param):
                    specs[name] = value
        cls._param_specs = specs
        for name, spec in vars(cls).items():  # inherited ones were checked on their own class
            if isinstance(spec, Param):
                _check_default(cls, name, spec)

    def __init__(self, **overrides: Any) -> None:
        specs = type(self)._param_specs
        unknown = sorted(set(overrides) - set(specs))
        if unknown:
            known = ", ".join(specs) or "none"
            raise ParamError(
                f"{type(self).__name__} has no parameter {unknown[0]!r}; "
                f"its parameters are: {known}"
            )
        values: dict[str, Any] = {}
        for name, spec in specs.items():
            raw = overrides.get(name, spec.default)
            values[name] = spec.validate(raw, owner=type(self).__name__)
        object.__setattr__(self, "_values", values)
        self._check()

    def _check(self) -> None:
        """Hook: cross-parameter validation (raise ParamError). Default: nothing."""

    @classmethod
    def param_specs(cls) -> Mapping[str, Param]:
        """The declared parameters, by name, in declaration order."""
        return dict(cls._param_specs)

    def params(self) -> dict[str, Any]:
        """The instance's parameter values, by name."""
        return dict(self._values)

    def replace(self, **changes: Any) -> "Parametrised":
        """A validated copy with some parameters changed."""
        values = self.params()
        values.update(changes)
        return type(self)(**values)

    def __iter__(self) -> Iterator[tuple[str, Any]]:
        return iter(self._values.items())

    def __eq__(self, other: object) -> bool:
        return type(self) is type(other) and self._values == other._values  # type: ignore[attr-defined]

    def __hash__(self) -> int:
        return hash((type(self).__qualname__, tuple(sorted(self._values.items()))))

    def __repr__(self) -> str:
        inner = ", ".join(f"{k}={_short(v)}" for k, v in self._values.items())
        return f"{type(self).__name__}({inner})"


def _check_default(cls: type, name: str, spec: Param) -> None:
    """A declared default must lie in the parameter's own range: raise
    :class:`DeclarationError` when the class is defined, naming the class and the parameter."""
    try:
        spec.validate(spec.default)
    except ParamError as exc:
        raise DeclarationError(
            f"{cls.__name__}: the default of parameter {name!r} is invalid: {exc} "
            f"(declared as {name} = Param({spec.default!r}, ...) on {cls.__qualname__} in {_where(cls)})"
        ) from None


def _where(cls: type) -> str:
    """``module m (path/file.py, line n)`` of a class, as far as it can be found."""
    text = f"module {cls.__module__}"
    try:
        path = inspect.getsourcefile(cls)
        line = inspect.getsourcelines(cls)[1]
    except (OSError, TypeError):
        return text
    return f"{text} ({path}, line {line})"


def _short(v: Any) -> str:
    if isinstance(v, float):
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return f"{v:g}"
    return repr(v)
