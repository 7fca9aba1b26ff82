"""Convergent cross mapping triage from Python: data frames in, data frames out.

Every function runs the same Rust pipeline as the ``ccm-triage`` command line, with the
command line's option names and defaults, so the same seed gives the same numbers::

    import pandas as pd, ccm_triage
    result = ccm_triage.scan(pd.read_csv("demo-data/sound.csv"), seed=7)
    result.labels          # labels.csv as a DataFrame
    result.write("sound-run")  # exactly the files `ccm-triage scan` writes

Caution: a label is evidence from one method under its assumptions, not proof of causation;
confirm it with domain knowledge and experiments.

Tables come back as pandas DataFrames when pandas is installed, otherwise as NumPy
structured arrays (``HAVE_PANDAS`` says which). Long runs release the GIL and stop on
Ctrl-C with ``KeyboardInterrupt``, leaving no files behind. Bad input raises
:class:`TriageError`, a subclass of ``ValueError``, with the command line's message.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
import sys
from typing import Any, Callable, Dict, List, Mapping, Optional, Sequence, Tuple, Union

import numpy as np

from . import _native
from ._native import TriageError

try:  # pandas is optional
    import pandas as _pd

    HAVE_PANDAS = True
except ImportError:  # pragma: no cover - exercised by the no-pandas test in a subprocess
    _pd = None
    HAVE_PANDAS = False

# pandas 3 reads floats exactly by default and deprecates the option older ones need for it.
_EXACT_FLOATS = (
    {"float_precision": "round_trip"}
    if _pd is not None and int(_pd.__version__.split(".")[0]) < 3 else {}
)

__all__ = [
    "HAVE_PANDAS",
    "Result",
    "cross_map",
    "TriageError",
    "evaluate",
    "label",
    "model_card",
    "read_table",
    "scan",
    "simulate",
    "table_csv",
    "train",
]

_DEFAULTS = _native.defaults()
__version__ = _DEFAULTS["version"]

# Column kinds of the result files (the files' own header order is kept); every other
# column holds numbers, an empty field meaning "not available" (NaN).
_TEXT = {"driver", "response", "variable", "verdict", "reasons", "model_head", "kind",
         "system", "family", "label", "truth", "rule_of_thumb"}
_INTEGER = {"library_size", "replicate", "lag", "surrogate", "E", "tau", "driver_index",
            "response_index"}

Table = Any  # a pandas DataFrame, or a NumPy structured array without pandas


def read_table(data: bytes, kinds: bool = True) -> Table:
    """A result file's bytes as a DataFrame (or structured array), values exactly as written.

    Text columns stay text (an empty field is ``""``), whole-number columns are integers, and
    every other column is ``float64`` parsed with Python's correctly rounded ``float``, with
    an empty field as NaN. ``kinds=False`` leaves the typing to pandas' own inference.
    """
    text = data.decode("utf-8")
    if not kinds and _pd is not None:
        return _pd.read_csv(io.StringIO(text), **_EXACT_FLOATS)
    rows = list(csv.reader(io.StringIO(text)))
    header, body = rows[0], rows[1:]
    columns = list(zip(*body)) if body else [()] * len(header)
    out: Dict[str, np.ndarray] = {}
    for name, col in zip(header, columns):
        if name in _TEXT or (not kinds and not _numeric(col)):
            out[name] = np.array(col, dtype=object)
        elif name in _INTEGER and all(v != "" for v in col):
            out[name] = np.array([int(v) for v in col], dtype=np.int64)
        else:
            out[name] = np.array([float(v) if v != "" else math.nan for v in col],
                                 dtype=np.float64)
    if _pd is not None:
        return _pd.DataFrame(out, columns=header)
    dtype = [(n, out[n].dtype) for n in header]
    arr = np.empty(len(body), dtype=dtype)
    for n in header:
        arr[n] = out[n]
    return arr


def _numeric(col: Sequence[str]) -> bool:
    try:
        for v in col:
            if v != "":
                float(v)
        return True
    except ValueError:
        return False


def _cell(v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, (float, np.floating)):
        f = float(v)
        return "" if math.isnan(f) else repr(f)
    if isinstance(v, (bool, np.bool_)):
        return str(int(v))
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    if _pd is not None and v is _pd.NA:
        return ""
    return str(v)


def table_csv(data: Any) -> bytes:
    """The CSV bytes a table is read from: a header row, then one row per time point.

    ``data`` is a pandas DataFrame (its index is not a column: use ``df.reset_index()`` to
    keep it), a mapping of names to 1-D arrays, or a NumPy structured array. Floats are
    written in shortest round-trip form, so the pipeline reads exactly the values given;
    NaN and None become empty cells (missing values).
    """
    if _pd is not None and isinstance(data, _pd.DataFrame):
        names = [str(c) for c in data.columns]
        cols = [data[c].tolist() for c in data.columns]
    elif isinstance(data, np.ndarray) and data.dtype.names:
        names = list(data.dtype.names)
        cols = [data[n].tolist() for n in names]
    elif isinstance(data, Mapping):
        names = [str(k) for k in data.keys()]
        cols = []
        for k in data.keys():
            col = np.asarray(data[k])
            if col.ndim != 1:
                raise TriageError(
                    f"column `{k}` has shape {col.shape}; give one 1-D array per series"
                )
            cols.append(col.tolist())
    else:
        raise TypeError(
            "give a pandas DataFrame, a dict of 1-D NumPy arrays, a NumPy structured array "
            f"or the path of a CSV file, not {type(data).__name__}"
        )
    lengths = {len(c) for c in cols}
    if len(lengths) > 1:
        raise TriageError(
            "the columns have different lengths ("
            + ", ".join(f"{n}: {len(c)}" for n, c in zip(names, cols))
            + "); give every series one value per time point, NaN where missing"
        )
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(names)
    for row in zip(*cols):
        w.writerow([_cell(v) for v in row])
    return buf.getvalue().encode("utf-8")


def _source(data: Any) -> Tuple[Optional[bytes], Optional[str], str]:
    """(CSV bytes, path, name in messages) of a table argument."""
    if isinstance(data, (str, os.PathLike)):
        p = os.fspath(data)
        return None, p, p
    kind = "DataFrame" if (_pd is not None and isinstance(data, _pd.DataFrame)) else (
        "structured array" if isinstance(data, np.ndarray) else "dict")
    return table_csv(data), None, f"<{kind}>"


def _band(review_band: Union[None, str, Sequence[float]]) -> str:
    if review_band is None:
        return _DEFAULTS["review_band"]
    if isinstance(review_band, str):
        return review_band
    lo, hi = review_band
    return f"{lo},{hi}"


def _sizes(sizes: Union[int, str, Sequence[int]]) -> str:
    if isinstance(sizes, str):
        return sizes
    if isinstance(sizes, (int, np.integer)):
        return str(int(sizes))
    return ",".join(str(int(s)) for s in sizes)


class _Bar:
    """A one-line progress bar on stderr (``progress=True``)."""

    def __init__(self) -> None:
        self.stage = None

    def __call__(self, stage: str, done: int, total: int) -> None:
        width = 30
        filled = width if total == 0 else int(width * min(done, total) / total)
        sys.stderr.write(f"\r{stage:>12} [{'=' * filled}{' ' * (width - filled)}] {done}/{total}")
        if done >= total:
            sys.stderr.write("\n")
        sys.stderr.flush()


def _progress(progress: Union[bool, Callable[[str, int, int], Any], None]):
    if progress is True:
        return _Bar()
    if progress in (False, None):
        return None
    if callable(progress):
        return progress
    raise TypeError("progress is True, False or a callable(stage, done, total)")


def _note(progress: Any):
    if progress in (False, None):
        return None
    return lambda text: print(text, file=sys.stderr)


def _engine(seed, dim, max_dim, delay, sizes, replicates, theiler_window, max_lag,
            surrogates, period, no_seasonal_surrogates) -> Dict[str, Any]:
    return dict(seed=seed, dim=dim, max_dim=max_dim, delay=delay, sizes=_sizes(sizes),
                replicates=replicates, theiler_window=theiler_window, max_lag=max_lag,
                surrogates=surrogates, period=period,
                no_seasonal_surrogates=no_seasonal_surrogates)


class Result:
    """The result of :func:`scan` or :func:`label`: the files ``ccm-triage scan`` writes.

    Attributes (DataFrames with the CSV files' columns, values and row order; NumPy
    structured arrays without pandas; ``None`` where the run has no such file, e.g. the
    ``embedding`` of a :func:`label` run): ``labels``, ``curves``, ``features``,
    ``embedding``, ``lags``, ``surrogates``; ``run`` is run.json as a dict, ``report_html``
    the review report, ``counts`` the pairs per verdict and ``notes`` the run's notes (the
    work estimate).
    """

    def __init__(self, native: Any) -> None:
        self._native = native
        files = native.tables()
        self._files = files

        def get(name: str) -> Optional[Table]:
            return read_table(files[name]) if name in files else None

        self.labels = get("labels.csv")
        self.curves = get("curves.csv")
        self.features = get("features.csv")
        self.embedding = get("embedding.csv")
        self.lags = get("lags.csv")
        self.surrogates = get("surrogates.csv")
        self.run: Dict[str, Any] = json.loads(native.run_json())
        causal, non_causal, review = native.counts()
        self.counts = {"causal": causal, "non-causal": non_causal, "review": review}
        self.notes = list(native.notes())

    @property
    def report_html(self) -> str:
        """report.html's text."""
        return self._native.report_html()

    def csv_bytes(self, name: str) -> bytes:
        """The bytes of one CSV result file (e.g. ``"labels.csv"``) as ``write`` writes it."""
        return self._files[name]

    def write(self, dir: Union[str, os.PathLike]) -> None:
        """Write exactly the files ``ccm-triage scan`` writes (report and run.json included)
        into ``dir``: the folder is locked for the write, no file may replace an input, each
        file is written atomically and run.json last."""
        self._native.write(os.fspath(dir))

    def __repr__(self) -> str:
        c = self.counts
        return (f"<ccm_triage.Result: {self.run.get('pairs')} pairs, {c['causal']} causal, "
                f"{c['non-causal']} non-causal, {c['review']} to review>")


def scan(data: Any, time: Optional[str] = None, seed: int = 1, *, dim: Optional[int] = None,
         max_dim: int = 10, delay: Optional[int] = None,
         sizes: Union[int, str, Sequence[int]] = 12, replicates: int = 100,
         theiler_window: Optional[int] = None, max_lag: Optional[int] = None,
         surrogates: int = 39, period: Optional[int] = None,
         no_seasonal_surrogates: bool = False,
         review_band: Union[None, str, Tuple[float, float]] = None,
         model: Union[None, str, os.PathLike] = None, over_budget: bool = False,
         progress: Union[bool, Callable[[str, int, int], Any]] = False,
         drivers: Optional[Sequence[str]] = None, responses: Optional[Sequence[str]] = None,
         delimiter: Optional[str] = None, decimal_comma: bool = False,
         uneven_steps: str = "refuse") -> Result:
    """Label every ordered pair of series in a table (``ccm-triage scan``).

    Parameters
    ----------
    data : DataFrame, dict of 1-D arrays, structured array, or path
        The table: one column per series, optionally a time column. NaN or None marks a
        missing value. A path is read as the command line reads the file.
    time : str, optional
        Name of the time column (``--time-column``; default: a first column named ``t``,
        ``time``, ``date``, ``datetime``, ``year``, ``month``, ``week`` or ``day``, any case;
        numbers or ISO 8601 dates and date-times in equal steps).
    seed : int
        Master seed of the random libraries and surrogates (``--seed``, default 1).
    dim : int, optional
        Embedding dimension for every variable (``--dim``; default: chosen per variable by
        simplex projection).
    max_dim : int
        Largest embedding dimension tried when choosing it (``--max-dim``, default 10).
    delay : int, optional
        Embedding delay in time steps for every variable (``--delay``; default: chosen).
    sizes : int, str or list of int
        Library sizes: a count of log-spaced sizes or an increasing list (``--sizes``,
        default 12).
    replicates : int
        Random libraries per library size (``--replicates``, default 100).
    theiler_window : int, optional
        Neighbours this close in time to the estimated point are excluded
        (``--theiler-window``; default: chosen from the embedding).
    max_lag : int, optional
        Largest absolute cross-map lag of the lag profile (``--max-lag``; default: chosen).
    surrogates : int
        Surrogate drivers of each kind (phase-randomised and seasonal) per pair
        (``--surrogates``, default 39).
    period : int, optional
        Seasonal period in time steps kept by every variable's seasonal surrogates
        (``--period``; default: each variable's own dominant cycle).
    no_seasonal_surrogates : bool
        Make the seasonal surrogates plain phase-randomised ones
        (``--no-seasonal-surrogates``).
    review_band : (lo, hi) or "lo,hi", optional
        Probabilities inside it are sent to review (``--review-band``; default the verdict
        model's band, 0.3,0.7).
    model : path, optional
        Model file (``--model``; default: the built-in model).
    over_budget : bool
        Run even when the estimated work is above the budget of one process
        (``--over-budget``).
    progress : bool or callable
        ``True`` draws a bar on stderr and prints the work estimate; a callable gets
        ``(stage, done, total)`` as the run advances.
    drivers, responses : list of str, optional
        Scan only these drivers and these responses (``--drivers``, ``--responses``; default:
        every series). Only the manifolds the chosen pairs need are computed.
    delimiter : str, optional
        Field separator of a file given by path (``--delimiter``: ``,`` by default, ``;``,
        ``tab``, ``|`` or another single character).
    decimal_comma : bool
        Numbers in a file given by path use a decimal comma (``--decimal-comma``).
    uneven_steps : str
        When the time axis has uneven steps: ``"refuse"`` (default), ``"fill-gaps"`` or
        ``"as-equal"`` (``--uneven-steps``).

    Returns
    -------
    Result
        Its ``labels``, ``curves``, ``features``, ``embedding``, ``lags`` and ``surrogates``
        equal the CSV files of ``ccm-triage scan`` on the same table and options.

    Raises
    ------
    TriageError
        (a ``ValueError``) for bad input or options, with the command line's message.
    KeyboardInterrupt
        On Ctrl-C; no file is written.
    """
    table, path, source = _source(data)
    if path is None and (delimiter is not None or decimal_comma):
        raise TriageError("delimiter and decimal_comma describe a file: give the table as a "
                          "path, or pass the data itself without them")
    engine = _engine(seed, dim, max_dim, delay, sizes, replicates, theiler_window, max_lag,
                     surrogates, period, no_seasonal_surrogates)
    native = _native.scan(table, path, source, time, engine, _band(review_band),
                          None if model is None else os.fspath(model), over_budget,
                          _progress(progress), _note(progress), delimiter=delimiter,
                          decimal_comma=decimal_comma, uneven_steps=uneven_steps,
                          drivers=_names(drivers, "drivers"),
                          responses=_names(responses, "responses"))
    return Result(native)


def _names(names: Optional[Sequence[str]], what: str) -> Optional[List[str]]:
    """A list of series names, or None for every series; a lone string is one name."""
    if names is None:
        return None
    if isinstance(names, str):
        return [names]
    out = list(names)
    if not all(isinstance(n, str) for n in out):
        raise TriageError(f"{what}: give series names as strings")
    return out


def label(curves: Any, *, review_band: Union[None, str, Tuple[float, float]] = None,
          model: Union[None, str, os.PathLike] = None) -> Result:
    """Label ensembles computed elsewhere (``ccm-triage label``).

    ``curves`` is a table in the curves.csv format (columns driver, response, library_size,
    replicate, skill), such as ``scan(...).curves``, or the path of such a file. Only
    curve-shape features exist for such ensembles, so the model's curve-only head scores
    them. ``review_band`` and ``model`` are as in :func:`scan`.
    """
    table, path, source = _source(curves)
    native = _native.label(table, path, source, _band(review_band),
                           None if model is None else os.fspath(model))
    return Result(native)


def simulate(spec: Union[str, os.PathLike], out: Union[None, str, os.PathLike] = None, *,
             progress: Union[bool, Callable[[str, int, int], Any]] = False) -> Dict[str, Any]:
    """Simulate the labelled coupled systems of a spec file (``ccm-triage simulate``).

    Returns ``{"systems": {id: table}, "truth": table}``; with ``out`` the command's files
    are written there too (truth.csv last).
    """
    raw = _native.simulate(os.fspath(spec), None if out is None else os.fspath(out),
                           _progress(progress))
    return {
        "systems": {k: read_table(v, kinds=False) for k, v in raw["systems"].items()},
        "truth": read_table(raw["truth"], kinds=False),
    }


def train(spec: Union[str, os.PathLike], out: Union[str, os.PathLike], *,
          suite: Union[None, str, os.PathLike] = None, seed: int = 1,
          dim: Optional[int] = None, max_dim: int = 10, delay: Optional[int] = None,
          sizes: Union[int, str, Sequence[int]] = 12, replicates: int = 100,
          theiler_window: Optional[int] = None, max_lag: Optional[int] = None,
          surrogates: int = 39, period: Optional[int] = None,
          no_seasonal_surrogates: bool = False,
          progress: Union[bool, Callable[[str, int, int], Any]] = False) -> Dict[str, Any]:
    """Train and calibrate a model on simulated systems (``ccm-triage train``).

    Writes model.bin, its card and the training set into ``out`` once the fit is done (an
    interrupted run writes nothing) and returns the model card as a dict. ``suite`` is a
    validation spec (``--suite``); the other options are the engine options of :func:`scan`.
    """
    engine = _engine(seed, dim, max_dim, delay, sizes, replicates, theiler_window, max_lag,
                     surrogates, period, no_seasonal_surrogates)
    card = _native.train(os.fspath(spec), os.fspath(out),
                         None if suite is None else os.fspath(suite), engine,
                         _progress(progress), _note(progress))
    return json.loads(card)


def evaluate(spec: Union[str, os.PathLike], *, model: Union[None, str, os.PathLike] = None,
             out: Union[None, str, os.PathLike] = None, seed: int = 1,
             dim: Optional[int] = None, max_dim: int = 10, delay: Optional[int] = None,
             sizes: Union[int, str, Sequence[int]] = 12, replicates: int = 100,
             theiler_window: Optional[int] = None, max_lag: Optional[int] = None,
             surrogates: int = 39, period: Optional[int] = None,
             no_seasonal_surrogates: bool = False,
             review_band: Union[None, str, Tuple[float, float]] = None,
             progress: Union[bool, Callable[[str, int, int], Any]] = False) -> Dict[str, Any]:
    """Measure a model on simulated systems it was not trained on (``ccm-triage evaluate``).

    Returns ``{"metrics": dict, "predictions": table, "summary": str}`` (metrics.json,
    predictions.csv and the printed comparison with the rule of thumb); with ``out`` the
    command's files are written there too.
    """
    engine = _engine(seed, dim, max_dim, delay, sizes, replicates, theiler_window, max_lag,
                     surrogates, period, no_seasonal_surrogates)
    metrics, predictions, summary = _native.evaluate(
        os.fspath(spec), None if model is None else os.fspath(model),
        None if out is None else os.fspath(out), engine, _band(review_band),
        _progress(progress))
    return {"metrics": json.loads(metrics), "predictions": read_table(predictions),
            "summary": summary}


def model_card(model: Union[None, str, os.PathLike] = None, *, markdown: bool = False):
    """The card of a model file (default: the built-in model), as ``ccm-triage model-card``.

    Returns the card as a dict (``--json``), or with ``markdown=True`` the Markdown text the
    command prints (after its ``model:`` identity line).
    """
    card, md, identity = _native.model_card(None if model is None else os.fspath(model))
    if markdown:
        return f"model: {identity}\n\n{md}"
    return json.loads(card)


def cross_map(response: Sequence[float], driver: Sequence[float], *, e: int, tau: int = 1,
              theiler: int = 0, library: Sequence[int], lag: int = 0) -> Tuple[np.ndarray, float]:
    """One cross map with an explicit library, the building block of every ensemble.

    Estimates ``driver(t + lag)`` from the ``(e, tau)`` delay embedding of ``response``,
    using only the delay vectors at the times in ``library`` (neighbours closer than
    ``theiler`` steps in time to the estimated point are excluded). Returns the estimates
    (NaN where a state is invalid or has no neighbours) and their Pearson skill against the
    observed driver values.
    """
    est, skill = _native.cross_map([float(v) for v in response], [float(v) for v in driver],
                                   int(e), int(tau), int(theiler), [int(t) for t in library],
                                   int(lag))
    return np.asarray(est, dtype=np.float64), skill
