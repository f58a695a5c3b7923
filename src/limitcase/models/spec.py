"""Model specs: the text a user types to choose a model on the command line.

Syntax (our own)::

    SPEC      = TARGET [":" CLASS] [":" OVERRIDES]
    TARGET    = a shipped model's name (any case)  |  a .py file  |  a folder
              |  a .toml file declaring an external simulator (docs/simulator-files.md)
    OVERRIDES = NAME "=" VALUE {"," NAME "=" VALUE}
    VALUE     = a number (1e-3, inf), a list [100, 90], true / false, or a word (euler)

Examples::

    heston                                   Heston at its defaults
    heston:kappa=2,theta=0.04,scheme=euler   Heston with three parameters changed
    multiblackscholes:spots=[100,90],correlation=0.3
    models/cev.py                            the one Model class of a file
    models/cev.py:CEV                        class CEV of that file
    models/cev.py:CEV:elasticity=0.7         ... with a parameter changed
    models/cev.py:elasticity=0.7             the file's one class, parameter changed

A part after the target that contains ``=`` is the overrides; one without is a class
name. The overrides are passed to the class (``Class(**overrides)``), so they are validated
against its declared ranges like any other parameter values. Every error names the spec,
the file, the class, the parameter and what to do.
"""

from __future__ import annotations

import ast
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ..errors import InputError, LimitcaseError
from .base import Model, checked_normals_per_step, declared_at
from .gbm import BlackScholes, MultiBlackScholes
from .heston import Heston
from .localvol import LocalVol
from .dividends import DividendBlackScholes
from .merton import Merton

__all__ = ["SHIPPED_MODELS", "ModelSpec", "parse_model_spec", "resolve_model", "resolve_models"]

SHIPPED_MODELS: dict[str, type[Model]] = {
    "BlackScholes": BlackScholes,
    "MultiBlackScholes": MultiBlackScholes,
    "Heston": Heston,
    "Merton": Merton,
    "LocalVol": LocalVol,
    "DividendBlackScholes": DividendBlackScholes,
}
"""The shipped models by name (names are matched case-insensitively)."""


@dataclass(frozen=True)
class ModelSpec:
    """A parsed spec: ``target`` (a shipped name or a path), an optional class name and the
    parameter overrides."""

    text: str
    target: str
    class_name: str | None = None
    overrides: dict[str, Any] = field(default_factory=dict)

    @property
    def is_path(self) -> bool:
        return self.target.endswith((".py", ".toml")) or Path(self.target).is_dir() or "/" in self.target


def _value(text: str, spec: str, name: str) -> Any:
    t = text.strip()
    low = t.lower()
    if low in ("inf", "+inf", "infinity"):
        return math.inf
    if low in ("-inf", "-infinity"):
        return -math.inf
    if low in ("true", "false"):
        return low == "true"
    if not t:
        raise InputError(f"model spec {spec!r}: parameter {name!r} has no value; write {name}=VALUE")
    try:
        value = ast.literal_eval(t)
    except (ValueError, SyntaxError):
        return t  # a word: a scheme's name
    if isinstance(value, (int, float, str)) or (
            isinstance(value, (list, tuple)) and all(isinstance(v, (int, float, list, tuple)) for v in value)):
        return value
    raise InputError(f"model spec {spec!r}: {name}={t} is neither a number, a list of numbers nor a word")


def _split_pairs(text: str) -> list[str]:
    """Split ``a=1,b=[1,2]`` at the commas outside brackets."""
    parts, depth, cur = [], 0, ""
    for ch in text:
        if ch in "[(":
            depth += 1
        elif ch in "])":
            depth -= 1
        if ch == "," and depth == 0:
            parts.append(cur)
            cur = ""
        else:
            cur += ch
    parts.append(cur)
    return [p for p in (q.strip() for q in parts) if p]


def _overrides(text: str, spec: str) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for pair in _split_pairs(text):
        name, eq, raw = pair.partition("=")
        name = name.strip()
        if not eq or not name.isidentifier():
            raise InputError(
                f"model spec {spec!r}: {pair!r} is not NAME=VALUE; write e.g. heston:kappa=2,theta=0.04")
        if name in out:
            raise InputError(f"model spec {spec!r}: parameter {name!r} is given twice")
        out[name] = _value(raw, spec, name)
    return out


def parse_model_spec(text: str) -> ModelSpec:
    """Parse a spec (see the module docstring); raises :class:`InputError` on bad syntax."""
    spec = str(text).strip()
    if not spec:
        raise InputError("empty model spec; give a shipped model's name (heston) or a file (my_model.py)")
    # the target ends at the first ':' after a '.py' or, for a name or folder, at the first ':'
    idx, ext = spec.find(".py:"), 3
    if idx < 0:
        idx, ext = spec.find(".toml:"), 5
    if idx >= 0:
        target, rest = spec[: idx + ext], spec[idx + ext + 1:]
    elif spec.endswith((".py", ".toml")):
        target, rest = spec, ""
    else:
        target, _, rest = spec.partition(":")
    parts = rest.split(":", 1) if rest else []
    cls: str | None = None
    over = ""
    if parts:
        if "=" in parts[0]:
            over = rest
        else:
            cls = parts[0].strip() or None
            over = parts[1] if len(parts) > 1 else ""
            if cls is not None and not cls.isidentifier():
                raise InputError(f"model spec {spec!r}: {cls!r} is not a class name")
    return ModelSpec(spec, target.strip(), cls, _overrides(over, spec) if over else {})


def _instantiate(cls: type[Model], overrides: dict[str, Any], spec: str) -> Model:
    where = declared_at(cls)
    try:
        model = cls(**overrides)
    except LimitcaseError as exc:
        params = ", ".join(cls.param_specs()) or "see its __init__"
        more = "" if "its parameters" in str(exc) else f" (its parameters: {params})"
        raise InputError(f"model spec {spec!r}: {where}: class {cls.__name__}: {exc}{more}") from exc
    except TypeError as exc:
        raise InputError(
            f"model spec {spec!r}: {where}: class {cls.__name__} cannot be made from "
            f"{overrides or 'its defaults'}: {exc}; give every constructor argument a default or pass it "
            "as NAME=VALUE") from exc
    except Exception as exc:
        raise InputError(f"model spec {spec!r}: {where}: class {cls.__name__} raised "
                         f"{type(exc).__name__}: {exc} when made") from exc
    try:
        checked_normals_per_step(model)
    except LimitcaseError as exc:
        raise InputError(str(exc)) from exc
    return model


def resolve_models(text: str, failures: list | None = None) -> list[Model]:
    """Every model a spec names: one for a shipped name or ``file.py:Class``, each class of a
    file or folder otherwise (overrides then need exactly one class). With ``failures`` (a
    list), a file found in a folder that does not import is appended there as a
    :class:`~limitcase.loader.LoadFailure` and the other files are still searched."""
    from ..loader import load_models

    s = parse_model_spec(text)
    if not s.is_path:
        known = {k.lower(): v for k, v in SHIPPED_MODELS.items()}
        cls = known.get(s.target.lower())
        if cls is None:
            raise InputError(
                f"unknown model {s.target!r}; the models are: {', '.join(SHIPPED_MODELS)} "
                "(or give a .py file of Model classes, e.g. my_model.py or my_model.py:MyModel)")
        if s.class_name is not None:
            raise InputError(f"model spec {text!r}: a shipped model takes NAME=VALUE overrides after ':', "
                             f"not a class name; {s.class_name!r} has no value: write "
                             f"{s.target}:{s.class_name}=VALUE")
        return [_instantiate(cls, s.overrides, s.text)]
    path = Path(s.target)
    if path.suffix == ".toml":  # an external simulator declared in a small file
        from .external import external_from_config

        try:
            cls = external_from_config(path)
        except LimitcaseError as exc:
            raise InputError(str(exc)) from exc
        if s.class_name not in (None, cls.__name__):
            raise InputError(f"model spec {text!r}: {path} declares {cls.__name__}, not {s.class_name!r}")
        return [_instantiate(cls, s.overrides, s.text)]
    selector = f"{path}:{s.class_name}" if s.class_name else str(path)
    classes = load_models([selector], failures=failures)
    if not classes and failures:
        return []
    if not classes:
        raise InputError(f"{path}: no Model classes defined there (a subclass of limitcase.models.Model, "
                         "not marked abstract = True)")
    if s.overrides and len(classes) > 1:
        names = ", ".join(c.__name__ for c in classes)
        raise InputError(f"model spec {text!r}: {path} defines {len(classes)} models ({names}); "
                         f"pick one for the overrides: {path}:{classes[0].__name__}:...")
    return [_instantiate(c, s.overrides, s.text) for c in classes]


def resolve_model(text: str) -> Model:
    """The one model a spec names (a file with several models needs ``file.py:Class``)."""
    models = resolve_models(text)
    if len(models) != 1:
        names = ", ".join(type(m).__name__ for m in models)
        raise InputError(f"model spec {text!r} names {len(models)} models ({names}); pick one with "
                         f"{parse_model_spec(text).target}:ClassName")
    return models[0]
