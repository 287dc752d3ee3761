"""Type stubs of the copyloop package: every public name with its signature."""

from typing import Any, Dict, List, Optional, Tuple, Union

import numpy as np
import numpy.typing as npt

_Value = Union[int, float, str]
_Time = Union[float, str, None]

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

class NetworkError(Exception):
    message: str
    file: str
    line: int
    column: int
    reason: str
    def __init__(self, message: str, file: str, line: int, column: int, reason: str) -> None: ...

class Check:
    species: List[str]
    reactions: List[str]
    stoichiometry: npt.NDArray[np.int64]
    conservation_laws: List[Dict[str, Any]]
    motifs: List[Dict[str, Any]]
    document: Dict[str, Any]
    def to_json(self) -> str: ...

class Simulation:
    method: str
    replicates: int
    seed: int
    species: List[str]
    times: npt.NDArray[np.float64]
    mean: npt.NDArray[np.float64]
    sd: npt.NDArray[np.float64]
    document: Dict[str, Any]
    def to_json(self) -> str: ...
    def to_pandas(self) -> Any: ...

class Steady:
    document: Dict[str, Any]
    def to_json(self) -> str: ...

class MotifFlux:
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
    document: Dict[str, Any]

class Reconciliation:
    replicates: int
    seed: int
    motifs: List[MotifFlux]
    ensemble: npt.NDArray[np.float64]
    ensemble_ci95: npt.NDArray[np.float64]
    langmuir: npt.NDArray[np.float64]
    tqssa: npt.NDArray[np.float64]
    ode: npt.NDArray[np.float64]
    observations: List[Dict[str, Any]]
    fit: Optional[Dict[str, Any]]
    plan: Dict[str, Any]
    document: Dict[str, Any]
    @property
    def verdicts(self) -> Dict[str, str]: ...
    def to_json(self) -> str: ...
    def to_pandas(self) -> Any: ...

class NoiseAtVolume:
    volume_l: Optional[float]
    replicates: int
    species: List[str]
    clamped: npt.NDArray[np.bool_]
    mean: npt.NDArray[np.float64]
    mean_ci95: npt.NDArray[np.float64]
    variance: npt.NDArray[np.float64]
    variance_ci95: npt.NDArray[np.float64]
    cv: npt.NDArray[np.float64]
    cv_ci95: npt.NDArray[np.float64]
    fano: npt.NDArray[np.float64]
    fano_ci95: npt.NDArray[np.float64]
    lna_mean: npt.NDArray[np.float64]
    lna_variance: npt.NDArray[np.float64]
    lna_cv: npt.NDArray[np.float64]
    exact_mean: npt.NDArray[np.float64]
    exact_variance: npt.NDArray[np.float64]
    exact_fano: npt.NDArray[np.float64]
    plan: Dict[str, Any]
    document: Dict[str, Any]

class Noise:
    seed: int
    volumes: List[NoiseAtVolume]
    document: Dict[str, Any]
    def to_json(self) -> str: ...
    def to_pandas(self) -> Any: ...

class SpeciesDistribution:
    clamped: bool
    mean: npt.NDArray[np.float64]
    variance: npt.NDArray[np.float64]
    fano: npt.NDArray[np.float64]
    p_zero: npt.NDArray[np.float64]
    marginal: npt.NDArray[np.float64]

class StationaryDistribution:
    truncation_error: float
    states: int
    species: Dict[str, Dict[str, Any]]
    fluxes: Dict[str, float]
    document: Dict[str, Any]

class Distribution:
    truncation_error: float
    states: int
    times: npt.NDArray[np.float64]
    species: Dict[str, SpeciesDistribution]
    stationary: Optional[StationaryDistribution]
    document: Dict[str, Any]
    def to_json(self) -> str: ...
    def to_pandas(self, marginals: bool = ...) -> Any: ...

class Network:
    @property
    def warnings(self) -> List[str]: ...
    def with_params(self, **values: _Value) -> Network: ...
    def check(self) -> Check: ...
    def simulate(
        self,
        t_end: float,
        replicates: int = ...,
        method: str = ...,
        grid: int = ...,
        seed: int = ...,
        threads: Optional[int] = ...,
        epsilon: float = ...,
        window: float = ...,
        progress: bool = ...,
    ) -> Simulation: ...
    def steady(self) -> Steady: ...
    def reconcile(
        self,
        replicates: int = ...,
        t_end: _Time = ...,
        burn_in: _Time = ...,
        observe: Union[str, List[str], Dict[str, str], None] = ...,
        fit: Optional[str] = ...,
        precision: Optional[float] = ...,
        max_replicates: int = ...,
        tolerance: float = ...,
        from_initial: bool = ...,
        seed: int = ...,
        threads: Optional[int] = ...,
        progress: bool = ...,
        exact_states: int = ...,
    ) -> Reconciliation: ...
    def noise(
        self,
        replicates: int = ...,
        t_end: _Time = ...,
        burn_in: _Time = ...,
        volumes: Union[str, List[str], None] = ...,
        seed: int = ...,
        threads: Optional[int] = ...,
        progress: bool = ...,
        exact_states: int = ...,
    ) -> Noise: ...
    def distribution(
        self,
        t_end: _Time = ...,
        grid: int = ...,
        species: Union[str, List[str], None] = ...,
        stationary: bool = ...,
        tolerance: float = ...,
        max_states: Optional[int] = ...,
        threads: Optional[int] = ...,
    ) -> Distribution: ...

def load(path: str, **overrides: _Value) -> Network: ...
def parse(text: str, name: str = ..., **overrides: _Value) -> Network: ...
