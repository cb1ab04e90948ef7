"""Data input/output: grids (CSV/XYZ, .npy, .npz), SEG-Y, LAS wells, chunked cubes.

Pure numpy + segyio + lasio; nothing here imports the web, database or worker
layers. Units at this edge: coordinates and depth in m (positive down), time
in ms for seismic sample axes, velocity m/s, density g/cm3, fractions.
Every writer is atomic (:func:`atomic_path`).
"""

from porecast.io.atomic import atomic_path
from porecast.io.cubes import (
    CubeChunk,
    CubeReader,
    CubeRunResult,
    NpyTraceWriter,
    iter_cube_chunks,
    open_cube,
    process_cube,
)
from porecast.io.grids import (
    Grid,
    GridData,
    SampleAxis,
    check_same_geometry,
    dead_trace_mask,
    iter_chunks,
    no_data_mask,
    read_npy,
    read_npz,
    read_xyz,
    write_npy,
    write_npz,
    write_xyz,
)
from porecast.io.las import CURVE_ALIASES, WellLogs, read_well, read_well_bytes, write_well
from porecast.io.segy import (
    SegyChunk,
    SegyGeometry,
    SegyLayout,
    SegyTraceReader,
    SegyTraceWriter,
    check_segy_layout,
    iter_segy_chunks,
    segy_geometry,
    write_segy_like,
)

__all__ = [
    "CURVE_ALIASES",
    "CubeChunk",
    "CubeReader",
    "CubeRunResult",
    "Grid",
    "GridData",
    "NpyTraceWriter",
    "SampleAxis",
    "SegyChunk",
    "SegyGeometry",
    "SegyLayout",
    "SegyTraceReader",
    "SegyTraceWriter",
    "WellLogs",
    "atomic_path",
    "check_same_geometry",
    "check_segy_layout",
    "dead_trace_mask",
    "iter_chunks",
    "iter_cube_chunks",
    "iter_segy_chunks",
    "no_data_mask",
    "open_cube",
    "process_cube",
    "read_npy",
    "read_npz",
    "read_well",
    "read_well_bytes",
    "read_xyz",
    "segy_geometry",
    "write_npy",
    "write_npz",
    "write_segy_like",
    "write_well",
    "write_xyz",
]
