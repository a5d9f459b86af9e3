"""pinflow from Python: fixed-point data, second-order RG flows, phase
diagrams, operator searches and edges of coupled-wire and Luttinger-liquid
models.

A thin layer over the Rust library (the extension ``pinflow._native``):
every number is computed by the same code as the ``pinflow`` command, and
arrives as that command's own output (its JSON report, its CSV table), so
DataFrames carry the command's CSV column names and values to the last
digit. Computation runs with the GIL released, so threads can evaluate
points in parallel.

    >>> import pinflow
    >>> m = pinflow.Model.load("flows/laughlin_third.toml")
    >>> r = m.flow(**{"lambda": 0.5})       # or m.flow(lambda_=0.5)
    >>> r.outcome, r.winner, r.ell_star
    >>> s = m.scan(x=("lambda", 0.3, 0.95, 27), y=("g", 0.0, 1.0, 21))
    >>> s.grid("ell_star")                  # 2-D array for imshow/contourf

Errors: :class:`InputError` (``.file``, ``.key``, ``.message``) for bad
input, :class:`RunError` for a run that failed. See docs/python.md.
"""

from __future__ import annotations

import io
import json
import os
import tempfile
from typing import Any, Dict, Iterator, List, Mapping, Optional, Sequence, Tuple, Union

import numpy as np
import pandas as pd

from . import _native
from ._native import InputError, RunError

__all__ = [
    "Model",
    "FlowResult",
    "ScanResult",
    "EdgesResult",
    "InputError",
    "RunError",
    "FLOW_OPTIONS",
]

__version__: str = _native.__version__

#: Keyword arguments that are flow options (the flags of ``pinflow flow``
#: with ``_`` for ``-``); every other keyword argument is a model parameter.
FLOW_OPTIONS: Tuple[str, ...] = tuple(_native.FLOW_OPTIONS)

Axis = Union[str, Tuple[Any, ...]]


# pandas before 3 parses floats exactly only when asked; from 3 on that is
# the default and the argument is deprecated.
_EXACT: Dict[str, Any] = {} if int(pd.__version__.split(".")[0]) >= 3 else {"float_precision": "round_trip"}


def _input_error(key: str, message: str) -> InputError:
    """An InputError about a keyword argument, like those of the library."""
    err = InputError(f"keyword arguments: {key}: {message}")
    err.file, err.key, err.message = "keyword arguments", key, message
    return err


def _frame(csv_text: str) -> pd.DataFrame:
    """A CSV table written by the library as a DataFrame: its header is the
    columns, numbers are parsed exactly (round trip), empty cells are NaN."""
    return pd.read_csv(io.StringIO(csv_text), keep_default_na=False, na_values=["", "NaN"], **_EXACT)


class _Report:
    """A report of the library: ``.report`` is its JSON as Python objects,
    ``.text`` what the command prints; keys of the report read as
    attributes."""

    def __init__(self, json_text: str, text: str):
        self.report: Dict[str, Any] = json.loads(json_text)
        self.text: str = text

    def __getattr__(self, name: str) -> Any:
        report = self.__dict__.get("report", {})
        if name in report:
            return report[name]
        raise AttributeError(f"{type(self).__name__} has no attribute or report key {name!r}")

    def __str__(self) -> str:
        return self.text


class FlowResult(_Report):
    """The second-order RG flow at one point (``pinflow flow``).

    Attributes: ``outcome`` (strong, spinful, gapless, undecided, ...),
    ``winner`` (the first term to reach strong coupling, or None),
    ``ell_star``, ``phase`` (the phase of the final pinned set, or None),
    ``terms`` (DataFrame: the CSV table of ``pinflow flow --format csv``),
    ``trajectory`` (DataFrame indexed by ell: the trajectory.csv of
    ``pinflow flow --out``), ``report`` (every field of the JSON report) and
    ``text``.
    """

    def __init__(self, json_text: str, csv_text: str, text: str, trajectory_csv: str):
        super().__init__(json_text, text)
        self.terms: pd.DataFrame = _frame(csv_text)
        self.trajectory: pd.DataFrame = _frame(trajectory_csv).set_index("ell")

    @property
    def outcome(self) -> str:
        """The outcome word (docs/commands.md)."""
        return self.report["outcome"]

    @property
    def winner(self) -> Optional[str]:
        """The first term to reach strong coupling, or None."""
        return self.report.get("winner")

    @property
    def ell_star(self) -> Optional[float]:
        """ell at which the winner reached strong coupling, or None."""
        return self.report.get("ell_star")

    @property
    def phase(self) -> Optional[Dict[str, Any]]:
        """The phase of the final pinned set of the staged flow, or None."""
        return self.report.get("phase")

    def __repr__(self) -> str:
        return f"<FlowResult outcome={self.outcome!r} winner={self.winner!r} ell_star={self.ell_star!r}>"


class EdgesResult(_Report):
    """What a pinned set of terms leaves (``pinflow edges``): ``table`` (the
    CSV table of the gapless theories), ``report`` (every field of the JSON
    report; its keys also read as attributes) and ``text``."""

    def __init__(self, json_text: str, csv_text: str, text: str):
        super().__init__(json_text, text)
        self.table: pd.DataFrame = _frame(csv_text)

    def __repr__(self) -> str:
        return f"<EdgesResult theories={len(self.table)}>"


class ScanResult:
    """A scan (``pinflow scan``): ``points`` (DataFrame of points.csv, x
    varying fastest), ``summary`` (summary.json as a dict), ``csv`` (the
    text of points.csv, byte for byte), ``axes`` ([(name, values)]) and
    ``dir`` (the output directory, or None when it was temporary).
    Unpacks as ``points, summary = m.scan(...)``."""

    def __init__(self, csv_text: str, summary: Dict[str, Any], directory: Optional[str]):
        self.csv: str = csv_text
        self.points: pd.DataFrame = _frame(csv_text)
        self.summary: Dict[str, Any] = summary
        self.dir: Optional[str] = directory
        self.axes: List[Tuple[str, np.ndarray]] = []
        stride = 1
        for spec in summary["axes"]:  # "name=min:max:n[:log]"
            name, rest = spec.split("=", 1)
            n = int(rest.split(":")[2])
            column = self.points[name].to_numpy()
            self.axes.append((name, column[: stride * n : stride]))
            stride *= n

    def grid(self, column: str) -> np.ndarray:
        """The column as an array over the grid: shape (ny, nx) for a plane
        (row iy, column ix, so ``imshow(..., origin="lower")`` puts x
        across), shape (nx,) for a line."""
        values = self.points[column].to_numpy()
        shape = tuple(len(v) for _, v in reversed(self.axes))
        return values.reshape(shape)

    def __iter__(self) -> Iterator[Any]:
        return iter((self.points, self.summary))

    def __repr__(self) -> str:
        return f"<ScanResult points={len(self.points)} axes={[n for n, _ in self.axes]}>"


def _axis_spec(axis: Optional[Axis], key: str) -> Optional[str]:
    """(name, min, max, n[, "log"]) as the command's NAME=MIN:MAX:N[:log];
    a string is passed as it is."""
    if axis is None or isinstance(axis, str):
        return axis
    if not isinstance(axis, (tuple, list)) or len(axis) not in (4, 5):
        raise _input_error(key, f"expected (name, min, max, n) or (name, min, max, n, \"log\"), found {axis!r}")
    name, lo, hi, n = axis[:4]
    try:
        spec = f"{name}={float(lo)!r}:{float(hi)!r}:{int(n)}"
    except (TypeError, ValueError):
        raise _input_error(key, f"expected numbers for min, max and n, found {axis!r}") from None
    return spec + (f":{axis[4]}" if len(axis) == 5 else "")


class Model:
    """A model, validated and ready for evaluation. Build one with
    :meth:`Model.load` or :meth:`Model.from_toml`.

    Parameter points: every method takes the model's parameters as keyword
    arguments (``m.dims(g=0.3)``), or as a dict ``point={"lambda": 0.5}``
    (needed for names that are Python keywords; ``lambda_=0.5`` also
    works). Parameters not given keep the model's defaults (:attr:`params`).
    """

    def __init__(self, native: "_native.Model"):
        self._m = native

    @classmethod
    def load(cls, path: Union[str, "os.PathLike[str]"]) -> "Model":
        """Load a model file (TOML; docs/model-format.md)."""
        return cls(_native.Model.load(os.fspath(path)))

    @classmethod
    def from_toml(cls, text: str, file: str = "<string>") -> "Model":
        """Read a model from TOML text; ``file`` names it in errors."""
        return cls(_native.Model.from_toml(text, file))

    @property
    def name(self) -> str:
        """The model's name."""
        return self._m.name

    @property
    def file(self) -> str:
        """The model's file (or the name given to :meth:`from_toml`)."""
        return self._m.file

    @property
    def params(self) -> Dict[str, float]:
        """Parameter names and their default values (in the order of the
        reports' ``parameters``)."""
        return dict(self._m.params())

    @property
    def terms(self) -> List[str]:
        """The names of the model's terms."""
        return self._m.terms()

    @property
    def source(self) -> str:
        """The model's TOML text, as read."""
        return self._m.source

    def __repr__(self) -> str:
        return f"<pinflow.Model {self.name!r} from {self.file!r}>"

    def __reduce__(self) -> Tuple[Any, Tuple[str, str]]:
        # Pickled as its text and file name, so that a process pool can
        # take a Model (rebuilt by from_toml: the same model and bytes).
        return (Model.from_toml, (self.source, self.file))

    def _split(self, point: Optional[Mapping[str, float]], kwargs: Dict[str, Any], options: bool) -> Tuple[Dict[str, float], Dict[str, Any]]:
        """Parameters and flow options out of the keyword arguments."""
        params = self.params
        values: Dict[str, Any] = dict(point or {})
        flow: Dict[str, Any] = {}
        for key, value in kwargs.items():
            if options and key in FLOW_OPTIONS:
                flow[key] = value
                continue
            name = key
            if key not in params and key.endswith("_") and key[:-1] in params:
                name = key[:-1]
            if name in values:
                raise _input_error(key, f"the parameter `{name}` is given twice")
            values[name] = value
        return values, flow

    def dims(self, point: Optional[Mapping[str, float]] = None, *, pin: Sequence[str] = (), wires: Optional[Sequence[Union[int, str]]] = None, force: bool = False, **params: float) -> pd.DataFrame:
        """Exact and fixed-point data of every term at one point
        (``pinflow dims``): a DataFrame with the columns of
        ``pinflow dims --format csv``. ``pin``: terms to pin; every term
        then also gets its dimension in the residual theory. ``wires``
        (arrays): every term's dimension against array size instead, e.g.
        ``[4, 8, 16, "infinite"]`` (``pinflow dims --wires``). The full
        JSON report is in ``df.attrs["report"]``, the text in
        ``df.attrs["text"]``. ``force``: evaluate above the dense size
        limit (``--force``; otherwise such a model raises InputError).
        """
        values, _ = self._split(point, params, options=False)
        j, c, t = self._m.dims(values, list(pin), None if wires is None else list(wires), force)
        df = _frame(c)
        df.attrs["report"] = json.loads(j)
        df.attrs["text"] = t
        return df

    def flow(self, point: Optional[Mapping[str, float]] = None, *, out: Optional[str] = None, force: bool = False, **kwargs: Any) -> FlowResult:
        """The second-order RG flow at one point (``pinflow flow``).

        Keyword arguments are model parameters or flow options (
        ``ell_max``, ``y_strong``, ``floor``, ``closure`` ("pairs" or
        "none"), ``closure_bound``, ``closure_range``, ``rtol``, ``atol``,
        ``max_steps``, ``q_points``, ``stages``; hunted competitors:
        ``competitors`` (the bound DELTA), ``competitor_coupling``,
        ``competitor_range``, ``competitor_symmetry``;
        docs/flow-options.md).
        ``out``: also write summary.json, trajectory.csv and the flow
        figure into this directory. ``force``: build the pairs closure
        above its work limit, or flow a dense model above 512 fields
        (``--force``). Raises InputError at a point
        where V is not positive definite, RunError when the integration
        fails.
        """
        values, options = self._split(point, kwargs, options=True)
        j, c, t, traj = self._m.flow(values, options, None if out is None else os.fspath(out), force)
        return FlowResult(j, c, t, traj)

    def scan(self, x: Optional[Axis] = None, y: Optional[Axis] = None, point: Optional[Mapping[str, float]] = None, *, threads: Optional[int] = None, out: Optional[str] = None, force: bool = False, overwrite: bool = False, color_by: str = "phase", **kwargs: Any) -> ScanResult:
        """Flow every point of a line or plane of parameters (``pinflow
        scan``). ``x``, ``y``: (name, min, max, n) or (name, min, max, n,
        "log"), or the command's string "name=min:max:n"; by default the
        model's [scan] table. Other keyword arguments: fixed parameters and
        flow options as for :meth:`flow`. ``threads``: worker threads
        (default all cores; the result does not depend on it). ``out``: keep
        points.csv, summary.json and the figures in this directory (default:
        a temporary directory, removed); it is locked while the scan runs,
        and a folder holding another scan's files is refused unless
        ``overwrite`` (``--overwrite``). ``force``: run grids above the size
        limit, a pairs closure above its work limit and dense models above
        512 fields. ``color_by``:
        "phase" or "winner" for phase.png.
        """
        values, options = self._split(point, kwargs, options=True)
        xs, ys = _axis_spec(x, "x"), _axis_spec(y, "y")
        if out is not None:
            return self._scan_into(os.fspath(out), values, xs, ys, options, threads, force, color_by, overwrite, keep=True)
        with tempfile.TemporaryDirectory(prefix="pinflow-scan-") as d:
            return self._scan_into(d, values, xs, ys, options, threads, force, color_by, overwrite, keep=False)

    def _scan_into(self, d: str, values: Dict[str, float], xs: Optional[str], ys: Optional[str], options: Dict[str, Any], threads: Optional[int], force: bool, color_by: str, overwrite: bool, keep: bool) -> ScanResult:
        summary = self._m.scan(values, xs, ys, options, d, threads, force, color_by, overwrite)
        with open(os.path.join(d, "points.csv"), encoding="utf-8", newline="") as f:
            csv_text = f.read()
        return ScanResult(csv_text, json.loads(summary), d if keep else None)

    def hunt(self, max_dim: float = 2.0, point: Optional[Mapping[str, float]] = None, *, charge: Union[int, str] = 0, spin: Union[int, str] = 0, range: Optional[int] = None, momentum: Optional[str] = None, symmetry: Union[str, Sequence[str]] = "all", force: bool = False, coupling: Optional[float] = None, **params: float) -> pd.DataFrame:
        """Every local operator with scaling dimension up to ``max_dim``,
        found exhaustively (``pinflow hunt``): a DataFrame with the columns
        of ``pinflow hunt --format csv``. Filters: ``charge`` (an integer
        or "any"), ``spin`` (0 or "any"), ``range`` (arrays: most
        consecutive wires), ``momentum`` ("conserved" or "any"),
        ``symmetry`` (which of the model's [[symmetry]] tables filter:
        "all", "none" or a list of names); ``force`` searches above the
        size limit. ``df.attrs`` holds "report" (JSON), "text" and
        "terms_toml" (the [[term]] blocks of ``--emit-terms``, with bare
        coupling ``coupling``, default the model's smallest).
        """
        values, _ = self._split(point, params, options=False)
        j, c, t, toml = self._m.hunt(values, max_dim, charge, spin, range, momentum, force, symmetry, coupling)
        df = _frame(c)
        df.attrs.update(report=json.loads(j), text=t, terms_toml=toml)
        return df

    def edges(self, pin: Sequence[str] = (), point: Optional[Mapping[str, float]] = None, *, window: Optional[int] = None, force: bool = False, **kwargs: Any) -> EdgesResult:
        """What a pinned set of terms leaves (``pinflow edges``): gapped
        pairs, and the K matrix, charges and filling at each end. ``pin``:
        the terms to pin (every translate); by default the flow at the
        point picks them (flow options as for :meth:`flow`). ``window``:
        wires in the window at each end of an open array. ``force``: run
        above the size limit and the closure's work limit (``--force``).
        """
        if isinstance(pin, str):
            pin = [pin]
        values, options = self._split(point, kwargs, options=True)
        j, c, t = self._m.edges(values, list(pin), window, options, force)
        return EdgesResult(j, c, t)


def run_cli(argv: Sequence[str]) -> int:
    """Run the ``pinflow`` command line with these arguments (without the
    program name); returns its exit code. Output goes to the process's
    standard output and error."""
    return _native.run_cli(["pinflow", *argv])
