"""A model whose paths come from the user's own simulator, run as an external command.

Many pricing libraries are not Python. :class:`ExternalModel` lets such a simulator supply
the paths: every block of paths the engine asks for becomes one run of a command (an
argument list, never a shell) that reads the dates from a file and writes the simulated
prices to an array file in the format of ``docs/simulator-files.md`` (the "path array" of
limitcase: a 24-byte header, then little-endian float64). The audits and every check then
run on it as on a Python model.

Declaring one::

    class MyEngine(ExternalModel):
        command = ("./my_engine", "--seed", "{seed}", "--paths", "{paths}",
                   "--dates", "{times_file}", "--out", "{output}", "--vol", "{vol}")
        spot = Param(100.0, low=0.0, low_open=True)
        rate = Param(0.05, low=-1.0, high=1.0)
        dividend = Param(0.02, low=-1.0, high=1.0)
        vol = Param(0.2, low=0.0, high=5.0)

The market the checks and audits assume (spot, short rate, dividend yield) is the model's
``Param`` values, and they are passed to the command through placeholders, so ``replace``,
``--model file.py:MyEngine:vol=0.3`` and the degenerations change what the simulator is
told. Placeholders (Python's ``{name}`` syntax, ``{{`` for a literal brace):

``{seed}``        a non-negative integer below 2**63, drawn from the engine's generator of
                  the block: the same run seed gives the same seeds, hence the same numbers
                  when the simulator is deterministic given its seed
``{paths}``       the number of paths to simulate
``{dates}``       the number of dates
``{assets}``      the number of assets (``n_assets``)
``{times_file}``  a text file of the dates in years, one per line, increasing, all > 0
``{times}``       the same dates, comma-separated, on the command line
``{output}``      the file the command must write (a path array; or a ``.npy`` array)
``{here}``        the folder of the file that defines the model class
``{NAME}``        the value of the model's parameter NAME

The engine still hands the model a block of standard normals (it does not know that the
model will not use them); the external model ignores them. Its randomness is the
simulator's, seeded from the engine's stream, so the paths of different blocks, seeds and
runs are independent as long as the simulator's generator is.
"""

from __future__ import annotations

import math
import shlex
import struct
import subprocess
import sys
import tempfile
from pathlib import Path
from string import Formatter
from typing import Any, ClassVar, Sequence

import numpy as np

from ..errors import DeclarationError, ModelError
from .base import Model, Simulated, declared_at

__all__ = ["ExternalModel", "external_from_config", "read_path_array", "write_path_array", "PATH_ARRAY_MAGIC",
           "PLACEHOLDERS"]

PATH_ARRAY_MAGIC = b"LCPATHS1"
"""The first 8 bytes of a path array file (ASCII)."""

_HEADER = struct.Struct("<8sIIII")  # magic, paths, dates, assets, planes

PLACEHOLDERS = ("seed", "paths", "dates", "assets", "times_file", "times", "output", "here")
"""The placeholders every command may use besides the model's parameters."""

STDERR_SHOWN = 2000
"""Characters of the simulator's standard error shown in a failure message (its end)."""


def write_path_array(path: str | Path, prices: np.ndarray, step_var: np.ndarray | None = None) -> None:
    """Write ``prices`` (``(paths, dates)`` or ``(paths, dates, assets)``) and optionally the
    integrated variances (same shape) as a path array file (``docs/simulator-files.md``)."""
    s = np.asarray(prices, dtype="<f8")
    if s.ndim == 2:
        s = s[:, :, None]
    planes = [s]
    if step_var is not None:
        v = np.asarray(step_var, dtype="<f8").reshape(s.shape)
        planes.append(v)
    with open(path, "wb") as fh:
        fh.write(_HEADER.pack(PATH_ARRAY_MAGIC, s.shape[0], s.shape[1], s.shape[2], len(planes)))
        for p in planes:
            fh.write(np.ascontiguousarray(p).tobytes())


def read_path_array(path: str | Path) -> tuple[np.ndarray, np.ndarray | None]:
    """Read a path array file (or a ``.npy`` array): ``(prices, step_var or None)``, prices
    of shape ``(paths, dates, assets)``. Raises :class:`ModelError` naming the file and what is
    wrong with it."""
    p = Path(path)
    data = p.read_bytes()
    if data[:6] == b"\x93NUMPY":
        try:
            a = np.load(p, allow_pickle=False)
        except Exception as exc:
            raise ModelError(f"{p}: not a readable .npy array: {exc}") from exc
        if a.ndim == 2:
            a = a[:, :, None]
        if a.ndim != 3:
            raise ModelError(f"{p}: a .npy path array must have 2 or 3 dimensions (paths, dates[, assets]); "
                             f"it has shape {a.shape}")
        return np.asarray(a, dtype=float), None
    if len(data) < _HEADER.size:
        raise ModelError(f"{p}: {len(data)} bytes is shorter than the {_HEADER.size}-byte header of a path array")
    magic, n, d, a, planes = _HEADER.unpack_from(data)
    if magic != PATH_ARRAY_MAGIC:
        raise ModelError(f"{p}: does not start with {PATH_ARRAY_MAGIC.decode()} (the first 8 bytes are {magic!r}); "
                         "write the path array header of docs/simulator-files.md, or a .npy array")
    if planes not in (1, 2):
        raise ModelError(f"{p}: planes = {planes} in the header; it must be 1 (prices) or 2 (prices, variances)")
    count = n * d * a
    want = _HEADER.size + 8 * count * planes
    if len(data) != want:
        raise ModelError(f"{p}: the header says {n} paths x {d} dates x {a} assets x {planes} plane(s), "
                         f"{want} bytes in all, but the file has {len(data)} bytes")
    values = np.frombuffer(data, dtype="<f8", offset=_HEADER.size).astype(float)
    s = values[:count].reshape(n, d, a)
    v = values[count:].reshape(n, d, a) if planes == 2 else None
    return s, v


class ExternalModel(Model):
    """Base of a model simulated by an external command (see the module docstring).

    Class attributes: ``command`` (the argument template, a tuple of strings), ``timeout``
    (seconds per run of the command), ``exact`` (whether the simulator has no time-step
    bias; a discretised one says ``exact = False``, declares a ``substeps`` parameter and
    passes ``{substeps}`` to the command), ``n_assets``. A one-asset model declares ``spot``
    and ``dividend`` parameters (and ``rate``); a multi-asset one overrides ``initial()``
    and ``dividend_yields()``.
    """

    abstract = True
    command: ClassVar[tuple[str, ...]] = ()
    timeout: ClassVar[float] = 60.0
    exact: ClassVar[bool] = True
    here: ClassVar[str | None] = None
    """The folder ``{here}`` names (default: the folder of the file defining the class)."""

    def __init_subclass__(cls, **kwargs: Any) -> None:
        super().__init_subclass__(**kwargs)
        if not vars(cls).get("abstract", False):
            _check_command(cls)

    # -- the market the checks assume --------------------------------------------------
    def initial(self) -> np.ndarray:
        return np.array([float(self.spot)])  # type: ignore[attr-defined]

    def dividend_yields(self) -> np.ndarray:
        return np.array([float(self.dividend)])  # type: ignore[attr-defined]

    def normals_per_step(self) -> int:
        return 1  # the engine's normals are not used; one per step keeps its buffers small

    # -- simulation ----------------------------------------------------------------------
    def argv(self, times: np.ndarray, paths: int, seed: int, times_file: str, output: str) -> list[str]:
        """The command's arguments with the placeholders filled in."""
        values: dict[str, Any] = dict(self.params())
        values.update(
            seed=int(seed), paths=int(paths), dates=int(times.size), assets=int(self.n_assets),
            times_file=times_file, times=",".join(repr(float(t)) for t in times), output=output,
            here=type(self).here or _folder_of(type(self)),
        )
        try:
            return [str(a).format_map(values) for a in type(self).command]
        except (KeyError, ValueError, IndexError) as exc:
            raise ModelError(f"{type(self).__name__}: command {list(type(self).command)!r} cannot be filled in: "
                             f"{type(exc).__name__}: {exc}") from exc

    def _simulate(self, times: np.ndarray, z: np.ndarray, rng: np.random.Generator) -> Simulated:
        n = z.shape[0]
        seed = int(rng.integers(0, 2**63 - 1, dtype=np.int64))
        s, v = self.run(times, n, seed)
        if v is None:
            # no variances written: a product that reads them gets NaN and is reported as an error
            v = np.full((1, times.size, self.n_assets), np.nan)
        return Simulated(s=s, step_var=v)

    def run(self, times: Sequence[float], paths: int, seed: int) -> tuple[np.ndarray, np.ndarray | None]:
        """Run the command once: ``paths`` paths at ``times`` from ``seed``. Returns the
        prices ``(paths, dates, assets)`` and the variances (or None); raises
        :class:`ModelError` naming the command for anything that goes wrong."""
        t = np.asarray(times, dtype=float)
        name = type(self).__name__
        with tempfile.TemporaryDirectory(prefix="limitcase-sim-") as tmp:
            times_file = str(Path(tmp) / "times.txt")
            output = str(Path(tmp) / "paths.lcp")
            Path(times_file).write_text("".join(f"{float(x)!r}\n" for x in t))
            argv = self.argv(t, paths, seed, times_file, output)
            shown = shlex.join(argv)
            try:
                proc = subprocess.run(argv, stdin=subprocess.DEVNULL, capture_output=True,
                                      timeout=float(type(self).timeout), check=False)
            except FileNotFoundError as exc:
                raise ModelError(f"{name}: the simulator command cannot be started: {argv[0]!r} not found "
                                 f"({shown}); give its full path or put it on PATH") from exc
            except PermissionError as exc:
                raise ModelError(f"{name}: the simulator command cannot be started: {argv[0]!r} is not "
                                 f"executable ({shown})") from exc
            except OSError as exc:
                raise ModelError(f"{name}: the simulator command cannot be started ({shown}): {exc}") from exc
            except subprocess.TimeoutExpired as exc:
                raise ModelError(f"{name}: the simulator command did not finish within {type(self).timeout:g} s "
                                 f"({shown}); raise {name}.timeout or make it faster") from exc
            err = _tail(proc.stderr)
            if proc.returncode != 0:
                raise ModelError(f"{name}: the simulator command exited with status {proc.returncode} ({shown})"
                                 + (f"; its standard error ends: {err}" if err else "; it wrote nothing to "
                                    "standard error"))
            if not Path(output).exists():
                raise ModelError(f"{name}: the simulator command exited 0 but wrote no {{output}} file ({shown})"
                                 + (f"; its standard error ends: {err}" if err else ""))
            try:
                s, v = read_path_array(output)
            except ModelError as exc:
                raise ModelError(f"{name}: the simulator command ({shown}) wrote a bad file: {exc}") from exc
        want = (int(paths), t.size, int(self.n_assets))
        if s.shape != want:
            raise ModelError(f"{name}: the simulator command ({shown}) wrote prices of shape "
                             f"(paths, dates, assets) = {s.shape}; expected {want}")
        bad = ~np.isfinite(s)
        if bad.any():
            i, j, k = (int(x[0]) for x in np.nonzero(bad))
            raise ModelError(f"{name}: the simulator command ({shown}) wrote {int(bad.sum())} NaN or infinite "
                             f"price(s); the first at path {i}, date {float(t[j])!r} (column {j}), asset {k}")
        if v is not None and not np.all(np.isfinite(v)):
            raise ModelError(f"{name}: the simulator command ({shown}) wrote NaN or infinite variances")
        return s, v


def _folder_of(cls: type) -> str:
    f = getattr(sys.modules.get(cls.__module__), "__file__", None)
    return str(Path(f).resolve().parent) if f else str(Path.cwd())


def _tail(raw: bytes | None) -> str:
    text = (raw or b"").decode("utf-8", "replace").strip()
    if len(text) > STDERR_SHOWN:
        text = "..." + text[-STDERR_SHOWN:]
    return text


def _check_command(cls: type) -> None:
    """At class definition: the command is a non-empty list of strings whose placeholders are
    known (naming the file, class and placeholder otherwise)."""
    where = f"{declared_at(cls)}: model class {cls.__qualname__}"
    cmd = getattr(cls, "command", ())
    if isinstance(cmd, str):
        raise DeclarationError(f"{where}: command is one string {cmd!r}; give a tuple of arguments, e.g. "
                         f"{tuple(shlex.split(cmd))!r} (it is run without a shell)")
    if not isinstance(cmd, (tuple, list)) or not cmd or not all(isinstance(a, str) for a in cmd):
        raise DeclarationError(f"{where}: command = {cmd!r}; give a non-empty tuple of strings, e.g. "
                         "(\"./my_engine\", \"--seed\", \"{seed}\", \"--out\", \"{output}\")")
    known = set(PLACEHOLDERS) | set(cls._param_specs)  # type: ignore[attr-defined]
    for arg in cmd:
        try:
            fields = [f for _, f, _, _ in Formatter().parse(arg) if f is not None]
        except ValueError as exc:
            raise DeclarationError(f"{where}: command argument {arg!r}: {exc} (write {{{{ for a literal brace)") from exc
        for f in fields:
            base = f.split(".")[0].split("[")[0]
            if base not in known:
                raise DeclarationError(f"{where}: command argument {arg!r} uses the unknown placeholder {{{f}}}; "
                                 f"known: {', '.join(sorted(known))}")
    if "{output}" not in "".join(cmd):
        raise DeclarationError(f"{where}: the command never names {{output}}, the file it must write the paths to")
    specs = cls._param_specs  # type: ignore[attr-defined]
    for hook, param in (("initial", "spot"), ("dividend_yields", "dividend")):
        if getattr(cls, hook) is getattr(ExternalModel, hook) and param not in specs:
            raise DeclarationError(f"{where}: no {param!r} parameter; declare {param} = Param(...) or define {hook}()")
    t = getattr(cls, "timeout", None)
    if isinstance(t, bool) or not isinstance(t, (int, float)) or not (t > 0 and math.isfinite(t)):
        raise DeclarationError(f"{where}: timeout = {t!r}; give the seconds a run may take, a number > 0")



CONFIG_KEYS = ("name", "command", "timeout", "exact", "reference", "params")
"""The keys of an external model's TOML file (see docs/simulator-files.md)."""

PARAM_KEYS = ("default", "low", "high", "low_open", "high_open", "integer", "doc")


def external_from_config(path: str | Path) -> type[ExternalModel]:
    """An :class:`ExternalModel` class from a small TOML file, for a simulator whose authors
    write no Python (keys: ``name``, ``command``, ``timeout``, ``exact``, ``reference``, and a
    ``[params]`` table; see ``docs/simulator-files.md``). Raises :class:`ModelError` naming
    the file and the key for anything wrong in it."""
    import tomllib

    from ..params import Param

    p = Path(path)
    try:
        doc = tomllib.loads(p.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise ModelError(f"{p}: no such file") from None
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise ModelError(f"{p}: not a valid TOML file: {exc}") from exc
    unknown = sorted(set(doc) - set(CONFIG_KEYS))
    if unknown:
        raise ModelError(f"{p}: unknown key {unknown[0]!r}; the keys are: {', '.join(CONFIG_KEYS)}")
    name = doc.get("name", p.stem.title().replace("_", "").replace("-", ""))
    if not isinstance(name, str) or not name.isidentifier():
        raise ModelError(f"{p}: name = {name!r} must be a name usable as a class name (letters, digits, _)")
    if "command" not in doc:
        raise ModelError(f"{p}: no 'command'; give command = [\"./my_engine\", \"--out\", \"{{output}}\", ...]")
    body: dict[str, Any] = {"__module__": __name__, "__doc__": f"External simulator declared in {p}.",
                            "here": str(p.resolve().parent),
                            "command": tuple(doc["command"]) if isinstance(doc["command"], list) else doc["command"]}
    for key in ("timeout", "exact"):
        if key in doc:
            body[key] = doc[key]
    params = doc.get("params", {})
    if not isinstance(params, dict):
        raise ModelError(f"{p}: [params] must be a table of NAME = number or NAME = {{default = ..., low = ...}}")
    for pname, spec in params.items():
        where = f"{p}: params.{pname}"
        if not pname.isidentifier() or pname in PLACEHOLDERS:
            raise ModelError(f"{where}: not a usable parameter name (it must be a name, not one of "
                             f"{', '.join(PLACEHOLDERS)})")
        if isinstance(spec, dict):
            bad = sorted(set(spec) - set(PARAM_KEYS))
            if bad or "default" not in spec:
                raise ModelError(f"{where}: " + (f"unknown key {bad[0]!r}" if bad else "no 'default'")
                                 + f"; the keys are: {', '.join(PARAM_KEYS)}")
            try:
                body[pname] = Param(**spec)
            except Exception as exc:
                raise ModelError(f"{where}: {exc}") from exc
        elif isinstance(spec, (int, float)) and not isinstance(spec, bool):
            body[pname] = Param(float(spec))
        else:
            raise ModelError(f"{where} = {spec!r}: give a number or a table {{default = ..., low = ..., high = ...}}")
    reference = doc.get("reference")
    if reference is not None:
        if reference != "black-scholes":
            raise ModelError(f"{p}: reference = {reference!r}; the one known is \"black-scholes\" (the simulator "
                             "claims geometric Brownian motion with the parameters spot, rate, dividend, vol)")
        missing = [k for k in ("spot", "rate", "dividend", "vol") if k not in params]
        if missing:
            raise ModelError(f"{p}: reference = \"black-scholes\" needs the parameter {missing[0]!r} in [params]")
        body["european_price"] = _black_scholes_price
    try:
        return type(name, (ExternalModel,), body)
    except (ModelError, DeclarationError) as exc:
        raise ModelError(f"{p}: {exc}") from exc


def _black_scholes_price(self: Any, kind: str, strike: float, maturity: float) -> float:
    """Black-Scholes (1973) calls and puts at the model's spot, rate, dividend and vol: the
    reference a configuration declaring ``reference = "black-scholes"`` claims."""
    from ..errors import NoReference
    from ..references import black_scholes

    if kind not in ("call", "put"):
        raise NoReference(f"{type(self).__name__} (reference = \"black-scholes\") prices calls and puts, not {kind!r}")
    return float(black_scholes(self.spot, strike, maturity, self.rate, self.dividend, self.vol, kind))
