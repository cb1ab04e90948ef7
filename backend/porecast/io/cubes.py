"""Chunked processing of attribute cubes with bounded memory.

An attribute cube (intercept, gradient, impedance...) is one file per
attribute: ``.npy`` or SEG-Y. :func:`open_cube` gives each a
:class:`CubeReader` that reads ranges of traces by file offset (never the whole
file, never one whole-file memory map whose touched pages would stay resident),
:func:`iter_cube_chunks` reads the same traces from every file in lockstep,
and :func:`process_cube` feeds the samples to a function and streams its
outputs to ``.npy`` or SEG-Y files, so peak memory is set by the chunk size,
not the cube size.
"""

from __future__ import annotations

import os
import re
from collections.abc import Callable, Iterator, Mapping, Sequence
from contextlib import ExitStack
from pathlib import Path
from typing import IO, Any, Literal, NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray

from porecast.io.atomic import atomic_path
from porecast.io.grids import Grid, check_same_geometry, dead_trace_mask
from porecast.io.segy import SegyGeometry, SegyTraceReader, SegyTraceWriter, segy_geometry

__all__ = [
    "CubeChunk",
    "CubeReader",
    "CubeRunResult",
    "NpyTraceWriter",
    "SEGY_SUFFIXES",
    "iter_cube_chunks",
    "open_cube",
    "process_cube",
]

FloatArray = NDArray[np.float64]
CubeSource = str | os.PathLike[str] | NDArray[Any]

#: File suffixes read as SEG-Y (case-insensitive).
SEGY_SUFFIXES = (".sgy", ".segy")
#: Default memory budget of one input block (all attributes, float64).
DEFAULT_CHUNK_BYTES = 8 * 2**20
_NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,127}$")


# --------------------------------------------------------------------------- readers


class CubeReader:
    """Reads trace ranges of one attribute cube as float64.

    Traces are the rows of the array flattened to ``(n_traces, n_samples)``
    (all axes but the last form the trace index). Values equal to
    ``grid.null_value`` come back as NaN. Create with :func:`open_cube`; use
    as a context manager.

    Attributes
    ----------
    name : str
    shape : tuple of int
        Full array shape (last axis: samples).
    grid : Grid or None
        Geometry, when known.
    segy : SegyGeometry or None
        For SEG-Y sources.
    """

    def __init__(
        self,
        name: str,
        shape: tuple[int, ...],
        grid: Grid | None,
        segy: SegyGeometry | None = None,
    ):
        self.name = name
        self.shape = tuple(int(n) for n in shape)
        self.grid = grid
        self.segy = segy
        if len(self.shape) < 2:
            raise ValueError(f"{name}: a cube needs traces and samples (got shape {self.shape})")
        if grid is not None:
            check_same_geometry(grid, self.shape, (f"{name} grid", f"{name} data"))

    @property
    def n_samples(self) -> int:
        return self.shape[-1]

    @property
    def n_traces(self) -> int:
        return int(np.prod(self.shape[:-1]))

    def _read(self, start: int, stop: int) -> NDArray[Any]:  # pragma: no cover - abstract
        raise NotImplementedError

    def read(self, start: int, stop: int) -> FloatArray:
        """Traces ``start:stop`` as an array of shape (stop - start, n_samples)."""
        if not (0 <= start <= stop <= self.n_traces):
            raise ValueError(f"{self.name}: trace range {start}:{stop} outside 0:{self.n_traces}")
        block = np.asarray(self._read(start, stop), dtype=np.float64)
        if self.grid is not None and self.grid.null_value is not None:
            block[block == self.grid.null_value] = np.nan
        return block

    def close(self) -> None:
        """Release the file handle (no-op for in-memory arrays)."""

    def __enter__(self) -> CubeReader:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


class _ArrayReader(CubeReader):
    def __init__(self, name: str, array: NDArray[Any], grid: Grid | None):
        super().__init__(name, array.shape, grid)
        self._flat = array.reshape(-1, array.shape[-1])

    def _read(self, start: int, stop: int) -> NDArray[Any]:
        return np.array(self._flat[start:stop], dtype=np.float64)


class _NpyReader(CubeReader):
    """Reads a C-ordered ``.npy`` by byte offset with ``np.fromfile``."""

    def __init__(self, name: str, path: Path, grid: Grid | None):
        try:
            probe = np.load(path, mmap_mode="r", allow_pickle=False)
        except (ValueError, OSError, EOFError) as exc:
            raise ValueError(f"{path.name}: not a readable .npy array ({exc})") from None
        if not isinstance(probe, np.memmap):
            raise ValueError(f"{path.name}: not a single .npy array")
        shape, dtype, offset = probe.shape, probe.dtype, int(probe.offset)
        c_order = probe.flags.c_contiguous
        del probe
        if dtype.kind not in "fiu":
            raise ValueError(f"{path.name}: array dtype {dtype} is not a real number type")
        if not c_order:
            raise ValueError(
                f"{path.name}: Fortran-ordered .npy cannot be read trace by trace; "
                "save it in C order"
            )
        super().__init__(name, shape, grid)
        self.path = path
        self._dtype = dtype
        self._offset = offset
        self._fh: IO[bytes] = open(path, "rb")

    def _read(self, start: int, stop: int) -> NDArray[Any]:
        ns = self.n_samples
        self._fh.seek(self._offset + start * ns * self._dtype.itemsize)
        count = (stop - start) * ns
        block = np.fromfile(self._fh, dtype=self._dtype, count=count)
        if block.size != count:
            raise ValueError(f"{self.path.name}: file ends inside trace {start + block.size // ns}")
        return block.reshape(stop - start, ns)

    def close(self) -> None:
        self._fh.close()


class _SegyReader(CubeReader):
    def __init__(self, name: str, path: Path, geometry: SegyGeometry, grid: Grid | None):
        super().__init__(
            name, geometry.shape, grid if grid is not None else geometry.grid, geometry
        )
        self._reader = SegyTraceReader(path, geometry)

    def _read(self, start: int, stop: int) -> NDArray[Any]:
        return self._reader.read(slice(start, stop))

    def close(self) -> None:
        self._reader.close()


def open_cube(
    source: CubeSource,
    *,
    name: str = "cube",
    grid: Grid | None = None,
    iline_byte: int = 189,
    xline_byte: int = 193,
) -> CubeReader:
    """Open one attribute cube for reading by trace range.

    Parameters
    ----------
    source : str, path-like or ndarray
        ``.npy`` file, SEG-Y file (``.sgy``/``.segy``), or an array (including
        a ``np.memmap``) whose last axis is samples.
    name : str, default "cube"
        Attribute name used in messages.
    grid : Grid, optional
        Geometry for ``.npy``/array sources (SEG-Y geometry is read from the
        headers when not given).
    iline_byte, xline_byte : int
        SEG-Y header bytes of the line numbers.

    Returns
    -------
    CubeReader
    """
    if isinstance(source, np.ndarray):
        if source.dtype.kind not in "fiu":
            raise ValueError(f"{name}: array dtype {source.dtype} is not a real number type")
        return _ArrayReader(name, source, grid)
    path = Path(source)
    if path.suffix.lower() in SEGY_SUFFIXES:
        geom = segy_geometry(path, iline_byte=iline_byte, xline_byte=xline_byte)
        return _SegyReader(name, path, geom, grid)
    if path.suffix.lower() == ".npy":
        return _NpyReader(name, path, grid)
    raise ValueError(
        f"{path.name}: unknown cube format {path.suffix!r}; expected .npy, .sgy or .segy"
    )


class CubeChunk(NamedTuple):
    """Same traces from every attribute cube.

    Attributes
    ----------
    traces : slice
        Trace range (file order).
    blocks : dict of str to ndarray of shape (n_traces, n_samples)
        One block per attribute, in the order the inputs were given.
    """

    traces: slice
    blocks: dict[str, FloatArray]


def _check_lockstep(readers: Mapping[str, CubeReader]) -> None:
    names = list(readers)
    ref = readers[names[0]]
    for name in names[1:]:
        other = readers[name]
        check_same_geometry(ref.shape, other.shape, (names[0], name))
        if ref.grid is not None and other.grid is not None:
            check_same_geometry(ref.grid, other.grid, (names[0], name))
        if (
            ref.segy is not None
            and other.segy is not None
            and not (
                np.array_equal(ref.segy.trace_inline, other.segy.trace_inline)
                and np.array_equal(ref.segy.trace_crossline, other.segy.trace_crossline)
            )
        ):
            raise ValueError(
                f"geometry of {names[0]!r} (shape {ref.shape}) does not match {name!r} "
                f"(shape {other.shape}): trace inline/crossline numbers differ"
            )


def iter_cube_chunks(
    readers: Mapping[str, CubeReader],
    chunk_traces: int,
    *,
    trace_range: tuple[int, int] | None = None,
) -> Iterator[CubeChunk]:
    """Read the same trace ranges from several cubes in lockstep.

    Parameters
    ----------
    readers : mapping of str to CubeReader
        One reader per attribute; all must share one geometry.
    chunk_traces : int
        Traces per chunk, at least 1.
    trace_range : (int, int), optional
        Only traces ``start:stop`` (for tiles processed by separate workers).

    Yields
    ------
    CubeChunk

    Raises
    ------
    ValueError
        If the cubes' geometries differ (naming both and their shapes).
    """
    if not readers:
        raise ValueError("no input cubes")
    if isinstance(chunk_traces, bool) or int(chunk_traces) != chunk_traces or chunk_traces < 1:
        raise ValueError(f"chunk_traces must be a positive integer (got {chunk_traces!r})")
    _check_lockstep(readers)
    n = next(iter(readers.values())).n_traces
    start, stop = (0, n) if trace_range is None else trace_range
    if not (0 <= start < stop <= n):
        raise ValueError(f"trace_range must lie within 0:{n} and be non-empty (got {trace_range})")
    for a in range(start, stop, int(chunk_traces)):
        b = min(a + int(chunk_traces), stop)
        yield CubeChunk(slice(a, b), {name: r.read(a, b) for name, r in readers.items()})


# --------------------------------------------------------------------------- writers


class NpyTraceWriter:
    """Stream trace ranges into a new ``.npy`` file, atomically.

    The file (header and full size) is created with
    ``np.lib.format.open_memmap``; blocks are then written by byte offset, so
    no page of the output stays resident. Unwritten traces or an exception
    discard the file (see :func:`porecast.io.atomic.atomic_path`).

    Parameters
    ----------
    path : str or path-like
    shape : tuple of int
        Array shape; the last axis is samples.
    dtype : numpy dtype, default float32
    fsync : bool, default True
    """

    def __init__(
        self,
        path: str | os.PathLike[str],
        shape: Sequence[int],
        dtype: Any = np.float32,
        *,
        fsync: bool = True,
    ):
        self.path = Path(path)
        self.shape = tuple(int(n) for n in shape)
        self.dtype = np.dtype(dtype)
        self.n_samples = self.shape[-1]
        self.n_traces = int(np.prod(self.shape[:-1]))
        self._fsync = fsync
        self._written = np.zeros(self.n_traces, dtype=bool)
        self._stack: ExitStack | None = None
        self._fh: IO[bytes] | None = None

    def __enter__(self) -> NpyTraceWriter:
        stack = ExitStack()
        try:
            tmp = stack.enter_context(atomic_path(self.path, fsync=self._fsync))
            mm = np.lib.format.open_memmap(tmp, mode="w+", dtype=self.dtype, shape=self.shape)
            self._offset = int(mm.offset)
            del mm
            self._fh = open(tmp, "r+b")
        except BaseException:
            stack.close()
            raise
        self._stack = stack
        return self

    def write(self, traces: slice, block: ArrayLike) -> None:
        """Write ``block`` (shape (n, n_samples)) at the consecutive traces ``traces``."""
        if self._fh is None:
            raise RuntimeError("NpyTraceWriter.write called outside its with-block")
        start, stop, step = traces.indices(self.n_traces)
        if step != 1:
            raise ValueError("NpyTraceWriter writes consecutive trace ranges only")
        data = np.ascontiguousarray(block, dtype=self.dtype)
        if data.shape != (stop - start, self.n_samples):
            raise ValueError(
                f"{self.path.name}: block of shape {data.shape} for traces {start}:{stop} "
                f"(expected {(stop - start, self.n_samples)})"
            )
        self._fh.seek(self._offset + start * self.n_samples * self.dtype.itemsize)
        self._fh.write(data.tobytes())
        self._written[start:stop] = True

    def __exit__(self, exc_type: Any, exc: Any, tb: Any) -> None:
        assert self._stack is not None
        stack, self._stack = self._stack, None
        try:
            if self._fh is not None:
                self._fh.close()
                self._fh = None
            if exc_type is None and not self._written.all():
                first = int(np.argmin(self._written))
                raise ValueError(
                    f"{self.path.name}: {int((~self._written).sum())} of {self.n_traces} traces "
                    f"were never written (first: trace {first}); the output is discarded"
                )
        except BaseException as err:
            stack.__exit__(type(err), err, err.__traceback__)
            raise
        stack.__exit__(exc_type, exc, tb)


# --------------------------------------------------------------------------- processing


class CubeRunResult(NamedTuple):
    """Summary of :func:`process_cube`.

    Attributes
    ----------
    outputs : dict of str to pathlib.Path
        Written file per output name.
    shape : tuple of int
        Shape of each output array.
    grid : Grid or None
        Geometry shared by the inputs (``None`` when unknown).
    n_traces : int
        Traces processed.
    n_dead_traces : int
        Traces with no data in at least one input (dead or all-NaN).
    n_no_data_samples : int
        Samples written as ``no_data_value`` (includes those of dead traces).
    """

    outputs: dict[str, Path]
    shape: tuple[int, ...]
    grid: Grid | None
    n_traces: int
    n_dead_traces: int
    n_no_data_samples: int


def _gather_rows(
    blocks: list[FloatArray],
) -> tuple[FloatArray, NDArray[np.bool_] | None, NDArray[np.bool_]]:
    """Rows with data from per-attribute blocks of shape (n, ns).

    Returns the rows (n_valid, n_attr), the (n, ns) mask of samples with data
    (``None`` when all have data) and the (n,) mask of dead traces.
    """
    n, ns = blocks[0].shape
    dead = np.zeros(n, dtype=bool)
    finite = np.ones((n, ns), dtype=bool)
    for blk in blocks:
        dead |= dead_trace_mask(blk)
        finite &= np.isfinite(blk)
    stacked = np.stack(blocks, axis=-1).reshape(n * ns, len(blocks))
    if not dead.any() and finite.all():
        return stacked, None, dead
    valid = finite & ~dead[:, None]
    return stacked[valid.ravel()], valid, dead


def _default_chunk(n_samples: int, n_attr: int) -> int:
    return max(1, DEFAULT_CHUNK_BYTES // (8 * n_samples * n_attr))


def process_cube(
    inputs: Mapping[str, CubeSource],
    func: Callable[[FloatArray], Mapping[str, ArrayLike]],
    output_names: Sequence[str],
    output_dir: str | os.PathLike[str],
    *,
    output_format: Literal["npy", "segy"] = "npy",
    chunk_traces: int | None = None,
    grids: Mapping[str, Grid] | None = None,
    segy_template: str | os.PathLike[str] | None = None,
    no_data_value: float = float("nan"),
    trace_range: tuple[int, int] | None = None,
    progress: Callable[[int, int], None] | None = None,
    fsync: bool = True,
    trace_context: bool = False,
) -> CubeRunResult:
    """Apply a per-sample function to attribute cubes in chunks and stream the outputs.

    Each chunk of traces is read from every input in lockstep, its samples
    are gathered into a block of shape (n_rows, n_attributes) (columns in the
    order of ``inputs``), the rows *with data* are passed to ``func``, and the
    returned columns are written to one file per output name. Rows without
    data (a non-finite attribute, or a trace dead in any input: see
    :func:`porecast.io.grids.dead_trace_mask`) are not passed to ``func`` and
    get ``no_data_value``. Peak memory is a few times the block size; the
    outputs appear only when every trace is done (atomic, all or nothing on
    error).

    Parameters
    ----------
    inputs : mapping of str to path or ndarray
        Attribute name to ``.npy``/SEG-Y file or array; identical geometry.
    func : callable
        ``func(block) -> {name: values}`` with ``block`` a float64 array of
        shape (n_rows, n_attributes) and each ``values`` of shape (n_rows,).
    output_names : sequence of str
        Keys ``func`` returns, which name the files ``<name>.npy``/``<name>.sgy``
        (letters, digits, ``_ . -``).
    output_dir : str or path-like
        Existing directory.
    output_format : {"npy", "segy"}, default "npy"
        SEG-Y outputs copy the headers of ``segy_template`` (default: the
        first SEG-Y input) and store 4-byte IEEE floats.
    chunk_traces : int, optional
        Traces per chunk; default keeps one float64 input block near 8 MiB
        (peak memory is about five such blocks).
    grids : mapping of str to Grid, optional
        Geometry of ``.npy``/array inputs, by input name.
    segy_template : str or path-like, optional
    no_data_value : float, default NaN
        Written where there is no data (some SEG-Y readers expect 0).
    trace_range : (int, int), optional
        Process traces ``start:stop`` only (``.npy`` output of shape
        (stop - start, n_samples)), for tiles run by separate workers.
    progress : callable, optional
        ``progress(done_traces, total_traces)`` after each chunk.
    fsync : bool, default True
    trace_context : bool, default False
        Call ``func(block, trace_index)`` with the absolute trace index of
        every row (int64, shape (n_rows,)), for functions whose parameters
        vary by map location (non-stationary classification).

    Returns
    -------
    CubeRunResult

    Raises
    ------
    ValueError
        For mismatched input geometries, bad output names, a ``func`` result
        with other keys or shapes, or SEG-Y output without a SEG-Y template.
    """
    if not inputs:
        raise ValueError("no input cubes")
    names = [str(n) for n in output_names]
    if not names or len(set(names)) != len(names):
        raise ValueError(f"output_names must be non-empty and unique (got {names})")
    bad = [n for n in names if not _NAME_RE.match(n)]
    if bad:
        raise ValueError(f"output names {bad} must be letters, digits, '_', '.', '-'")
    if output_format not in ("npy", "segy"):
        raise ValueError(f"output_format must be 'npy' or 'segy' (got {output_format!r})")
    out_dir = Path(output_dir)
    grids = dict(grids or {})
    unknown = set(grids) - set(inputs)
    if unknown:
        raise ValueError(f"grids given for unknown inputs {sorted(unknown)}")

    with ExitStack() as stack:
        readers: dict[str, CubeReader] = {}
        for name, src in inputs.items():
            readers[name] = stack.enter_context(open_cube(src, name=name, grid=grids.get(name)))
        _check_lockstep(readers)
        ref = next(iter(readers.values()))
        n_total, ns, n_attr = ref.n_traces, ref.n_samples, len(readers)
        grid = next((r.grid for r in readers.values() if r.grid is not None), None)
        start, stop = (0, n_total) if trace_range is None else trace_range
        chunk = int(chunk_traces) if chunk_traces is not None else _default_chunk(ns, n_attr)

        writers: dict[str, SegyTraceWriter | NpyTraceWriter] = {}
        if output_format == "segy":
            if trace_range is not None:
                raise ValueError("trace_range needs output_format='npy' (tiles are merged later)")
            template = segy_template
            if template is None:
                template = next((r.segy.path for r in readers.values() if r.segy is not None), None)
            if template is None:
                raise ValueError("SEG-Y output needs a SEG-Y input or segy_template")
            tgeom = segy_geometry(template)
            if (tgeom.n_traces, tgeom.n_samples) != (n_total, ns) or (
                len(ref.shape) == 3 and tgeom.shape != ref.shape
            ):
                raise ValueError(
                    f"geometry of SEG-Y template {Path(template).name!r} (shape {tgeom.shape}) "
                    f"does not match the inputs (shape {ref.shape})"
                )
            if grid is not None and tgeom.grid is not None:
                check_same_geometry(tgeom.grid, grid, (Path(template).name, "inputs"))
            for out_name in names:
                w = SegyTraceWriter(template, out_dir / f"{out_name}.sgy", fsync=fsync)
                writers[out_name] = stack.enter_context(w)
            out_shape = ref.shape
        else:
            out_shape = ref.shape if trace_range is None else (stop - start, ns)
            for out_name in names:
                writers[out_name] = stack.enter_context(
                    NpyTraceWriter(out_dir / f"{out_name}.npy", out_shape, np.float32, fsync=fsync)
                )

        n_dead = n_nodata = 0
        for ch in iter_cube_chunks(readers, chunk, trace_range=(start, stop)):
            rows, valid, dead = _gather_rows(list(ch.blocks.values()))
            n = dead.size
            n_dead += int(dead.sum())
            n_valid = rows.shape[0]
            n_nodata += n * ns - n_valid
            if not n_valid:
                results: Mapping[str, ArrayLike] = {}
            elif trace_context:
                trace_ids = np.repeat(np.arange(ch.traces.start, ch.traces.stop), ns)
                if valid is not None:
                    trace_ids = trace_ids[valid.ravel()]
                results = func(rows, trace_ids)  # type: ignore[call-arg]
            else:
                results = func(rows)
            if n_valid and set(results) != set(names):
                raise ValueError(
                    f"func returned outputs {sorted(results)}, expected {sorted(names)}"
                )
            # tiles (trace_range) write into an output that starts at trace `start`
            where = slice(ch.traces.start - start, ch.traces.stop - start)
            for name in names:
                vals = np.asarray(results[name]) if n_valid else np.empty(0)
                if vals.shape != (n_valid,):
                    raise ValueError(
                        f"func output {name!r} has shape {vals.shape} for a block of "
                        f"{n_valid} rows (expected ({n_valid},))"
                    )
                if valid is None:  # every sample has data: no scatter needed
                    out = vals.reshape(n, ns)
                else:
                    out = np.full((n, ns), no_data_value, dtype=np.float64)
                    out[valid] = vals
                writers[name].write(where, out)
            if progress is not None:
                progress(ch.traces.stop - start, stop - start)
        outputs = {name: w.path for name, w in writers.items()}
    return CubeRunResult(outputs, tuple(out_shape), grid, stop - start, n_dead, n_nodata)
