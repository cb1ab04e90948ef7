"""Grid geometry and the readers and writers of 2-D maps and 3-D cubes.

A *map* is an array of shape ``(ny, nx)``; a *cube* is an array of shape
``(n_lines, n_traces_per_line, n_samples)`` in the order the traces are stored
(for SEG-Y: the order of :func:`segyio.tools.cube`). Node ``(j, i)`` (row ``j``,
column ``i``) lies at::

    x = x0 + i * dx * cos(r) - j * dy * sin(r)
    y = y0 + i * dx * sin(r) + j * dy * cos(r)

with ``r = rotation_deg`` counter-clockwise from the x (east) axis. Coordinates
and spacings are in metres; ``dy`` may be negative (north-up rasters, left-handed
seismic surveys). Missing values are NaN in memory; a file's own null value is
kept in :attr:`Grid.null_value` so a writer can restore it.

Formats handled here: CSV/XYZ text (x, y, value columns), ``.npy`` and ``.npz``.
SEG-Y lives in :mod:`porecast.io.segy`, chunked processing in
:mod:`porecast.io.cubes`.
"""

from __future__ import annotations

import dataclasses
import json
import math
import os
import zipfile
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal, cast

import numpy as np
from numpy.typing import ArrayLike, NDArray

from porecast.io.atomic import atomic_path

__all__ = [
    "Grid",
    "GridData",
    "SampleAxis",
    "check_same_geometry",
    "dead_trace_mask",
    "iter_chunks",
    "no_data_mask",
    "read_npy",
    "read_npz",
    "read_xyz",
    "write_npy",
    "write_npz",
    "write_xyz",
]

FloatArray = NDArray[np.float64]

#: Header names accepted for the easting and northing columns of CSV/XYZ files.
X_COLUMN_NAMES = ("x", "easting", "east")
Y_COLUMN_NAMES = ("y", "northing", "north")

#: Key of the JSON geometry record inside ``.npz`` files written by :func:`write_npz`.
NPZ_GRID_KEY = "_grid_json"

#: An inferred grid may hold at most this many nodes per data point; beyond it
#: the points are scattered, not gridded, and the reader refuses them.
MAX_EMPTY_NODE_RATIO = 20


# --------------------------------------------------------------------------- geometry


@dataclass(frozen=True)
class SampleAxis:
    """Vertical sample axis of a cube.

    Parameters
    ----------
    domain : {"time", "depth"}
        Two-way time in ms or depth in m (positive down).
    start : float
        First sample, ms or m.
    step : float
        Sample interval, ms or m; must be positive.
    """

    domain: Literal["time", "depth"]
    start: float
    step: float

    def __post_init__(self) -> None:
        if self.domain not in ("time", "depth"):
            raise ValueError(f"domain must be 'time' or 'depth' (got {self.domain!r})")
        if not math.isfinite(self.start):
            raise ValueError(f"sample start must be finite (got {self.start})")
        if not (math.isfinite(self.step) and self.step > 0):
            raise ValueError(f"sample step must be a positive number (got {self.step})")
        object.__setattr__(self, "start", float(self.start))
        object.__setattr__(self, "step", float(self.step))

    @property
    def unit(self) -> str:
        """``"ms"`` for time, ``"m"`` for depth."""
        return "ms" if self.domain == "time" else "m"

    def values(self, n_samples: int) -> FloatArray:
        """Sample positions, array of shape (n_samples,), in :attr:`unit`."""
        return self.start + self.step * np.arange(n_samples, dtype=np.float64)


@dataclass(frozen=True)
class Grid:
    """Geometry of a map or cube (see the module docstring for the node formula).

    Parameters
    ----------
    kind : {"map", "cube"}
        ``"map"``: shape ``(ny, nx)``; ``"cube"``: ``(n_lines, n_per_line, n_samples)``.
    shape : tuple of int
        Array shape.
    x0, y0 : float
        Coordinates of node ``(0, 0)``, m.
    dx, dy : float
        Node spacing along columns (axis 1) and rows (axis 0), m; non-zero.
    rotation_deg : float
        Counter-clockwise angle of the column axis from east, degrees.
    sample_axis : SampleAxis or None
        Required for cubes, absent for maps.
    inlines, crosslines : tuple of int or None
        SEG-Y line numbers. With ``sorting="inline"`` axis 0 runs over
        ``inlines`` and axis 1 over ``crosslines``; with ``"crossline"`` the
        other way round (traces stored crossline by crossline).
    sorting : {"inline", "crossline"} or None
        Trace order of a SEG-Y cube; ``None`` when there are no line numbers.
    attributes : tuple of str
        Names of the attributes stored on this geometry.
    null_value : float or None
        Null value used by the source file (values are NaN in memory).
    georeferenced : bool
        ``False`` for placeholder geometry (unit spacing at the origin, made up
        when a ``.npy`` file came without coordinates); such grids are
        compared by shape only.
    """

    kind: Literal["map", "cube"]
    shape: tuple[int, ...]
    x0: float = 0.0
    y0: float = 0.0
    dx: float = 1.0
    dy: float = 1.0
    rotation_deg: float = 0.0
    sample_axis: SampleAxis | None = None
    inlines: tuple[int, ...] | None = None
    crosslines: tuple[int, ...] | None = None
    sorting: Literal["inline", "crossline"] | None = None
    attributes: tuple[str, ...] = field(default=())
    null_value: float | None = None
    georeferenced: bool = True

    def __post_init__(self) -> None:
        setf = object.__setattr__
        shape = tuple(int(n) for n in self.shape)
        setf(self, "shape", shape)
        if any(n < 1 for n in shape):
            raise ValueError(f"grid shape must have positive sizes (got {shape})")
        if self.kind == "map":
            if len(shape) != 2:
                raise ValueError(f"a map has shape (ny, nx) (got {shape})")
            if self.sample_axis is not None:
                raise ValueError("a map has no sample axis")
        elif self.kind == "cube":
            if len(shape) != 3:
                raise ValueError(f"a cube has shape (n_lines, n_per_line, n_samples) (got {shape})")
            if self.sample_axis is None:
                raise ValueError("a cube needs a sample_axis")
        else:
            raise ValueError(f"kind must be 'map' or 'cube' (got {self.kind!r})")
        for name in ("x0", "y0", "dx", "dy", "rotation_deg"):
            value = float(getattr(self, name))
            if not math.isfinite(value):
                raise ValueError(f"grid {name} must be finite (got {value})")
            setf(self, name, value)
        if self.dx == 0 or self.dy == 0:
            raise ValueError(f"grid spacing must be non-zero (got dx={self.dx}, dy={self.dy})")
        self._check_lines(setf)
        setf(self, "attributes", tuple(str(a) for a in self.attributes))
        if self.null_value is not None:
            setf(self, "null_value", float(self.null_value))

    def _check_lines(self, setf: Any) -> None:
        if self.sorting is None:
            if self.inlines is not None or self.crosslines is not None:
                raise ValueError("inline/crossline numbers need sorting='inline' or 'crossline'")
            return
        if self.sorting not in ("inline", "crossline"):
            raise ValueError(
                f"sorting must be 'inline', 'crossline' or None (got {self.sorting!r})"
            )
        if self.inlines is None or self.crosslines is None:
            raise ValueError("a sorted grid needs both inline and crossline numbers")
        inl = tuple(int(v) for v in self.inlines)
        xl = tuple(int(v) for v in self.crosslines)
        setf(self, "inlines", inl)
        setf(self, "crosslines", xl)
        first, second = (inl, xl) if self.sorting == "inline" else (xl, inl)
        if (len(first), len(second)) != self.shape[:2]:
            raise ValueError(
                f"{self.sorting}-sorted grid of shape {self.shape} needs "
                f"{self.shape[0]} {'inline' if self.sorting == 'inline' else 'crossline'} and "
                f"{self.shape[1]} {'crossline' if self.sorting == 'inline' else 'inline'} "
                f"numbers (got {len(first)} and {len(second)})"
            )

    # ----------------------------------------------------------------- helpers
    @classmethod
    def unit(cls, shape: Sequence[int], *, attributes: Sequence[str] = ()) -> Grid:
        """Placeholder geometry for an array without coordinates.

        Unit spacing from the origin, no rotation; cubes get a time axis from
        0 ms in 1 ms steps. ``georeferenced`` is ``False``.
        """
        shape = tuple(int(n) for n in shape)
        if len(shape) == 2:
            return cls("map", shape, attributes=tuple(attributes), georeferenced=False)
        if len(shape) == 3:
            return cls(
                "cube",
                shape,
                sample_axis=SampleAxis("time", 0.0, 1.0),
                attributes=tuple(attributes),
                georeferenced=False,
            )
        raise ValueError(f"a grid array is 2-D (map) or 3-D (cube) (got shape {shape})")

    @property
    def n_traces(self) -> int:
        """Number of map nodes or cube traces (product of the first two sizes)."""
        return self.shape[0] * self.shape[1]

    def with_attributes(self, attributes: Sequence[str]) -> Grid:
        """Copy with other attribute names."""
        return dataclasses.replace(self, attributes=tuple(attributes))

    def node_xy(self) -> tuple[FloatArray, FloatArray]:
        """Coordinates of every node, two arrays of shape ``shape[:2]``, m."""
        j, i = np.meshgrid(
            np.arange(self.shape[0], dtype=np.float64),
            np.arange(self.shape[1], dtype=np.float64),
            indexing="ij",
        )
        r = math.radians(self.rotation_deg)
        c, s = math.cos(r), math.sin(r)
        x = self.x0 + i * self.dx * c - j * self.dy * s
        y = self.y0 + i * self.dx * s + j * self.dy * c
        return x, y

    def geometry_difference(self, other: Grid) -> str | None:
        """Plain-words description of the first geometric difference, or ``None``.

        Attribute names and null values are not geometry. Grids of which
        either is not georeferenced are compared by shape only. Tolerances:
        spacing 1e-6 relative, origin 1e-3 of the smaller spacing, rotation
        1e-4 degree, sample axis 1e-6 of the sample step.
        """
        if self.shape != other.shape:
            return "shape differs"
        if not (self.georeferenced and other.georeferenced):
            return None
        if self.kind != other.kind:
            return f"kind differs ({self.kind} vs {other.kind})"
        for name in ("dx", "dy"):
            a, b = getattr(self, name), getattr(other, name)
            if not math.isclose(a, b, rel_tol=1e-6):
                return f"{name} differs ({a:g} m vs {b:g} m)"
        tol = 1e-3 * min(abs(self.dx), abs(self.dy))
        if abs(self.x0 - other.x0) > tol or abs(self.y0 - other.y0) > tol:
            return (
                f"origin differs (({self.x0:.3f}, {self.y0:.3f}) m vs "
                f"({other.x0:.3f}, {other.y0:.3f}) m)"
            )
        drot = (self.rotation_deg - other.rotation_deg + 180.0) % 360.0 - 180.0
        if abs(drot) > 1e-4:
            return f"rotation differs ({self.rotation_deg:g} deg vs {other.rotation_deg:g} deg)"
        sa, sb = self.sample_axis, other.sample_axis
        if sa is not None and sb is not None:
            if sa.domain != sb.domain:
                return f"sample domain differs ({sa.domain} vs {sb.domain})"
            if not math.isclose(sa.step, sb.step, rel_tol=1e-9) or abs(sa.start - sb.start) > (
                1e-6 * sa.step
            ):
                return (
                    f"sample axis differs (start {sa.start:g}, step {sa.step:g} {sa.unit} vs "
                    f"start {sb.start:g}, step {sb.step:g} {sb.unit})"
                )
        if (self.sorting, self.inlines, self.crosslines) != (
            other.sorting,
            other.inlines,
            other.crosslines,
        ):
            return "inline/crossline numbering differs"
        return None

    # --------------------------------------------------------------- (de)serialise
    def to_dict(self) -> dict[str, Any]:
        """JSON-serialisable description (for the database or a sidecar file)."""
        out = dataclasses.asdict(self)
        out["shape"] = list(self.shape)
        for key in ("inlines", "crosslines", "attributes"):
            if out[key] is not None:
                out[key] = list(out[key])
        return out

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> Grid:
        """Inverse of :meth:`to_dict`; unknown keys are refused."""
        known = {f.name for f in dataclasses.fields(cls)}
        unknown = set(data) - known
        if unknown:
            raise ValueError(f"unknown grid field(s): {', '.join(sorted(unknown))}")
        kwargs = dict(data)
        if kwargs.get("sample_axis") is not None:
            kwargs["sample_axis"] = SampleAxis(**kwargs["sample_axis"])
        kwargs["shape"] = tuple(kwargs["shape"])
        if "attributes" in kwargs:
            kwargs["attributes"] = tuple(kwargs["attributes"])
        return cls(**kwargs)


@dataclass
class GridData:
    """Attribute arrays sharing one :class:`Grid`.

    Parameters
    ----------
    grid : Grid
        Geometry; ``grid.attributes`` lists the keys of ``values`` in order.
    values : dict of str to ndarray
        Arrays of shape ``grid.shape``; NaN marks missing nodes.
    """

    grid: Grid
    values: dict[str, NDArray[Any]]

    def __post_init__(self) -> None:
        for name, arr in self.values.items():
            if tuple(arr.shape) != self.grid.shape:
                raise ValueError(
                    f"attribute {name!r} has shape {tuple(arr.shape)}, grid shape is "
                    f"{self.grid.shape}"
                )
        if tuple(self.values) != self.grid.attributes:
            self.grid = self.grid.with_attributes(tuple(self.values))


def _shape_of(obj: Any) -> tuple[int, ...]:
    if isinstance(obj, Grid):
        return obj.shape
    if hasattr(obj, "shape"):
        return tuple(int(n) for n in obj.shape)
    return tuple(int(n) for n in obj)


def check_same_geometry(a: Any, b: Any, names: Sequence[str] = ("first", "second")) -> None:
    """Refuse two grids (or arrays) that do not share one geometry.

    Parameters
    ----------
    a, b : Grid, array or shape tuple
        Arrays and shapes are compared by shape; two :class:`Grid` objects by
        the full geometry (:meth:`Grid.geometry_difference`).
    names : pair of str
        Names used in the message, e.g. ``("intercept", "gradient")``.

    Raises
    ------
    ValueError
        Naming both inputs, both shapes and what differs.
    """
    na, nb = names
    sa, sb = _shape_of(a), _shape_of(b)
    if isinstance(a, Grid) and isinstance(b, Grid):
        diff = a.geometry_difference(b)
    else:
        diff = None if sa == sb else "shape differs"
    if diff is not None:
        raise ValueError(
            f"geometry of {na!r} (shape {sa}) does not match {nb!r} (shape {sb}): {diff}"
        )


# --------------------------------------------------------------------------- no data


def dead_trace_mask(block: ArrayLike) -> NDArray[np.bool_]:
    """Flag traces that carry no data.

    A trace is dead when every sample is zero or non-finite (SEG-Y writes
    dead traces as zeros, common practice; NaN-filled traces come from
    gridding and inversion software).

    Parameters
    ----------
    block : array_like of shape (..., n_samples)
        Traces along the last axis.

    Returns
    -------
    ndarray of bool, shape ``block.shape[:-1]``
        ``True`` for a dead trace.
    """
    arr = np.asarray(block)
    if arr.ndim < 1:
        raise ValueError("block must have a sample axis (got a scalar)")
    empty = (arr == 0) | ~np.isfinite(arr)
    return np.all(empty, axis=-1)


def no_data_mask(block: ArrayLike) -> NDArray[np.bool_]:
    """Flag samples without data: non-finite samples and every sample of a dead trace.

    Parameters
    ----------
    block : array_like of shape (..., n_samples)

    Returns
    -------
    ndarray of bool, same shape as ``block``
    """
    arr = np.asarray(block)
    return ~np.isfinite(arr) | dead_trace_mask(arr)[..., None]


def iter_chunks(array: NDArray[Any], chunk_rows: int) -> Iterator[tuple[slice, NDArray[Any]]]:
    """Yield consecutive blocks of at most ``chunk_rows`` rows along axis 0.

    The blocks are views (no copy). For a ``np.memmap`` the pages a caller
    touches stay mapped until the memmap is closed, so bounded resident memory
    needs :func:`porecast.io.cubes.open_cube` (which reads by file offset)
    rather than one whole-file memmap.

    Parameters
    ----------
    array : ndarray or memmap
        Array of at least one dimension.
    chunk_rows : int
        Rows per block, at least 1.

    Yields
    ------
    (slice, ndarray)
        Row range and the block ``array[rows]``.
    """
    if isinstance(chunk_rows, bool) or int(chunk_rows) != chunk_rows or chunk_rows < 1:
        raise ValueError(f"chunk_rows must be a positive integer (got {chunk_rows!r})")
    if np.ndim(array) < 1:
        raise ValueError("array must have at least one dimension")
    n = array.shape[0]
    step = int(chunk_rows)
    for start in range(0, n, step):
        rows = slice(start, min(start + step, n))
        yield rows, array[rows]


# --------------------------------------------------------------------------- text


def _read_text(path: Path) -> str:
    """Decode a text file, refusing binary content with the byte offset."""
    data = path.read_bytes()
    binary = np.flatnonzero(
        np.isin(np.frombuffer(data, dtype=np.uint8), [*range(0, 9), *range(14, 32)])
    )
    if binary.size:
        off = int(binary[0])
        raise ValueError(
            f"{path.name}: not a text file: control byte 0x{data[off]:02x} at byte offset {off}"
        )
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ValueError(
            f"{path.name}: not UTF-8/ASCII text: undecodable byte at byte offset {exc.start}"
        ) from None


def _is_number(token: str) -> bool:
    try:
        float(token)
    except ValueError:
        return False
    return True


def _fit_regular_axis(
    coord: FloatArray, rtol: float, what: str, source: str, lines: NDArray[np.int64]
) -> tuple[float, float, NDArray[np.int64]]:
    """Find origin, spacing and node index of coordinates on a regular axis.

    Distinct coordinates closer than ``rtol`` times the largest gap are one
    node (rounding in the file). The smallest gap between nodes is the trial
    spacing; every gap must be a whole number of trial spacings (missing rows
    or columns are allowed) within ``2 * rtol``, else the point after the
    first bad gap is refused. The spacing is then refitted end to end and
    every point must lie within ``rtol * spacing`` of its node.
    """
    uniq = np.unique(coord)
    if uniq.size < 2:
        raise ValueError(
            f"{source}: every point has {what} = {uniq[0]:g}; a grid needs at least two "
            f"distinct {what} values"
        )
    gaps = np.diff(uniq)
    new_node = gaps > rtol * gaps.max()
    group = np.concatenate([[0], np.cumsum(new_node)])
    centres = np.bincount(group, weights=uniq) / np.bincount(group)
    centre_gaps = np.diff(centres)
    trial = float(centre_gaps.min())
    multiples = np.rint(centre_gaps / trial)
    off = np.abs(centre_gaps - multiples * trial) > 2.0 * rtol * trial * multiples

    def refuse(k: int, detail: str) -> ValueError:
        return ValueError(
            f"{source}, line {lines[k]}: {what} = {coord[k]:.10g} is not on a regular grid "
            f"({detail}): irregular coordinates cannot be read as a grid"
        )

    if off.any():
        g = int(np.argmax(off))
        k = int(np.argmax(np.abs(coord - centres[g + 1]) <= rtol * trial))
        raise refuse(
            k,
            f"{centre_gaps[g]:.6g} m from the previous {what} {centres[g]:.10g} is not a "
            f"multiple of the spacing {trial:.6g} m",
        )
    centre_index = np.concatenate([[0], np.cumsum(multiples)]).astype(np.int64)
    origin = float(centres[0])
    step = float((centres[-1] - centres[0]) / centre_index[-1])
    index = centre_index[group[np.searchsorted(uniq, coord)]]
    misfit = np.abs(coord - (origin + step * index))
    tol = rtol * abs(step)
    if np.any(misfit > tol):
        k = int(np.argmax(misfit))
        raise refuse(k, f"{misfit[k]:.3g} m from its node, tolerance {tol:.3g} m")
    return origin, step, index


def read_xyz(
    path: str | os.PathLike[str],
    *,
    names: Sequence[str] | None = None,
    null_value: float | None = None,
    rotation_deg: float = 0.0,
    spacing_rtol: float = 1e-3,
) -> GridData:
    """Read a gridded map from a CSV or XYZ text file.

    Columns are x, y (m) then one or more values, separated by commas,
    semicolons or whitespace (decided on the first data line). Blank lines and
    lines starting with ``#`` are skipped. A first line made only of names is
    a header: the x and y columns are found by name (``x``/``easting``/``east``,
    ``y``/``northing``/``north``) and the others are attributes. Without a
    header the first two columns are x and y.

    The grid is inferred from the coordinates: the distinct x (and y) values,
    after rotating by ``-rotation_deg``, must sit on a constant spacing within
    ``spacing_rtol`` of that spacing; whole missing rows or columns and missing
    nodes are allowed and become NaN.

    Parameters
    ----------
    path : str or path-like
        Text file.
    names : sequence of str, optional
        Without a header: names of the value columns (default ``"value"`` or
        ``"value1"``, ``"value2"``...). With a header: the value columns to
        keep, by header name.
    null_value : float, optional
        Value that marks a missing node (e.g. -999.25); read as NaN. The tokens
        ``nan``/``NaN`` are always missing.
    rotation_deg : float, default 0
        Counter-clockwise rotation of the grid columns from east, degrees.
    spacing_rtol : float, default 1e-3
        Tolerance on node positions, as a fraction of the spacing.

    Returns
    -------
    GridData
        Map of shape ``(ny, nx)``; rows run along increasing (rotated) y.

    Raises
    ------
    ValueError
        For binary content (byte offset), text in a numeric column or a wrong
        number of columns (file and line number), non-finite coordinates,
        irregular coordinates (the line of the first point off the grid), two
        points on one node (both lines), or a grid that would be mostly empty.
    """
    path = Path(path)
    src = path.name
    if not (0 < spacing_rtol < 0.5):
        raise ValueError(f"spacing_rtol must be between 0 and 0.5 (got {spacing_rtol})")
    if not math.isfinite(rotation_deg):
        raise ValueError(f"rotation_deg must be finite (got {rotation_deg})")
    text = _read_text(path)

    delimiter: str | None = None
    columns: list[str] | None = None
    first_tokens: list[str] | None = None
    rows: list[str] = []
    line_numbers: list[int] = []

    def split(line: str) -> list[str]:
        return [t.strip() for t in line.split(delimiter)] if delimiter else line.split()

    for lineno, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        if delimiter is None:
            delimiter = "," if "," in line else (";" if ";" in line else "")
        if first_tokens is None:
            first_tokens = split(line)
            numeric = [_is_number(t) for t in first_tokens]
            if not any(numeric):
                columns = [t.lower() for t in first_tokens]
                continue
            if not all(numeric):
                k = numeric.index(False)
                raise ValueError(
                    f"{src}, line {lineno}: column {k + 1} value {first_tokens[k]!r} is not a "
                    "number (a header line holds only column names)"
                )
        rows.append(line)
        line_numbers.append(lineno)
    if not rows or first_tokens is None:
        raise ValueError(f"{src}: no data lines")

    ncols = len(first_tokens) if columns is None else len(columns)
    if columns is None:
        if ncols < 3:
            raise ValueError(f"{src}: need at least 3 columns (x, y, value), got {ncols}")
        n_values = ncols - 2
        if names is None:
            value_names = ["value"] if n_values == 1 else [f"value{k + 1}" for k in range(n_values)]
        else:
            value_names = [str(n) for n in names]
            if len(value_names) != n_values:
                raise ValueError(
                    f"{src}: {n_values} value column(s) but {len(value_names)} name(s) given"
                )
        columns = ["x", "y", *value_names]
        ix, iy = 0, 1
        keep = list(range(2, ncols))
    else:
        if len(set(columns)) != len(columns) or "" in columns:
            raise ValueError(f"{src}: header names must be unique and non-empty ({columns})")
        ix = next((columns.index(n) for n in X_COLUMN_NAMES if n in columns), -1)
        iy = next((columns.index(n) for n in Y_COLUMN_NAMES if n in columns), -1)
        if ix < 0 or iy < 0:
            raise ValueError(
                f"{src}: header {columns} has no x/y column (names looked for: "
                f"{', '.join(X_COLUMN_NAMES)} / {', '.join(Y_COLUMN_NAMES)})"
            )
        keep = [k for k in range(ncols) if k not in (ix, iy)]
        if names is not None:
            wanted = [str(n).lower() for n in names]
            missing = [n for n in wanted if n not in columns]
            if missing:
                raise ValueError(f"{src}: column(s) {missing} not in header {columns}")
            keep = [columns.index(n) for n in wanted]
        if not keep:
            raise ValueError(f"{src}: header {columns} has no value column")

    lines = np.asarray(line_numbers, dtype=np.int64)
    try:  # fast C parser; on any complaint the loop below finds the line and column
        table = np.loadtxt(rows, delimiter=delimiter or None, dtype=np.float64, ndmin=2,
                           comments=None)  # fmt: skip
        if table.shape != (len(rows), ncols):
            raise ValueError("column count")
    except ValueError:
        table = np.empty((len(rows), ncols), dtype=np.float64)
        for r, line in enumerate(rows):
            tokens = split(line)
            if len(tokens) != ncols:
                raise ValueError(
                    f"{src}, line {lines[r]}: {len(tokens)} columns, expected {ncols}"
                ) from None
            for c, tok in enumerate(tokens):
                try:
                    table[r, c] = float(tok)
                except ValueError:
                    raise ValueError(
                        f"{src}, line {lines[r]}: column {columns[c]!r} value {tok!r} is not a "
                        "number"
                    ) from None
    xy = table[:, [ix, iy]]
    bad = ~np.isfinite(xy)
    if bad.any():
        r = int(np.argmax(bad.any(axis=1)))
        raise ValueError(f"{src}, line {lines[r]}: coordinates must be finite numbers")
    vals = table[:, keep]
    inf = np.isinf(vals)
    if inf.any():
        r, c = (int(v[0]) for v in np.nonzero(inf))
        raise ValueError(f"{src}, line {lines[r]}: column {columns[keep[c]]!r} is infinite")
    if null_value is not None:
        vals[vals == null_value] = np.nan

    rot = math.radians(rotation_deg)
    cr, sr = math.cos(rot), math.sin(rot)
    xr, yr = float(xy[0, 0]), float(xy[0, 1])
    u = (xy[:, 0] - xr) * cr + (xy[:, 1] - yr) * sr
    v = -(xy[:, 0] - xr) * sr + (xy[:, 1] - yr) * cr
    u0, du, iu = _fit_regular_axis(u, spacing_rtol, "x", src, lines)
    v0, dv, iv = _fit_regular_axis(v, spacing_rtol, "y", src, lines)
    nx, ny = int(iu.max()) + 1, int(iv.max()) + 1
    if nx * ny > MAX_EMPTY_NODE_RATIO * len(rows):
        raise ValueError(
            f"{src}: the {len(rows)} points would fill only "
            f"{100.0 * len(rows) / (nx * ny):.1f} % of an inferred {ny} x {nx} grid; "
            "they look scattered, not gridded"
        )
    flat = iv * nx + iu
    order = np.argsort(flat, kind="stable")
    dup = np.flatnonzero(np.diff(flat[order]) == 0)
    if dup.size:
        a, b = order[dup[0]], order[dup[0] + 1]
        raise ValueError(
            f"{src}, lines {lines[a]} and {lines[b]}: two points on the same grid node "
            f"(x={xy[b, 0]:g}, y={xy[b, 1]:g})"
        )
    value_names = [columns[k] for k in keep]
    values: dict[str, NDArray[Any]] = {}
    for c, name in enumerate(value_names):
        arr = np.full((ny, nx), np.nan)
        arr[iv, iu] = vals[:, c]
        values[name] = arr
    grid = Grid(
        "map",
        (ny, nx),
        x0=xr + u0 * cr - v0 * sr,
        y0=yr + u0 * sr + v0 * cr,
        dx=du,
        dy=dv,
        rotation_deg=rotation_deg,
        attributes=tuple(value_names),
        null_value=null_value,
    )
    return GridData(grid, values)


def write_xyz(
    path: str | os.PathLike[str],
    data: GridData,
    *,
    delimiter: str = ",",
    header: bool = True,
    null_value: float | None = None,
    fsync: bool = True,
) -> Path:
    """Write a map as x, y, value columns, one line per node, atomically.

    Every node is written (so the grid extent survives a round trip); NaN is
    written as ``null_value`` when given, else as ``nan``. Numbers use the
    shortest text that reads back to the same float.

    Parameters
    ----------
    path : str or path-like
        Output file.
    data : GridData
        A map (2-D) grid.
    delimiter : str, default ","
        ``","``, ``";"``, ``" "`` or ``"\\t"``.
    header : bool, default True
        Write a ``x,y,<names>`` header line.
    null_value : float, optional
        Stand-in for NaN.
    fsync : bool, default True
        See :func:`porecast.io.atomic.atomic_path`.

    Returns
    -------
    pathlib.Path
    """
    if data.grid.kind != "map":
        raise ValueError(
            f"CSV/XYZ holds maps only (got a {data.grid.kind} of shape {data.grid.shape})"
        )
    if delimiter not in (",", ";", " ", "\t"):
        raise ValueError(f"delimiter must be ',', ';', ' ' or tab (got {delimiter!r})")
    names = list(data.values)
    clash = [n for n in names if n.lower() in X_COLUMN_NAMES + Y_COLUMN_NAMES]
    if clash:
        raise ValueError(f"attribute name(s) {clash} would be read back as coordinates")
    if any(delimiter in n or not n.strip() for n in names):
        raise ValueError(f"attribute names must be non-empty and free of {delimiter!r}: {names}")
    x, y = data.grid.node_xy()
    columns = [x.ravel(), y.ravel()] + [np.asarray(data.values[n], float).ravel() for n in names]
    nan_text = "nan" if null_value is None else repr(float(null_value))

    def fmt(v: float) -> str:
        return nan_text if math.isnan(v) else repr(v)

    final = Path(path)
    with atomic_path(final, fsync=fsync) as tmp:
        with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
            if header:
                fh.write(delimiter.join(["x", "y", *names]) + "\n")
            for row in zip(*(c.tolist() for c in columns), strict=True):
                fh.write(delimiter.join(fmt(v) for v in row) + "\n")
    return final


# --------------------------------------------------------------------------- npy / npz


def _check_numeric(arr: NDArray[Any], what: str) -> None:
    if arr.dtype.kind not in "fiu":
        raise ValueError(f"{what}: array dtype {arr.dtype} is not a real number type")


def read_npy(
    path: str | os.PathLike[str],
    grid: Grid | None = None,
    *,
    name: str = "value",
    mmap: bool = False,
) -> GridData:
    """Read a 2-D map or 3-D cube from a ``.npy`` file.

    Parameters
    ----------
    path : str or path-like
        ``.npy`` file (pickled objects are refused).
    grid : Grid, optional
        Geometry of the array; its shape must match. Default: placeholder unit
        geometry (:meth:`Grid.unit`).
    name : str, default "value"
        Attribute name.
    mmap : bool, default False
        Memory-map read-only instead of loading.

    Returns
    -------
    GridData
        Values as stored (NaN stays NaN; ``grid.null_value`` is replaced by
        NaN, which loads a memory-mapped array into memory).
    """
    path = Path(path)
    try:
        arr = np.load(path, mmap_mode="r" if mmap else None, allow_pickle=False)
    except (ValueError, OSError, EOFError) as exc:
        raise ValueError(f"{path.name}: not a readable .npy array ({exc})") from None
    if not isinstance(arr, np.ndarray):
        raise ValueError(f"{path.name}: holds several arrays; read it with read_npz")
    _check_numeric(arr, path.name)
    if arr.ndim not in (2, 3):
        raise ValueError(f"{path.name}: a map is 2-D and a cube 3-D (got shape {arr.shape})")
    if grid is None:
        grid = Grid.unit(arr.shape, attributes=(name,))
    else:
        check_same_geometry(grid, arr, (f"{name} grid", path.name))
        grid = grid.with_attributes((name,))
    if grid.null_value is not None:
        arr = np.where(arr == grid.null_value, np.nan, arr)
    return GridData(grid, {name: arr})


def write_npy(path: str | os.PathLike[str], array: ArrayLike, *, fsync: bool = True) -> Path:
    """Save one array as ``.npy``, atomically. Returns the path."""
    final = Path(path)
    with atomic_path(final, fsync=fsync) as tmp:
        with open(tmp, "wb") as fh:
            np.save(fh, np.asarray(array), allow_pickle=False)
    return final


def _regular_vector(vec: NDArray[Any], what: str, src: str) -> tuple[float, float]:
    vec = np.asarray(vec, dtype=np.float64)
    if vec.ndim != 1 or vec.size < 2 or not np.all(np.isfinite(vec)):
        raise ValueError(f"{src}: geometry array {what!r} must be 1-D, finite, length >= 2")
    step = (vec[-1] - vec[0]) / (vec.size - 1)
    if step == 0 or np.max(np.abs(np.diff(vec) - step)) > 1e-6 * abs(step):
        raise ValueError(f"{src}: geometry array {what!r} is not regularly spaced")
    return float(vec[0]), float(step)


def read_npz(path: str | os.PathLike[str]) -> GridData:
    """Read several named attributes on one grid from a ``.npz`` archive.

    Geometry comes from, in order: the ``_grid_json`` record written by
    :func:`write_npz`; 1-D coordinate arrays ``x`` (length nx) and ``y``
    (length ny), plus ``samples`` (ms) for a cube; else placeholder unit
    geometry. Every other array is an attribute of the grid's shape.

    Parameters
    ----------
    path : str or path-like

    Returns
    -------
    GridData

    Raises
    ------
    ValueError
        For a file that is not an ``.npz`` archive, pickled or non-numeric
        arrays, or attributes of different shapes (naming both).
    """
    path = Path(path)
    src = path.name
    try:
        archive = np.load(path, allow_pickle=False)
    except (ValueError, OSError, EOFError, zipfile.BadZipFile) as exc:
        raise ValueError(f"{src}: not a readable .npz archive ({exc})") from None
    if not isinstance(archive, np.lib.npyio.NpzFile):
        raise ValueError(f"{src}: holds a single array; read it with read_npy")
    try:
        arrays = {key: archive[key] for key in archive.files}
    except ValueError as exc:
        raise ValueError(f"{src}: {exc}") from None
    finally:
        archive.close()
    grid_record = arrays.pop(NPZ_GRID_KEY, None)
    geometry = {
        k: arrays.pop(k) for k in ("x", "y", "samples") if k in arrays and arrays[k].ndim == 1
    }
    if not arrays:
        raise ValueError(f"{src}: no attribute arrays")
    first_name = next(iter(arrays))
    for name, arr in arrays.items():
        _check_numeric(arr, f"{src} [{name}]")
        check_same_geometry(arrays[first_name], arr, (first_name, name))
    shape = arrays[first_name].shape
    if grid_record is not None:
        try:
            grid = Grid.from_dict(json.loads(str(grid_record)))
        except (ValueError, TypeError, KeyError) as exc:
            raise ValueError(f"{src}: bad {NPZ_GRID_KEY} geometry record ({exc})") from None
        check_same_geometry(grid, arrays[first_name], ("stored grid", first_name))
    elif "x" in geometry and "y" in geometry:
        x0, dx = _regular_vector(geometry["x"], "x", src)
        y0, dy = _regular_vector(geometry["y"], "y", src)
        if len(shape) not in (2, 3) or (geometry["y"].size, geometry["x"].size) != shape[:2]:
            raise ValueError(
                f"{src}: x ({geometry['x'].size}) and y ({geometry['y'].size}) do not fit "
                f"attribute shape {shape} (expected (ny, nx[, n_samples]))"
            )
        axis = None
        if len(shape) == 3:
            if "samples" not in geometry or geometry["samples"].size != shape[2]:
                raise ValueError(f"{src}: a cube needs a 'samples' array of length {shape[2]}")
            t0, dt = _regular_vector(geometry["samples"], "samples", src)
            axis = SampleAxis("time", t0, dt)
        grid = Grid("map" if len(shape) == 2 else "cube", shape, x0, y0, dx, dy, sample_axis=axis)
    else:
        grid = Grid.unit(shape)
    values: dict[str, NDArray[Any]] = {}
    for name, arr in arrays.items():
        if grid.null_value is not None:
            arr = np.where(arr == grid.null_value, np.nan, arr)
        values[name] = arr
    return GridData(grid.with_attributes(tuple(values)), values)


def write_npz(
    path: str | os.PathLike[str], data: GridData, *, compress: bool = True, fsync: bool = True
) -> Path:
    """Write attributes and their geometry record to ``.npz``, atomically.

    Parameters
    ----------
    path : str or path-like
    data : GridData
        Attribute names must not start with ``_grid`` nor be ``x``, ``y`` or
        ``samples`` (reserved for geometry).
    compress : bool, default True
    fsync : bool, default True

    Returns
    -------
    pathlib.Path
    """
    reserved = [n for n in data.values if n.startswith("_grid") or n in ("x", "y", "samples")]
    if reserved:
        raise ValueError(f"attribute name(s) {reserved} are reserved for geometry in .npz files")
    arrays = {name: np.asarray(arr) for name, arr in data.values.items()}
    arrays[NPZ_GRID_KEY] = np.array(json.dumps(data.grid.to_dict()))
    final = Path(path)
    save = np.savez_compressed if compress else np.savez
    with atomic_path(final, fsync=fsync) as tmp:
        with open(tmp, "wb") as fh:
            save(fh, **cast(dict[str, Any], arrays))
    return final
