"""copyloop: stochastic molecular-level simulation of endocrine and pharmacological feedback
loops, from Python, over the same Rust library as the ``copyloop`` command (same engine, same
seeds, same numbers).

copyloop is a research instrument: its output is not a basis for diagnosis or treatment.

    >>> import copyloop
    >>> net = copyloop.load("reactions/gland_loop.crn")
    >>> run = net.simulate(600, replicates=100, seed=1)
    >>> run.mean.shape          # (grid points, species)
"""

from __future__ import annotations

import json as _json
import re as _re
from dataclasses import dataclass, field
from typing import Any, Dict, List, Optional, Tuple, Union

import numpy as np

from . import _native

__all__ = [
    "NetworkError",
    "Network",
    "Check",
    "Simulation",
    "Steady",
    "load",
    "parse",
]

_METHODS = ("direct", "tau", "auto", "ode")


class NetworkError(Exception):
    """Bad network input: ``file``, ``line`` and ``column`` of the first problem, its
    ``reason``, and as ``str()`` every message exactly as the command line prints it."""

    def __init__(self, message: str, file: str, line: int, column: int, reason: str):
        super().__init__(message)
        self.message = message
        self.file = file
        self.line = line
        self.column = column
        self.reason = reason


def _native_call(f, *args):
    try:
        return f(*args)
    except _native.InputError as e:
        raise NetworkError(*e.args) from None


_NUMBER_WITH_UNIT = _re.compile(
    r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$"
)


def _override(name: str, value: Union[int, float, str]) -> Tuple[str, float, Optional[str]]:
    if isinstance(value, bool):
        raise ValueError(f"{name}: expected a number or a string with a unit, got {value!r}")
    if isinstance(value, (int, float, np.integer, np.floating)):
        return (name, float(value), None)
    if isinstance(value, str):
        m = _NUMBER_WITH_UNIT.match(value)
        if not m:
            raise ValueError(f"{name}: expected a number with an optional unit, got {value!r}")
        return (name, float(m.group(1)), m.group(2) or None)
    raise ValueError(f"{name}: expected a number or a string with a unit, got {value!r}")


def _check_int(name: str, value: Any, least: int) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
        raise ValueError(f"{name}: expected an integer, got {value!r}")
    if value < least:
        raise ValueError(f"{name}: must be at least {least}, got {value}")
    return int(value)


def _check_float(name: str, value: Any) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise ValueError(f"{name}: expected a number, got {value!r}")
    return float(value)


@dataclass(frozen=True)
class Check:
    """The compiled view of a network (``copyloop check --json``)."""

    species: List[str]
    reactions: List[str]
    stoichiometry: np.ndarray
    """int64 array (species × reactions): net change of each species per firing."""
    conservation_laws: List[Dict[str, Any]]
    motifs: List[Dict[str, Any]]
    document: Dict[str, Any] = field(repr=False)
    _json: str = field(repr=False)

    def to_json(self) -> str:
        """The document ``copyloop check FILE --json`` prints, byte for byte."""
        return self._json


@dataclass(frozen=True)
class Simulation:
    """A replicate ensemble (``copyloop simulate --json``): grid times, and the ensemble mean
    and standard deviation of every species at every grid point as (points × species)
    arrays; the full document, with finals, time averages and firings, in ``document``."""

    method: str
    replicates: int
    seed: int
    species: List[str]
    times: np.ndarray
    mean: np.ndarray
    sd: np.ndarray
    document: Dict[str, Any] = field(repr=False)
    _json: str = field(repr=False)

    def to_json(self) -> str:
        """The document ``copyloop simulate ... --json`` prints for the same arguments (the
        wall-clock keys ``wall_seconds`` and ``events_per_second`` differ run to run)."""
        return self._json

    def to_pandas(self):
        """Long form: one row per (time, species) with columns time, species, mean, sd."""
        import pandas as pd

        points, n = self.mean.shape
        return pd.DataFrame(
            {
                "time": np.repeat(self.times, n),
                "species": np.tile(np.asarray(self.species, dtype=object), points),
                "mean": self.mean.reshape(-1),
                "sd": self.sd.reshape(-1),
            }
        )


@dataclass(frozen=True)
class Steady:
    """The deterministic steady state reached from the initial state (``copyloop steady``)."""

    document: Dict[str, Any] = field(repr=False)
    _json: str = field(repr=False)

    def to_json(self) -> str:
        """The document ``copyloop steady FILE --json`` prints, byte for byte."""
        return self._json


class Network:
    """A compiled network. Build one with :func:`load` or :func:`parse`."""

    def __init__(self, source: Tuple[str, str, Optional[str]], overrides: Dict[str, Any]):
        kind, where, text = source
        self._source = source
        self._overrides = dict(overrides)
        items = [_override(k, v) for k, v in self._overrides.items()]
        if kind == "file":
            self._native = _native_call(_native.load, where, items)
        else:
            self._native = _native_call(_native.parse, text, where, items)

    def __repr__(self) -> str:
        return f"<copyloop.Network {self._source[1]!r} overrides={self._overrides!r}>"

    @property
    def warnings(self) -> List[str]:
        """Compile warnings, as the command line prints them."""
        return list(self._native.warnings())

    def with_params(self, **values: Union[int, float, str]) -> "Network":
        """A copy with params, species' initial amounts or ``volume`` replaced: a bare number
        is read in the unit the file wrote for that name; a string may carry a unit
        (``kon="2e7 /M/s"``)."""
        merged = dict(self._overrides)
        merged.update(values)
        return Network(self._source, merged)

    def check(self) -> Check:
        """The compiled view: species, reactions, stoichiometry, conservation laws, motifs."""
        text = self._native.check_json()
        doc = _json.loads(text)
        return Check(
            species=[s["name"] for s in doc["species"]],
            reactions=[r["label"] for r in doc["reactions"]],
            stoichiometry=np.asarray(doc["stoichiometry"], dtype=np.int64),
            conservation_laws=doc["conservation_laws"],
            motifs=doc["motifs"],
            document=doc,
            _json=text,
        )

    def simulate(
        self,
        t_end: float,
        replicates: int = 1,
        method: str = "direct",
        grid: int = 101,
        seed: int = 0,
        threads: Optional[int] = None,
        epsilon: float = 0.03,
        window: float = 0.0,
        progress: bool = False,
    ) -> Simulation:
        """Run ``replicates`` trajectories to ``t_end`` seconds (``copyloop simulate``).

        ``method`` is "direct" (exact), "tau", "auto" or "ode"; ``grid`` sample points from 0
        to ``t_end``; replicate r draws from a stream fixed by (seed, r), so results do not
        depend on ``threads``. The GIL is released while replicates run and Ctrl-C raises
        KeyboardInterrupt between blocks of replicates; ``progress=True`` draws a bar."""
        t_end = _check_float("t_end", t_end)
        replicates = _check_int("replicates", replicates, 1)
        grid = _check_int("grid", grid, 0)
        seed = _check_int("seed", seed, 0)
        if threads is not None:
            threads = _check_int("threads", threads, 1)
        epsilon = _check_float("epsilon", epsilon)
        window = _check_float("window", window)
        if method not in _METHODS:
            raise ValueError(f"method: expected one of {', '.join(_METHODS)}, got {method!r}")
        if method == "ode":
            text = self._native.ode_json(t_end, grid)
            doc = _json.loads(text)
            names = [k for k in doc["grid"] if k != "time"]
            g = doc["grid"]
            return Simulation(
                method="ode",
                replicates=0,
                seed=seed,
                species=names,
                times=np.asarray(g["time"], dtype=np.float64),
                mean=np.column_stack([np.asarray(g[n]["mean"], dtype=np.float64) for n in names]),
                sd=np.zeros((len(g["time"]), len(names))),
                document=doc,
                _json=text,
            )
        text, times, mean, sd = self._native.simulate(
            t_end, replicates, method, epsilon, grid, window, seed, threads, progress
        )
        doc = _json.loads(text)
        return Simulation(
            method=method,
            replicates=replicates,
            seed=seed,
            species=[k for k, v in doc["grid"].items() if isinstance(v, dict) and v.get("kind") != "param"],
            times=times,
            mean=mean,
            sd=sd,
            document=doc,
            _json=text,
        )

    def steady(self) -> Steady:
        """The deterministic steady state reached from the initial state."""
        text = self._native.steady_json()
        return Steady(document=_json.loads(text), _json=text)


def load(path: str, **overrides: Union[int, float, str]) -> Network:
    """Load a network file (``.crn``, or SBML by its extension); keyword arguments override
    params as in :meth:`Network.with_params`. Raises NetworkError on bad input, OSError when
    the file cannot be read."""
    return Network(("file", str(path), None), overrides)


def parse(text: str, name: str = "<string>", **overrides: Union[int, float, str]) -> Network:
    """Compile network text; ``name`` stands for the file name in error messages."""
    return Network(("text", name, text), overrides)
