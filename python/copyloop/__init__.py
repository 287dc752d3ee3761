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
    "Reconciliation",
    "MotifFlux",
    "Noise",
    "NoiseAtVolume",
    "Distribution",
    "SpeciesDistribution",
    "StationaryDistribution",
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


_FLAG = _re.compile(r"--([a-z][a-z-]*)")


def _native_call(f, *args):
    """Calls the extension; its bad-input errors become NetworkError, and the command-line
    flags its option errors name (``--burn-in``) become keyword names (``burn_in``)."""
    try:
        return f(*args)
    except _native.InputError as e:
        raise NetworkError(*e.args) from None
    except ValueError as e:
        message = _FLAG.sub(lambda m: m.group(1).replace("-", "_"), str(e))
        raise ValueError(message) from None


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


_TIME_UNITS = {"s": 1.0, "min": 60.0, "h": 3600.0}


def _check_time(name: str, value: Any) -> Optional[float]:
    """A time in seconds: a number of seconds, or a string with a unit (``"10 min"``, ``"2h"``)."""
    if value is None:
        return None
    if isinstance(value, str):
        m = _NUMBER_WITH_UNIT.match(value)
        unit = m.group(2) if m else None
        if not m or (unit and unit not in _TIME_UNITS):
            raise ValueError(
                f"{name}: expected a time such as 600, \"10 min\" or \"2h\" (units s, min, h), got {value!r}"
            )
        return float(m.group(1)) * _TIME_UNITS.get(unit or "s", 1.0)
    return _check_float(name, value)


def _strings(name: str, value: Any) -> List[str]:
    if value is None:
        return []
    if isinstance(value, str):
        return [value]
    out = list(value)
    for v in out:
        if not isinstance(v, str):
            raise ValueError(f"{name}: expected strings, got {v!r}")
    return out


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



def _array(values: Any) -> np.ndarray:
    """float64 array of a JSON list, with null (not computed) as NaN."""
    return np.asarray([np.nan if v is None else v for v in values], dtype=np.float64)


def _intervals(values: List[Any]) -> np.ndarray:
    """(n × 2) float64 array of [low, high] pairs, null as NaN."""
    out = np.full((len(values), 2), np.nan)
    for i, v in enumerate(values):
        if v is not None:
            out[i] = v
    return out


@dataclass(frozen=True)
class MotifFlux:
    """One carrier motif reconciled: the flux of its output step in the stationary exact
    ensemble (molecules/s, with its 95 % interval) beside the Langmuir-form, total-QSSA and ODE
    predictions, and the verdict of each ("agrees", "differs" or "undecided")."""

    carrier: str
    ligand: str
    kind: str
    output: str
    ensemble: float
    ensemble_ci95: Tuple[float, float]
    langmuir: float
    tqssa: Optional[float]
    ode: float
    exact: Optional[float]
    relative_difference: float
    verdict: str
    verdicts: Dict[str, Optional[str]]
    document: Dict[str, Any] = field(repr=False)


@dataclass(frozen=True)
class Reconciliation:
    """The result of :meth:`Network.reconcile` (``copyloop reconcile --json``).

    ``motifs`` holds one :class:`MotifFlux` per carrier motif; the arrays hold the same
    figures across motifs, in that order (NaN where a prediction does not apply);
    ``observations``, ``fit``, ``chains``, ``plan`` and the rest are in ``document``."""

    replicates: int
    seed: int
    motifs: List[MotifFlux]
    ensemble: np.ndarray
    """Ensemble flux of each motif's output step (molecules/s)."""
    ensemble_ci95: np.ndarray
    """(motifs × 2) 95 % interval of the ensemble flux."""
    langmuir: np.ndarray
    tqssa: np.ndarray
    ode: np.ndarray
    observations: List[Dict[str, Any]]
    fit: Optional[Dict[str, Any]]
    plan: Dict[str, Any]
    document: Dict[str, Any] = field(repr=False)
    _json: str = field(repr=False)

    @property
    def verdicts(self) -> Dict[str, str]:
        """Each motif's Langmuir-form verdict, keyed "carrier/ligand"."""
        return {f"{m.carrier}/{m.ligand}": m.verdict for m in self.motifs}

    def to_json(self) -> str:
        """The document ``copyloop reconcile FILE ... --json`` prints for the same arguments
        (``wall_seconds`` differs run to run)."""
        return self._json

    def to_pandas(self):
        """One row per motif: carrier, ligand, kind, output, ensemble, ci_low, ci_high,
        langmuir, tqssa, ode, exact, relative_difference, verdict, tqssa_verdict, ode_verdict."""
        import pandas as pd

        return pd.DataFrame(
            {
                "carrier": [m.carrier for m in self.motifs],
                "ligand": [m.ligand for m in self.motifs],
                "kind": [m.kind for m in self.motifs],
                "output": [m.output for m in self.motifs],
                "ensemble": self.ensemble,
                "ci_low": self.ensemble_ci95[:, 0],
                "ci_high": self.ensemble_ci95[:, 1],
                "langmuir": self.langmuir,
                "tqssa": self.tqssa,
                "ode": self.ode,
                "exact": _array([m.exact for m in self.motifs]),
                "relative_difference": _array([m.relative_difference for m in self.motifs]),
                "verdict": [m.verdict for m in self.motifs],
                "tqssa_verdict": [m.verdicts["tqssa"] for m in self.motifs],
                "ode_verdict": [m.verdicts["ode"] for m in self.motifs],
            },
            columns=[
                "carrier", "ligand", "kind", "output", "ensemble", "ci_low", "ci_high",
                "langmuir", "tqssa", "ode", "exact", "relative_difference", "verdict",
                "tqssa_verdict", "ode_verdict",
            ],
        )


def _reconciliation(text: str) -> Reconciliation:
    doc = _json.loads(text)
    motifs = []
    for m in doc["motifs"]:
        v = m["verdicts"]
        motifs.append(
            MotifFlux(
                carrier=m["carrier"],
                ligand=m["ligand"],
                kind=m["kind"],
                output=m["output"],
                ensemble=m["ensemble"]["mean_per_s"],
                ensemble_ci95=tuple(m["ensemble"]["ci95"]),
                langmuir=m["predicted"]["langmuir_per_s"],
                tqssa=m["predicted"]["tqssa_per_s"],
                ode=m["predicted"]["ode_per_s"],
                exact=(m["exact"] or {}).get("mean_per_s"),
                relative_difference=m["relative_difference"],
                verdict=m["verdict"],
                verdicts={
                    "langmuir": v["langmuir"]["verdict"],
                    "tqssa": v["tqssa"]["verdict"] if v["tqssa"] else None,
                    "ode": v["ode"]["verdict"],
                },
                document=m,
            )
        )
    return Reconciliation(
        replicates=doc["replicates"],
        seed=doc["seed"],
        motifs=motifs,
        ensemble=_array([m.ensemble for m in motifs]),
        ensemble_ci95=_intervals([m.ensemble_ci95 for m in motifs]),
        langmuir=_array([m.langmuir for m in motifs]),
        tqssa=_array([m.tqssa for m in motifs]),
        ode=_array([m.ode for m in motifs]),
        observations=doc["observations"],
        fit=doc["fit"],
        plan=doc["plan"],
        document=doc,
        _json=text,
    )


_NOISE_COLUMNS = ("mean", "variance", "cv", "fano", "lna_mean", "lna_variance", "lna_cv",
                  "exact_mean", "exact_variance", "exact_fano")


@dataclass(frozen=True)
class NoiseAtVolume:
    """Stationary noise at one volume: one value per species (in ``species`` order, counts in
    molecules) for each statistic, NaN where it was not computed; ``*_ci95`` are
    (species × 2) 95 % intervals."""

    volume_l: Optional[float]
    replicates: int
    species: List[str]
    clamped: np.ndarray
    mean: np.ndarray
    mean_ci95: np.ndarray
    variance: np.ndarray
    variance_ci95: np.ndarray
    cv: np.ndarray
    cv_ci95: np.ndarray
    fano: np.ndarray
    fano_ci95: np.ndarray
    lna_mean: np.ndarray
    lna_variance: np.ndarray
    lna_cv: np.ndarray
    exact_mean: np.ndarray
    exact_variance: np.ndarray
    exact_fano: np.ndarray
    plan: Dict[str, Any]
    document: Dict[str, Any] = field(repr=False)


@dataclass(frozen=True)
class Noise:
    """The result of :meth:`Network.noise` (``copyloop noise --json``): one
    :class:`NoiseAtVolume` per volume asked for (the file's own when none was)."""

    seed: int
    volumes: List[NoiseAtVolume]
    document: Dict[str, Any] = field(repr=False)
    _json: str = field(repr=False)

    def to_json(self) -> str:
        """The document ``copyloop noise FILE ... --json`` prints for the same arguments
        (``wall_seconds`` differs run to run)."""
        return self._json

    def to_pandas(self):
        """Long form: one row per (volume, species) with columns volume_l, species, clamped,
        mean, mean_ci_low, mean_ci_high, variance, cv, cv_ci_low, cv_ci_high, fano,
        fano_ci_low, fano_ci_high, lna_mean, lna_variance, lna_cv, exact_mean,
        exact_variance, exact_fano."""
        import pandas as pd

        frames = []
        for v in self.volumes:
            n = len(v.species)
            cols: Dict[str, Any] = {
                "volume_l": np.full(n, np.nan if v.volume_l is None else v.volume_l),
                "species": v.species,
                "clamped": v.clamped,
            }
            for c in _NOISE_COLUMNS:
                cols[c] = getattr(v, c)
                if c in ("mean", "cv", "fano"):
                    ci = getattr(v, c + "_ci95")
                    cols[c + "_ci_low"] = ci[:, 0]
                    cols[c + "_ci_high"] = ci[:, 1]
            frames.append(pd.DataFrame(cols))
        return pd.concat(frames, ignore_index=True)


def _noise(text: str) -> Noise:
    doc = _json.loads(text)
    volumes = []
    for v in doc["volumes"]:
        names = list(v["species"])
        rows = [v["species"][n] for n in names]
        arrays = {c: _array([r[c] for r in rows]) for c in _NOISE_COLUMNS}
        cis = {c + "_ci95": _intervals([r[c + "_ci95"] for r in rows])
               for c in ("mean", "variance", "cv", "fano")}
        volumes.append(
            NoiseAtVolume(
                volume_l=v["volume_l"],
                replicates=v["replicates"],
                species=names,
                clamped=np.asarray([r["clamped"] for r in rows], dtype=bool),
                plan=v["plan"],
                document=v,
                **arrays,
                **cis,
            )
        )
    return Noise(seed=doc["seed"], volumes=volumes, document=doc, _json=text)


def _marginals(rows: List[List[float]]) -> np.ndarray:
    """(times × counts) array of marginals of different lengths, padded with zeros (the
    projection gives no probability to counts beyond those it reports)."""
    width = max((len(r) for r in rows), default=0)
    out = np.zeros((len(rows), width))
    for i, r in enumerate(rows):
        out[i, : len(r)] = r
    return out


@dataclass(frozen=True)
class SpeciesDistribution:
    """One species' exact law on the time grid: ``mean``, ``variance``, ``fano`` and ``p_zero``
    per time, and ``marginal[t, n]`` = P(count = n at time t)."""

    clamped: bool
    mean: np.ndarray
    variance: np.ndarray
    fano: np.ndarray
    p_zero: np.ndarray
    marginal: np.ndarray


@dataclass(frozen=True)
class StationaryDistribution:
    """The stationary law: per species (``species[name]``) mean, variance, fano, p_zero and
    ``marginal[n]``; ``fluxes`` is the mean rate of every reaction (events/s)."""

    truncation_error: float
    states: int
    species: Dict[str, Dict[str, Any]]
    fluxes: Dict[str, float]
    document: Dict[str, Any] = field(repr=False)


@dataclass(frozen=True)
class Distribution:
    """The result of :meth:`Network.distribution` (``copyloop distribution --json``): exact
    distributions by finite state projection. ``times`` and ``species`` are empty when only the
    stationary law was asked for; ``truncation_error`` bounds the ℓ¹ error of every
    probability reported."""

    truncation_error: float
    states: int
    times: np.ndarray
    species: Dict[str, SpeciesDistribution]
    stationary: Optional[StationaryDistribution]
    document: Dict[str, Any] = field(repr=False)
    _json: str = field(repr=False)

    def to_json(self) -> str:
        """The document ``copyloop distribution FILE ... --json`` prints for the same
        arguments."""
        return self._json

    def to_pandas(self, marginals: bool = False):
        """Long form on the time grid: one row per (time, species) with columns time, species,
        mean, variance, sd, fano, p_zero; with ``marginals=True`` one row per (time, species,
        count) with columns time, species, count, probability."""
        import pandas as pd

        frames = []
        for name, law in self.species.items():
            if marginals:
                t, n = law.marginal.shape
                frames.append(pd.DataFrame({
                    "time": np.repeat(self.times, n),
                    "species": name,
                    "count": np.tile(np.arange(n, dtype=np.int64), t),
                    "probability": law.marginal.reshape(-1),
                }))
            else:
                frames.append(pd.DataFrame({
                    "time": self.times,
                    "species": name,
                    "mean": law.mean,
                    "variance": law.variance,
                    "sd": np.sqrt(np.maximum(law.variance, 0.0)),
                    "fano": law.fano,
                    "p_zero": law.p_zero,
                }))
        if not frames:
            cols = ["time", "species", "count", "probability"] if marginals else [
                "time", "species", "mean", "variance", "sd", "fano", "p_zero"]
            return pd.DataFrame(columns=cols)
        return pd.concat(frames, ignore_index=True)


def _distribution(text: str) -> Distribution:
    doc = _json.loads(text)
    species = {
        name: SpeciesDistribution(
            clamped=law["clamped"],
            mean=_array(law["mean"]),
            variance=_array(law["variance"]),
            fano=_array(law["fano"]),
            p_zero=_array(law["p_zero"]),
            marginal=_marginals(law["marginal"]),
        )
        for name, law in doc["species"].items()
    }
    st = doc.get("stationary")
    stationary = None
    if st is not None:
        stationary = StationaryDistribution(
            truncation_error=st["truncation_error"],
            states=st["states"],
            species={
                name: dict(law, marginal=np.asarray(law["marginal"], dtype=np.float64))
                for name, law in st["species"].items()
            },
            fluxes=dict(st["fluxes"]),
            document=st,
        )
    return Distribution(
        truncation_error=doc["truncation_error"],
        states=doc["states"],
        times=_array(doc["times"]),
        species=species,
        stationary=stationary,
        document=doc,
        _json=text,
    )


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


    def reconcile(
        self,
        replicates: int = 200,
        t_end: Union[float, str, None] = None,
        burn_in: Union[float, str, None] = None,
        observe: Union[str, List[str], Dict[str, str], None] = None,
        fit: Optional[str] = None,
        precision: Optional[float] = None,
        max_replicates: int = 20_000,
        tolerance: float = 0.05,
        from_initial: bool = False,
        seed: int = 0,
        threads: Optional[int] = None,
        progress: bool = False,
        exact_states: int = 50_000,
    ) -> Reconciliation:
        """Reconcile every carrier motif (``copyloop reconcile``): the flux of its output step
        in a stationary exact ensemble against the Langmuir-form, total-QSSA and ODE
        predictions, with a verdict for each.

        ``t_end`` and ``burn_in`` are seconds or strings with a unit ("2h"; default: a burn-in
        of 5 relaxation times and a window of 20 more); ``observe`` gives observed steady levels as "H=2nM±0.2nM" strings
        (or a dict {"H": "2nM±0.2nM"}); ``fit`` names a param to fit to the first of them;
        ``precision`` adds replicates, up to ``max_replicates``, until every motif's 95 %
        half-width is below that fraction of its mean; ``tolerance`` is the relative difference
        within which a prediction agrees; ``exact_states`` caps the exact stationary law solved
        beside the ensemble (0 skips it). The GIL is released during the run; a Ctrl-C stops
        it before the next replicate and raises KeyboardInterrupt."""
        if isinstance(observe, dict):
            observe = [f"{k}={v}" for k, v in observe.items()]
        args = (
            _check_int("replicates", replicates, 1),
            _check_time("t_end", t_end),
            _check_time("burn_in", burn_in),
            _strings("observe", observe),
            fit,
            None if precision is None else _check_float("precision", precision),
            _check_int("max_replicates", max_replicates, 1),
            _check_float("tolerance", tolerance),
            bool(from_initial),
            _check_int("seed", seed, 0),
            None if threads is None else _check_int("threads", threads, 1),
            bool(progress),
            _check_int("exact_states", exact_states, 0),
        )
        if fit is not None and not isinstance(fit, str):
            raise ValueError(f"fit: expected the name of a param, got {fit!r}")
        return _reconciliation(_native_call(self._native.reconcile_json, *args))

    def noise(
        self,
        replicates: int = 100,
        t_end: Union[float, str, None] = None,
        burn_in: Union[float, str, None] = None,
        volumes: Union[str, List[str], None] = None,
        seed: int = 0,
        threads: Optional[int] = None,
        progress: bool = False,
        exact_states: int = 50_000,
    ) -> Noise:
        """Stationary mean, variance, CV and Fano factor of every species from an exact
        ensemble, beside the linear-noise prediction (``copyloop noise``), optionally at
        several ``volumes`` given with units ("0.1pL", "1pL"), amounts kept as concentrations.
        Times and ``exact_states`` as in :meth:`reconcile`. The GIL is released during the run; a Ctrl-C stops
        it before the next replicate and raises KeyboardInterrupt."""
        args = (
            _check_int("replicates", replicates, 1),
            _check_time("t_end", t_end),
            _check_time("burn_in", burn_in),
            _strings("volumes", volumes),
            _check_int("seed", seed, 0),
            None if threads is None else _check_int("threads", threads, 1),
            bool(progress),
            _check_int("exact_states", exact_states, 0),
        )
        return _noise(_native_call(self._native.noise_json, *args))

    def distribution(
        self,
        t_end: Union[float, str, None] = None,
        grid: int = 51,
        species: Union[str, List[str], None] = None,
        stationary: bool = False,
        tolerance: float = 1e-6,
        max_states: Optional[int] = None,
        threads: Optional[int] = None,
    ) -> Distribution:
        """Exact distributions by finite state projection (``copyloop distribution``): the law
        of every species (or of ``species``) on ``grid`` points from 0 to ``t_end``, and with
        ``stationary=True`` the stationary law. ``tolerance`` bounds the probability allowed to
        leave the projection; ``max_states`` caps its size (default: sized to the memory
        available). Raises ValueError when the projection cannot be solved within them."""
        args = (
            _check_time("t_end", t_end),
            _check_int("grid", grid, 0),
            _strings("species", species),
            bool(stationary),
            _check_float("tolerance", tolerance),
            None if max_states is None else _check_int("max_states", max_states, 1),
            None if threads is None else _check_int("threads", threads, 1),
        )
        return _distribution(_native_call(self._native.distribution_json, *args))

def load(path: str, **overrides: Union[int, float, str]) -> Network:
    """Load a network file (``.crn``, or SBML by its extension); keyword arguments override
    params as in :meth:`Network.with_params`. Raises NetworkError on bad input, OSError when
    the file cannot be read."""
    return Network(("file", str(path), None), overrides)


def parse(text: str, name: str = "<string>", **overrides: Union[int, float, str]) -> Network:
    """Compile network text; ``name`` stands for the file name in error messages."""
    return Network(("text", name, text), overrides)
