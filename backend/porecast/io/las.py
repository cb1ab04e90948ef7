"""LAS well logs in and out (via lasio), converted to Porecast units at the edge.

Reading resolves each *canonical* curve from the first mnemonic of its entry
in :data:`CURVE_ALIASES` that the file has, converts it (sonic slowness to
velocity, feet to metres, kg/m3 to g/cm3, percent to fraction) and refuses
anything it would have to guess:

* an unknown unit on a curve (the message names curve and unit);
* a fraction curve whose values look like percent (maximum above 1.5) while
  its unit does not say percent (``%``, ``PCT``, ``PERCENT``, ``PU``);
* values of -999 or below that are not the declared NULL. Such values are a
  second null marker (e.g. NULL -999.25 declared but -9999 in the data).
  Decision: refuse, naming curve, value, depth and line, unless the caller
  lists the value in ``extra_nulls``, which reads it as missing; no
  measured log value in the canonical curves can be that low;
* values outside plausible physical ranges after conversion
  (:data:`PLAUSIBLE_RANGES`; usually a wrong unit in the header);
* a missing or empty ``~A`` section, rows whose number of values differs
  from the number of ``~C`` curves (lasio would silently reflow them), text
  in a numeric column, and binary content (with its byte offset).

Canonical curves and their units in :class:`WellLogs`: ``vp``, ``vs`` (m/s),
``density`` (g/cm3), ``gr`` (API), ``vshale``, ``sw``, ``porosity``,
``neutron_porosity`` (fractions). Depth is in m, increasing.

NPHI is kept apart from PHIT/PHIE: a neutron log reads apparent porosity in
limestone units, not the rock's porosity (Ellis & Singer 2007, *Well
Logging for Earth Scientists*, ch. 12, from memory), so it must not stand in
for porosity silently.
"""

from __future__ import annotations

import math
import os
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import lasio
import numpy as np
from numpy.typing import NDArray

from porecast.io.atomic import atomic_path

__all__ = [
    "CANONICAL_UNITS",
    "CURVE_ALIASES",
    "PLAUSIBLE_RANGES",
    "WellLogs",
    "read_well",
    "read_well_bytes",
    "write_well",
]

FloatArray = NDArray[np.float64]

FEET_TO_METRES = 0.3048  # international foot, exact by definition

#: Canonical curve -> LAS mnemonics in order of preference, each with the
#: kind of quantity it holds (which decides the unit conversion). Direct
#: velocities are preferred to sonic slownesses. The mnemonic chosen for a
#: file is reported in :attr:`WellLogs.mnemonics`.
CURVE_ALIASES: dict[str, tuple[tuple[str, str], ...]] = {
    "vp": (
        ("VP", "velocity"),
        ("VELP", "velocity"),
        ("DT", "slowness"),  # compressional sonic
        ("DTC", "slowness"),
        ("DTCO", "slowness"),
        ("AC", "slowness"),
    ),
    "vs": (
        ("VS", "velocity"),
        ("VELS", "velocity"),
        ("DTS", "slowness"),  # shear sonic
        ("DTSM", "slowness"),
        ("DTSH", "slowness"),
    ),
    "density": (("RHOB", "density"), ("RHOZ", "density"), ("DEN", "density"), ("ZDEN", "density")),
    "gr": (("GR", "gamma"), ("GRC", "gamma"), ("SGR", "gamma")),
    "vshale": (("VSH", "fraction"), ("VCL", "fraction")),
    "sw": (("SW", "fraction"), ("SWE", "fraction"), ("SWT", "fraction")),
    "porosity": (("PHIT", "fraction"), ("PHIE", "fraction")),
    "neutron_porosity": (("NPHI", "fraction"),),
}

#: Unit of each canonical curve in :class:`WellLogs`.
CANONICAL_UNITS: dict[str, str] = {
    "vp": "m/s",
    "vs": "m/s",
    "density": "g/cm3",
    "gr": "API",
    "vshale": "fraction",
    "sw": "fraction",
    "porosity": "fraction",
    "neutron_porosity": "fraction",
}

#: Mnemonic and unit used by :func:`write_well` for each canonical curve.
WRITE_MNEMONICS: dict[str, tuple[str, str]] = {
    "vp": ("VP", "M/S"),
    "vs": ("VS", "M/S"),
    "density": ("RHOB", "G/CC"),
    "gr": ("GR", "GAPI"),
    "vshale": ("VSH", "V/V"),
    "sw": ("SW", "V/V"),
    "porosity": ("PHIT", "V/V"),
    "neutron_porosity": ("NPHI", "V/V"),
}

#: Accepted range of each canonical curve after conversion. Common practice,
#: from memory: sonic velocities of rocks lie between soft mud (~1500 m/s
#: compressional, ~50 m/s shear) and dolomite/anhydrite (~7000 m/s); bulk
#: densities between water-filled washouts (~1 g/cm3) and pyrite (~5 g/cm3);
#: neutron porosity reads slightly negative in some evaporites.
PLAUSIBLE_RANGES: dict[str, tuple[float, float]] = {
    "vp": (300.0, 10000.0),
    "vs": (30.0, 7000.0),
    "density": (0.5, 5.5),
    "gr": (0.0, 2000.0),
    "vshale": (-0.15, 1.5),
    "sw": (-0.15, 1.5),
    "porosity": (-0.15, 1.5),
    "neutron_porosity": (-0.15, 1.5),
}

# Unit spellings (normalised: upper case, no spaces) -> factor to the target unit.
_VELOCITY_TO_M_PER_S = {
    "M/S": 1.0, "M/SEC": 1.0, "MPS": 1.0,
    "KM/S": 1000.0, "KM/SEC": 1000.0,
    "FT/S": FEET_TO_METRES, "F/S": FEET_TO_METRES, "FT/SEC": FEET_TO_METRES, "FPS": FEET_TO_METRES,
}  # fmt: skip
_SLOWNESS_TO_US_PER_M = {
    "US/FT": 1.0 / FEET_TO_METRES, "US/F": 1.0 / FEET_TO_METRES,
    "USEC/FT": 1.0 / FEET_TO_METRES, "USEC/F": 1.0 / FEET_TO_METRES,
    "US/M": 1.0, "USEC/M": 1.0,
}  # fmt: skip
_DENSITY_TO_G_PER_CM3 = {
    "G/CM3": 1.0, "G/CC": 1.0, "GM/CC": 1.0, "G/C3": 1.0, "GR/CC": 1.0, "GRAM/CC": 1.0,
    "KG/M3": 1e-3, "K/M3": 1e-3,
}  # fmt: skip
_GAMMA_UNITS = {"GAPI", "API", ""}  # gamma ray is API-calibrated by definition
_FRACTION_UNITS = {
    "", "V/V", "FRAC", "FRACTION", "DEC", "DECIMAL", "M3/M3", "CFCF", "FT3/FT3", "1", "-",
    "UNITLESS", "NONE",
}  # fmt: skip
_PERCENT_UNITS = {"%", "PCT", "PERCENT", "PU", "P.U."}
_DEPTH_TO_M = {
    "M": 1.0, "METER": 1.0, "METERS": 1.0, "METRE": 1.0, "METRES": 1.0,
    "FT": FEET_TO_METRES, "F": FEET_TO_METRES, "FEET": FEET_TO_METRES, "FOOT": FEET_TO_METRES,
}  # fmt: skip
_DEPTH_MNEMONICS = {"DEPT", "DEPTH", "MD", "TVD", "TVDSS"}
_X_ITEMS = ("X", "XCOORD", "X_COORD", "XWELL", "EASTING")
_Y_ITEMS = ("Y", "YCOORD", "Y_COORD", "YWELL", "NORTHING")
#: A finite value at or below this, other than the declared NULL, is a null marker.
SENTINEL_LIMIT = -999.0


def _norm_unit(unit: str | None) -> str:
    return re.sub(r"\s+", "", str(unit or "")).upper()


@dataclass
class WellLogs:
    """Well logs in Porecast units.

    Parameters
    ----------
    name : str
        Well name (``~W WELL``).
    depth : ndarray of shape (n,)
        Depth, m, strictly increasing.
    curves : dict of str to ndarray of shape (n,)
        Canonical curve name to values in :data:`CANONICAL_UNITS`; NaN where
        the log has no value.
    units : dict of str to str
        Canonical curve name to its unit (filled from :data:`CANONICAL_UNITS`).
    mnemonics : dict of str to str
        Canonical curve name to the LAS mnemonic it was read from.
    source_units : dict of str to str
        Canonical curve name to the unit string of the file.
    location : (float, float) or None
        Well x, y, m, from the ``~W`` section when present.
    notes : tuple of str
        Remarks made while reading (duplicate mnemonics, reversed depth...).
    """

    name: str
    depth: FloatArray
    curves: dict[str, FloatArray]
    units: dict[str, str] = field(default_factory=dict)
    mnemonics: dict[str, str] = field(default_factory=dict)
    source_units: dict[str, str] = field(default_factory=dict)
    location: tuple[float, float] | None = None
    notes: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        self.depth = np.asarray(self.depth, dtype=np.float64)
        if self.depth.ndim != 1 or self.depth.size < 1:
            raise ValueError("depth must be a 1-D array with at least one sample")
        if not np.all(np.isfinite(self.depth)) or np.any(np.diff(self.depth) <= 0):
            raise ValueError("depth must be finite and strictly increasing (m)")
        unknown = set(self.curves) - set(CANONICAL_UNITS)
        if unknown:
            raise ValueError(
                f"unknown curve name(s) {sorted(unknown)}; canonical names are "
                f"{sorted(CANONICAL_UNITS)}"
            )
        for name, arr in list(self.curves.items()):
            arr = np.asarray(arr, dtype=np.float64)
            if arr.shape != self.depth.shape:
                raise ValueError(
                    f"curve {name!r} has shape {arr.shape}, depth has shape {self.depth.shape}"
                )
            self.curves[name] = arr
            self.units.setdefault(name, CANONICAL_UNITS[name])


# --------------------------------------------------------------------------- reading


def _decode(data: bytes, src: str) -> str:
    body = data.rstrip(b"\x1a")  # old DOS files end with Ctrl-Z
    codes = np.frombuffer(body, dtype=np.uint8)
    binary = np.flatnonzero(np.isin(codes, [*range(0, 9), 11, *range(14, 32)]))
    if binary.size:
        off = int(binary[0])
        line = body[:off].count(b"\n") + 1
        raise ValueError(
            f"{src}: not a LAS text file: control byte 0x{body[off]:02x} at byte offset {off} "
            f"(line {line})"
        )
    try:
        return body.decode("utf-8")
    except UnicodeDecodeError:
        return body.decode("latin-1")  # descriptions in old files; numbers are ASCII


def _sections(text: str) -> tuple[dict[str, int], list[str]]:
    """First line number (1-based) of each ``~X`` section, keyed by its letter."""
    lines = text.splitlines()
    found: dict[str, int] = {}
    for k, line in enumerate(lines, start=1):
        s = line.lstrip()
        if s.startswith("~") and len(s) > 1:
            found.setdefault(s[1].upper(), k)
    return found, lines


def _section_items(lines: list[str], header_line: int) -> list[tuple[str, str, str]]:
    """``(mnemonic, unit, value)`` of each ``MNEM.UNIT VALUE : DESCRIPTION`` line of a section."""
    items = []
    for k in range(header_line, len(lines)):  # lines after the section header line
        s = lines[k].strip()
        if not s or s.startswith("#"):
            continue
        if s.startswith("~"):
            break
        mnem, _, rest = s.partition(".")
        unit, _, value = rest.partition(" ") if not rest.startswith(" ") else ("", "", rest)
        items.append((mnem.strip(), unit.strip(), value.rpartition(":")[0].strip()))
    return items


def _read_ascii(lines: list[str], a_line: int, mnemonics: list[str], src: str, wrapped: bool,
                comma: bool) -> tuple[list[int], FloatArray]:  # fmt: skip
    """Parse the ``~A`` section: line number where each depth step starts, and the values.

    Unwrapped: one line per depth step with one value per ``~C`` curve.
    Wrapped (LAS 2.0 ``WRAP YES``): a depth step may span several lines and
    every step starts a new line; the values are read in order. Parsed here
    rather than by lasio, which reflows rows of the wrong length silently.
    """
    n_curves = len(mnemonics)
    split = re.compile(r"[,\s]+") if comma else re.compile(r"\s+")
    values: list[float] = []
    starts: list[int] = []
    for k in range(a_line, len(lines)):  # lines after the ~A header line
        s = lines[k].strip()
        if not s or s.startswith("#"):
            continue
        if s.startswith("~"):
            break
        tokens = [t for t in split.split(s) if t]
        at_record_start = len(values) % n_curves == 0
        if wrapped and not at_record_start and len(values) % n_curves + len(tokens) > n_curves:
            raise ValueError(
                f"{src}, line {k + 1}: wrapped depth step runs past its {n_curves} values "
                "(each depth step must start a new line)"
            )
        for tok in tokens:
            try:
                values.append(float(tok))
            except ValueError:
                pos = len(values) % n_curves
                raise ValueError(
                    f"{src}, line {k + 1}: value {tok!r} in curve {mnemonics[pos]} is not a number"
                ) from None
        if not wrapped and len(tokens) != n_curves:
            raise ValueError(
                f"{src}, line {k + 1}: {len(tokens)} values, expected {n_curves} "
                f"(one per curve of the ~C section: {' '.join(mnemonics)})"
            )
        if at_record_start:
            starts.append(k + 1)
    if not values:
        raise ValueError(f"{src}: the ~A section (line {a_line}) has no data rows")
    if len(values) % n_curves:
        raise ValueError(
            f"{src}: the wrapped ~A section holds {len(values)} values, not a whole number of "
            f"depth steps of {n_curves} curves"
        )
    return starts, np.asarray(values, dtype=np.float64).reshape(-1, n_curves)


def _header_value(las: Any, mnemonic: str) -> Any:
    for section in (las.well, las.params):
        for item in section:
            if item.mnemonic.upper() == mnemonic:
                return item
    return None


def _location(las: Any, src: str, notes: list[str]) -> tuple[float, float] | None:
    found = [
        next((it for n in names if (it := _header_value(las, n)) is not None), None)
        for names in (_X_ITEMS, _Y_ITEMS)
    ]
    items: list[Any] = [it for it in found if it is not None and str(it.value).strip() != ""]
    if len(items) < 2:
        return None
    coords = []
    for it in items:
        try:
            value = float(it.value)
        except (TypeError, ValueError):
            raise ValueError(
                f"{src}: ~W item {it.mnemonic} = {it.value!r} is not a number"
            ) from None
        unit = _norm_unit(it.unit)
        if unit == "":
            notes.append(f"well coordinate {it.mnemonic} has no unit; read as metres")
            factor = 1.0
        elif unit in _DEPTH_TO_M:
            factor = _DEPTH_TO_M[unit]
        else:
            raise ValueError(
                f"{src}: ~W item {it.mnemonic} has unit {it.unit!r}; the well location must "
                "be projected coordinates in M or FT"
            )
        coords.append(value * factor)
    return coords[0], coords[1]


def _where(depth: FloatArray, lines: list[int], k: int) -> str:
    return f"depth {depth[k]:g} m, line {lines[k]}"


def _convert(canon: str, mnem: str, kind: str, unit_raw: str, values: FloatArray,
             depth: FloatArray, lines: list[int], src: str) -> FloatArray:  # fmt: skip
    unit = _norm_unit(unit_raw)
    label = f"curve {mnem} ({canon})"

    def unknown(known: Iterable[str]) -> ValueError:
        return ValueError(
            f"{src}: {label} has unit {unit_raw!r}, not a known {kind} unit "
            f"({', '.join(sorted(k for k in known if k)) or 'none'}); refusing to guess a "
            "conversion"
        )

    finite = np.isfinite(values)
    if kind == "velocity":
        if unit not in _VELOCITY_TO_M_PER_S:
            raise unknown(_VELOCITY_TO_M_PER_S)
        out = values * _VELOCITY_TO_M_PER_S[unit]
    elif kind == "slowness":
        if unit not in _SLOWNESS_TO_US_PER_M:
            raise unknown(_SLOWNESS_TO_US_PER_M)
        nonpos = finite & (values <= 0)
        if nonpos.any():
            k = int(np.argmax(nonpos))
            raise ValueError(
                f"{src}: {label} slowness {values[k]:g} {unit_raw} at {_where(depth, lines, k)} "
                "is not positive"
            )
        with np.errstate(divide="ignore", invalid="ignore"):
            out = 1e6 / (values * _SLOWNESS_TO_US_PER_M[unit])  # us/m -> m/s
    elif kind == "density":
        if unit not in _DENSITY_TO_G_PER_CM3:
            raise unknown(_DENSITY_TO_G_PER_CM3)
        out = values * _DENSITY_TO_G_PER_CM3[unit]
    elif kind == "gamma":
        if unit not in _GAMMA_UNITS:
            raise unknown(_GAMMA_UNITS)
        out = values.copy()
    elif kind == "fraction":
        if unit in _PERCENT_UNITS:
            out = values / 100.0
        elif unit in _FRACTION_UNITS:
            top = float(np.max(values[finite])) if finite.any() else 0.0
            if top > 1.5:
                raise ValueError(
                    f"{src}: {label} reaches {top:g} with unit {unit_raw!r}, which looks like "
                    "percent, not a fraction; refusing to guess: set its unit to % (or PCT, "
                    "PERCENT, PU) or store fractions"
                )
            out = values.copy()
        else:
            raise unknown(_FRACTION_UNITS | _PERCENT_UNITS)
    else:  # pragma: no cover - the alias table only holds the kinds above
        raise AssertionError(kind)
    low, high = PLAUSIBLE_RANGES[canon]
    outside = np.isfinite(out) & ((out < low) | (out > high))
    if outside.any():
        k = int(np.argmax(outside))
        raise ValueError(
            f"{src}: {label} is {out[k]:g} {CANONICAL_UNITS[canon]} at {_where(depth, lines, k)}"
            f" after conversion from {unit_raw!r}, outside the plausible {low:g} to {high:g} "
            f"{CANONICAL_UNITS[canon]}; check the unit in the ~C section"
        )
    return out


def _parse(text: str, src: str, required: Sequence[str], extra_nulls: Sequence[float]) -> WellLogs:
    unknown_req = [r for r in required if r not in CURVE_ALIASES]
    if unknown_req:
        raise ValueError(
            f"unknown required curve(s) {unknown_req}; choose from {list(CURVE_ALIASES)}"
        )
    found, lines = _sections(text)
    if not found:
        raise ValueError(f"{src}: not a LAS file: no ~ section headers (~V, ~W, ~C, ~A)")
    missing = [f"~{s}" for s in ("V", "W", "C") if s not in found]
    if missing:
        raise ValueError(f"{src}: not a LAS file: no {', '.join(missing)} section")
    if "A" not in found:
        raise ValueError(f"{src}: no ~A (ASCII log data) section")
    version = {m.upper(): v for m, _, v in _section_items(lines, found["V"])}
    wrapped = version.get("WRAP", "").upper() == "YES"
    comma = version.get("DLM", "").upper() == "COMMA"
    mnems = [m for m, _, _ in _section_items(lines, found["C"])]
    if len(mnems) < 2:
        raise ValueError(f"{src}: the ~C section lists {len(mnems)} curve(s); need depth + logs")
    row_lines, table = _read_ascii(lines, found["A"], mnems, src, wrapped, comma)
    try:  # headers only: the data were parsed and checked above
        las = lasio.read(text, ignore_data=True)
    except Exception as exc:  # lasio raises many types (KeyError, LASHeaderError...)
        raise ValueError(f"{src}: lasio cannot read this LAS file ({exc})") from None
    curves = list(las.curves)
    if len(curves) != len(mnems):  # pragma: no cover - lasio and the scan disagree
        raise ValueError(f"{src}: lasio found {len(curves)} curves, the ~C section {len(mnems)}")
    notes: list[str] = []

    index = curves[0]
    if index.original_mnemonic.upper() not in _DEPTH_MNEMONICS:
        raise ValueError(
            f"{src}: the first curve {index.original_mnemonic} is not a depth index "
            f"(expected one of {sorted(_DEPTH_MNEMONICS)})"
        )
    dunit = _norm_unit(index.unit)
    if dunit not in _DEPTH_TO_M:
        raise ValueError(
            f"{src}: depth unit {index.unit!r} of {index.original_mnemonic} is not M or FT/F"
        )

    null_item = _header_value(las, "NULL")
    declared = None
    if null_item is not None and str(null_item.value).strip() != "":
        try:
            declared = float(null_item.value)
        except (TypeError, ValueError):
            raise ValueError(f"{src}: NULL value {null_item.value!r} is not a number") from None
        table[table == declared] = np.nan
    for v in extra_nulls:
        table[table == float(v)] = np.nan

    depth = table[:, 0] * _DEPTH_TO_M[dunit]
    if _DEPTH_TO_M[dunit] != 1.0:
        notes.append(f"depth converted from {index.unit} to m (x {FEET_TO_METRES})")
    if not np.all(np.isfinite(depth)):
        k = int(np.argmax(~np.isfinite(depth)))
        raise ValueError(f"{src}: depth is missing (NULL) at line {row_lines[k]}")

    by_mnemonic: dict[str, list[int]] = {}
    for col, c in enumerate(curves[1:], start=1):
        by_mnemonic.setdefault(c.original_mnemonic.upper(), []).append(col)

    values: dict[str, FloatArray] = {}
    mnemonics: dict[str, str] = {}
    source_units: dict[str, str] = {}
    for canon, aliases in CURVE_ALIASES.items():
        hit = next(((m, kind) for m, kind in aliases if m in by_mnemonic), None)
        if hit is None:
            continue
        mnem, kind = hit
        same = by_mnemonic[mnem]
        if len(same) > 1:
            notes.append(f"{len(same)} curves named {mnem}; the first is used for {canon}")
        curve = curves[same[0]]
        raw = table[:, same[0]].copy()
        sentinel = np.isfinite(raw) & (raw <= SENTINEL_LIMIT)
        if sentinel.any():
            k = int(np.argmax(sentinel))
            decl = (
                f"the declared NULL is {declared:g}"
                if declared is not None
                else "no NULL is declared in ~W"
            )
            raise ValueError(
                f"{src}: curve {curve.original_mnemonic} has the value {raw[k]:g} at "
                f"{_where(depth, row_lines, k)}, but {decl}; the file seems to use another null "
                f"marker: pass extra_nulls=({raw[k]:g},) to read it as missing"
            )
        values[canon] = _convert(
            canon, curve.original_mnemonic, kind, curve.unit, raw, depth, row_lines, src
        )
        mnemonics[canon] = curve.original_mnemonic
        source_units[canon] = str(curve.unit)

    for canon in required:
        if canon not in values:
            looked = ", ".join(m for m, _ in CURVE_ALIASES[canon])
            raise ValueError(
                f"{src}: required curve {canon!r} not found: looked for mnemonics {looked}; "
                f"the file has {', '.join(mnems[1:])}"
            )

    step = np.diff(depth)
    if np.all(step < 0):
        order = np.arange(depth.size)[::-1]
        depth = depth[order]
        values = {k: v[order] for k, v in values.items()}
        notes.append("depth decreased down the file; rows reversed to increasing depth")
    elif not np.all(step > 0):
        k = int(np.argmax(step <= 0)) + 1
        raise ValueError(
            f"{src}: depth is not strictly monotonic at line {row_lines[k]} "
            f"({depth[k - 1]:g} m then {depth[k]:g} m)"
        )
    well_item = _header_value(las, "WELL")
    name = str(well_item.value).strip() if well_item is not None else ""
    return WellLogs(
        name=name or Path(src).stem,
        depth=depth,
        curves=values,
        mnemonics=mnemonics,
        source_units=source_units,
        location=_location(las, src, notes),
        notes=tuple(notes),
    )


def read_well_bytes(
    data: bytes,
    source_name: str,
    *,
    required: Sequence[str] = ("vp", "vs", "density"),
    extra_nulls: Sequence[float] = (),
) -> WellLogs:
    """Read a LAS file held in memory (e.g. a web upload); see :func:`read_well`.

    Parameters
    ----------
    data : bytes
        File content.
    source_name : str
        Name used in messages (the uploaded file name).
    required, extra_nulls
        As in :func:`read_well`.
    """
    return _parse(_decode(data, source_name), source_name, required, extra_nulls)


def read_well(
    path: str | os.PathLike[str],
    *,
    required: Sequence[str] = ("vp", "vs", "density"),
    extra_nulls: Sequence[float] = (),
) -> WellLogs:
    """Read a LAS 1.2/2.0 file into canonical curves in Porecast units.

    Parameters
    ----------
    path : str or path-like
        LAS file.
    required : sequence of str, default ("vp", "vs", "density")
        Canonical curves that must be present (keys of :data:`CURVE_ALIASES`).
    extra_nulls : sequence of float, default ()
        Values read as missing besides the declared NULL, for files that use
        a second null marker (e.g. -9999).

    Returns
    -------
    WellLogs
        Depth in m (converted from FT/F), increasing; curves in
        :data:`CANONICAL_UNITS` with NaN for nulls.

    Raises
    ------
    ValueError
        See the module docstring; every message names the file and, where it
        applies, the curve, unit, line or byte offset.
    """
    path = Path(path)
    return _parse(_decode(path.read_bytes(), path.name), path.name, required, extra_nulls)


# --------------------------------------------------------------------------- writing


def write_well(
    path: str | os.PathLike[str],
    logs: WellLogs,
    *,
    null_value: float = -999.25,
    fsync: bool = True,
) -> Path:
    """Write well logs as a LAS 2.0 file (via lasio), atomically.

    Depth is written as ``DEPT`` in M and each canonical curve under the
    mnemonic and unit of :data:`WRITE_MNEMONICS`; NaN becomes ``null_value``.
    Numbers keep 10 significant digits. The location goes to ``~W X``/``Y``
    (M).

    Parameters
    ----------
    path : str or path-like
    logs : WellLogs
    null_value : float, default -999.25
    fsync : bool, default True

    Returns
    -------
    pathlib.Path
    """
    if not math.isfinite(null_value) or null_value > SENTINEL_LIMIT:
        raise ValueError(f"null_value must be at most {SENTINEL_LIMIT:g} (got {null_value})")
    las = lasio.LASFile()
    las.well["WELL"].value = logs.name
    las.well["NULL"].value = null_value
    las.append_curve("DEPT", logs.depth, unit="M", descr="Depth")
    for canon, values in logs.curves.items():
        mnem, unit = WRITE_MNEMONICS[canon]
        las.append_curve(mnem, values, unit=unit, descr=canon)
    if logs.location is not None:
        x, y = logs.location
        las.well.append(lasio.HeaderItem("X", unit="M", value=float(x), descr="Well x"))
        las.well.append(lasio.HeaderItem("Y", unit="M", value=float(y), descr="Well y"))
    final = Path(path)
    with atomic_path(final, fsync=fsync) as tmp:
        with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
            las.write(fh, version=2.0, wrap=False, fmt="%.10g")
    return final
