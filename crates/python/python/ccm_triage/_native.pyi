"""Type stubs of the compiled module ``ccm_triage._native`` (see ``src/lib.rs``)."""

from os import PathLike
from typing import Any, Callable, Dict, List, Optional, Tuple, Union

_Path = Union[str, PathLike[str]]
_Progress = Optional[Callable[[str, int, int], Any]]
_Note = Optional[Callable[[str], Any]]

class TriageError(ValueError):
    """Bad input or a refused run; the message is the command line's."""

class Run:
    """A finished labelling run, its files in memory until ``write``."""

    def tables(self) -> Dict[str, bytes]: ...
    def run_json(self) -> str: ...
    def report_html(self) -> str: ...
    def counts(self) -> Tuple[int, int, int]: ...
    def notes(self) -> List[str]: ...
    def write(self, dir: _Path) -> None: ...

def defaults() -> Dict[str, Any]: ...
def scan(
    data: Optional[bytes],
    path: Optional[_Path],
    source: str,
    time_column: Optional[str],
    engine: Dict[str, Any],
    review_band: str,
    model: Optional[_Path],
    over_budget: bool,
    progress: _Progress = None,
    note: _Note = None,
    delimiter: Optional[str] = None,
    decimal_comma: bool = False,
    uneven_steps: Optional[str] = None,
    drivers: Optional[List[str]] = None,
    responses: Optional[List[str]] = None,
) -> Run: ...
def label(
    data: Optional[bytes],
    path: Optional[_Path],
    source: str,
    review_band: str,
    model: Optional[_Path],
) -> Run: ...
def simulate(
    spec: _Path, out: Optional[_Path] = None, progress: _Progress = None
) -> Dict[str, Any]: ...
def train(
    spec: _Path,
    out: _Path,
    suite: Optional[_Path],
    engine: Dict[str, Any],
    progress: _Progress = None,
    note: _Note = None,
) -> str: ...
def evaluate(
    spec: _Path,
    model: Optional[_Path],
    out: Optional[_Path],
    engine: Dict[str, Any],
    review_band: str,
    progress: _Progress = None,
) -> Tuple[str, bytes, str]: ...
def model_card(model: Optional[_Path] = None) -> Tuple[str, str, str]: ...
def cross_map(
    response: List[float],
    driver: List[float],
    e: int,
    tau: int,
    theiler: int,
    library_times: List[int],
    lag: int = 0,
) -> Tuple[List[float], float]: ...
