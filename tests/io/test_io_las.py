"""LAS wells: lasio round trips, unit conversion at the edge, aliases, malformed files.

Conversion references (exact by definition): 1 ft = 0.3048 m (international
yard and pound agreement, 1959), so a sonic slowness of DT us/ft is a
velocity of 304800 / DT m/s (common practice); 1 g/cm3 = 1000 kg/m3.
"""

from __future__ import annotations

import io

import lasio
import numpy as np
import pytest

from porecast.io.las import CURVE_ALIASES, WellLogs, read_well, read_well_bytes, write_well


def _lasio_file(path, curves, *, depth, depth_unit="M", null=-999.25, well="DEMO-7", items=()):
    """Write a LAS 2.0 file with lasio: curves = [(mnemonic, unit, values)]."""
    las = lasio.LASFile()
    las.well["WELL"].value = well
    las.well["NULL"].value = null
    las.append_curve("DEPT", depth, unit=depth_unit)
    for mnem, unit, values in curves:
        las.append_curve(mnem, values, unit=unit)
    for mnem, unit, value in items:
        las.well.append(lasio.HeaderItem(mnem, unit=unit, value=value))
    with open(path, "w") as fh:
        las.write(fh, version=2.0, fmt="%.8f")
    return path


@pytest.fixture
def logs(rng):
    n = 40
    depth = 2000.0 + 0.5 * np.arange(n)
    curves = {
        "vp": rng.uniform(2500, 4000, n),
        "vs": rng.uniform(1200, 2300, n),
        "density": rng.uniform(2.1, 2.6, n),
        "gr": rng.uniform(20, 150, n),
        "sw": rng.uniform(0.1, 1.0, n),
    }
    curves["vs"][5] = np.nan
    return WellLogs("DEMO-7", depth, curves, location=(431250.5, 6712890.25))


def test_write_then_read_round_trip(tmp_path, logs):
    path = write_well(tmp_path / "demo7.las", logs)
    back = read_well(path)
    assert back.name == "DEMO-7" and back.location == pytest.approx(logs.location)
    np.testing.assert_allclose(back.depth, logs.depth, rtol=1e-12)
    assert set(back.curves) == set(logs.curves)
    for name, values in logs.curves.items():
        np.testing.assert_allclose(back.curves[name], values, rtol=1e-9, equal_nan=True)
    assert back.units == {"vp": "m/s", "vs": "m/s", "density": "g/cm3", "gr": "API",
                          "sw": "fraction"}  # fmt: skip
    assert np.isnan(back.curves["vs"][5])


def test_read_well_bytes_matches_read_well(tmp_path, logs):
    path = write_well(tmp_path / "w.las", logs)
    a, b = read_well(path), read_well_bytes(path.read_bytes(), "upload.las")
    np.testing.assert_array_equal(a.curves["vp"], b.curves["vp"])


def test_feet_sonic_kgm3_and_percent_are_converted(tmp_path):
    depth_ft = np.array([6000.0, 6000.5, 6001.0, 6001.5])
    dt = np.array([100.0, 80.0, 120.0, 95.0])  # us/ft
    dts = np.array([200.0, 160.0, 240.0, 190.0])
    rhob = np.array([2300.0, 2450.0, 2200.0, 2650.0])  # kg/m3
    sw = np.array([35.0, 100.0, 60.0, 8.0])  # %
    path = _lasio_file(
        tmp_path / "ft.las",
        [("DT", "US/F", dt), ("DTS", "US/F", dts), ("RHOB", "KG/M3", rhob), ("SW", "%", sw)],
        depth=depth_ft, depth_unit="FT",
        items=[("X", "FT", 1000.0), ("Y", "FT", 2000.0)],
    )  # fmt: skip
    w = read_well(path)
    np.testing.assert_allclose(w.depth, depth_ft * 0.3048, rtol=1e-12)
    np.testing.assert_allclose(w.curves["vp"], 304800.0 / dt, rtol=1e-9)
    assert w.curves["vp"][0] == pytest.approx(3048.0)
    np.testing.assert_allclose(w.curves["vs"], 304800.0 / dts, rtol=1e-9)
    np.testing.assert_allclose(w.curves["density"], rhob / 1000.0, rtol=1e-12)
    np.testing.assert_allclose(w.curves["sw"], sw / 100.0, rtol=1e-12)
    assert w.location == pytest.approx((304.8, 609.6))
    assert w.mnemonics == {"vp": "DT", "vs": "DTS", "density": "RHOB", "sw": "SW"}
    assert w.source_units["density"] == "KG/M3"


def test_us_per_metre_sonic(tmp_path):
    path = _lasio_file(
        tmp_path / "usm.las",
        [("DTCO", "US/M", np.array([400.0, 250.0])), ("DTSM", "US/M", np.array([800.0, 500.0])),
         ("RHOZ", "G/CC", np.array([2.3, 2.4]))],
        depth=np.array([1000.0, 1000.1524]),
    )  # fmt: skip
    w = read_well(path)
    np.testing.assert_allclose(w.curves["vp"], [2500.0, 4000.0])
    assert w.mnemonics == {"vp": "DTCO", "vs": "DTSM", "density": "RHOZ"}


def test_direct_velocity_preferred_and_lower_case_mnemonics(tmp_path):
    path = _lasio_file(
        tmp_path / "pref.las",
        [("DT", "US/F", np.array([100.0, 100.0])), ("vp", "KM/S", np.array([3.1, 3.2])),
         ("vels", "m/s", np.array([1500.0, 1600.0])), ("zden", "g/cm3", np.array([2.2, 2.3]))],
        depth=np.array([10.0, 11.0]),
    )  # fmt: skip
    assert "vp  .KM/S" in path.read_text() or "vp .KM/S" in path.read_text()
    w = read_well(path)
    np.testing.assert_allclose(w.curves["vp"], [3100.0, 3200.0])
    assert w.mnemonics["vp"] == "VP" and w.mnemonics["vs"] == "VELS"  # lasio upper-cases


def test_neutron_porosity_is_not_porosity(tmp_path):
    path = _lasio_file(
        tmp_path / "n.las", [("NPHI", "V/V", np.array([0.2, 0.3])),
                             ("PHIE", "V/V", np.array([0.18, 0.25]))],
        depth=np.array([10.0, 11.0]),
    )  # fmt: skip
    w = read_well(path, required=())
    np.testing.assert_allclose(w.curves["neutron_porosity"], [0.2, 0.3])
    np.testing.assert_allclose(w.curves["porosity"], [0.18, 0.25])
    assert w.mnemonics["porosity"] == "PHIE"


def test_missing_required_curve_says_what_was_looked_for(tmp_path):
    path = _lasio_file(tmp_path / "m.las", [("DT", "US/F", np.array([90.0, 91.0])),
                                            ("GR", "GAPI", np.array([50.0, 60.0]))],
                       depth=np.array([10.0, 11.0]))  # fmt: skip
    looked = ", ".join(m for m, _ in CURVE_ALIASES["vs"])
    with pytest.raises(ValueError, match=rf"required curve 'vs' not found: looked for mnemonics "
                       rf"{looked}; the file has DT, GR"):  # fmt: skip
        read_well(path)


def test_percent_looking_fraction_refused(tmp_path):
    path = _lasio_file(tmp_path / "p.las", [("SW", "V/V", np.array([35.0, 80.0]))],
                       depth=np.array([10.0, 11.0]))  # fmt: skip
    with pytest.raises(ValueError, match=r"curve SW \(sw\) reaches 80 with unit 'V/V', which "
                       r"looks like percent"):  # fmt: skip
        read_well(path, required=("sw",))


def test_unknown_and_missing_units_refused(tmp_path):
    path = _lasio_file(tmp_path / "u.las", [("DT", "FOO", np.array([90.0, 91.0]))],
                       depth=np.array([10.0, 11.0]))  # fmt: skip
    with pytest.raises(ValueError, match=r"u.las: curve DT \(vp\) has unit 'FOO', not a known "
                       r"slowness unit"):  # fmt: skip
        read_well(path, required=("vp",))
    path = _lasio_file(tmp_path / "e.las", [("RHOB", "", np.array([2.3, 2.4]))],
                       depth=np.array([10.0, 11.0]))  # fmt: skip
    with pytest.raises(ValueError, match=r"curve RHOB \(density\) has unit '', not a known"):
        read_well(path, required=("density",))


def test_implausible_value_after_conversion_refused(tmp_path):
    # density in kg/m3 but labelled g/cm3
    path = _lasio_file(tmp_path / "k.las", [("RHOB", "G/CC", np.array([2.3, 2400.0]))],
                       depth=np.array([10.0, 11.0]))  # fmt: skip
    with pytest.raises(ValueError, match=r"is 2400 g/cm3 at depth 11 m, line \d+ after conversion"
                       r".*outside the plausible 0.5 to 5.5 g/cm3"):  # fmt: skip
        read_well(path, required=("density",))


HEADER = """~VERSION INFORMATION
 VERS.   2.0 : CWLS LOG ASCII STANDARD - VERSION 2.0
 WRAP.   NO  : ONE LINE PER DEPTH STEP
~WELL INFORMATION
 STRT.M  1000.0 : START DEPTH
 STOP.M  1001.0 : STOP DEPTH
 STEP.M     0.5 : STEP
 NULL.  -999.25 : NULL VALUE
 WELL.  INVENTED-2 : WELL
~CURVE INFORMATION
 DEPT.M     : DEPTH
 DT  .US/F  : SONIC
 RHOB.G/CC  : DENSITY
"""


def _write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text)
    return path


def test_hand_written_file_reads(tmp_path):
    text = HEADER + "~A DEPT DT RHOB\n1000.0 100.0 2.30\n1000.5 -999.25 2.35\n1001.0 90.0 2.40\n"
    w = read_well(_write(tmp_path, "ok.las", text), required=("vp", "density"))
    assert w.name == "INVENTED-2"
    np.testing.assert_allclose(w.curves["vp"], [3048.0, np.nan, 304800.0 / 90.0], equal_nan=True)


def test_missing_ascii_section_refused(tmp_path):
    with pytest.raises(ValueError, match=r"noa.las: no ~A \(ASCII log data\) section"):
        read_well(_write(tmp_path, "noa.las", HEADER))


def test_empty_ascii_section_refused(tmp_path):
    with pytest.raises(ValueError, match=r"the ~A section \(line 14\) has no data rows"):
        read_well(_write(tmp_path, "empty.las", HEADER + "~A\n\n"))


def test_undeclared_null_marker_refused_with_line(tmp_path):
    text = HEADER + "~A\n1000.0 100.0 2.30\n1000.5 -9999 2.35\n1001.0 90.0 2.40\n"
    path = _write(tmp_path, "null.las", text)
    message = (
        r"null.las: curve DT has the value -9999 at depth 1000.5 m, line 16, but the declared "
        r"NULL is -999.25.*extra_nulls=\(-9999,\)"
    )
    with pytest.raises(ValueError, match=message):
        read_well(path, required=("vp",))
    w = read_well(path, required=("vp",), extra_nulls=(-9999,))
    assert np.isnan(w.curves["vp"][1]) and np.isfinite(w.curves["vp"][[0, 2]]).all()


def test_missing_null_declaration_with_sentinels_refused(tmp_path):
    text = HEADER.replace(" NULL.  -999.25 : NULL VALUE\n", "")
    text += "~A\n1000.0 100.0 2.30\n1000.5 -999.25 2.35\n"
    with pytest.raises(ValueError, match="no NULL is declared in ~W"):
        read_well(_write(tmp_path, "nonull.las", text), required=("vp",))


def test_ragged_row_refused_with_line(tmp_path):
    text = HEADER + "~A\n1000.0 100.0 2.30\n1000.5 2.35\n1001.0 90.0 2.40\n"
    with pytest.raises(ValueError, match=r"rag.las, line 16: 2 values, expected 3 \(one per curve"):
        read_well(_write(tmp_path, "rag.las", text))


def test_text_in_data_refused_with_line_and_curve(tmp_path):
    text = HEADER + "~A\n1000.0 100.0 2.30\n1000.5 abc 2.35\n"
    with pytest.raises(ValueError, match=r"txt.las, line 16: value 'abc' in curve DT is not a num"):
        read_well(_write(tmp_path, "txt.las", text))


def test_binary_file_renamed_las_refused_with_offset(tmp_path):
    path = tmp_path / "core_photo.las"
    path.write_bytes(b"\x89PNG\r\n\x1a\n" + bytes(range(256)) * 4)
    with pytest.raises(ValueError, match=r"core_photo.las: not a LAS text file: control byte 0x1a "
                       r"at byte offset 6 \(line 2\)"):  # fmt: skip
        read_well(path)


def test_text_without_sections_refused(tmp_path):
    with pytest.raises(ValueError, match="not a LAS file: no ~ section headers"):
        read_well(_write(tmp_path, "notes.las", "depth,dt\n1000,100\n"))


def test_unknown_depth_unit_and_non_depth_index_refused(tmp_path):
    text = HEADER.replace(" DEPT.M     : DEPTH", " DEPT.S     : DEPTH") + "~A\n1 100 2.3\n"
    with pytest.raises(ValueError, match=r"depth unit 'S' of DEPT is not M or FT/F"):
        read_well(_write(tmp_path, "s.las", text))
    text = HEADER.replace(" DEPT.M     : DEPTH", " TIME.M     : TIME") + "~A\n1 100 2.3\n"
    with pytest.raises(ValueError, match=r"first curve TIME is not a depth index"):
        read_well(_write(tmp_path, "t.las", text))


def test_decreasing_depth_is_reversed_and_jumps_refused(tmp_path):
    text = HEADER + "~A\n1001.0 90.0 2.40\n1000.5 95.0 2.35\n1000.0 100.0 2.30\n"
    w = read_well(_write(tmp_path, "up.las", text), required=("vp",))
    np.testing.assert_allclose(w.depth, [1000.0, 1000.5, 1001.0])
    np.testing.assert_allclose(w.curves["vp"], 304800.0 / np.array([100.0, 95.0, 90.0]))
    assert any("reversed" in n for n in w.notes)
    text = HEADER + "~A\n1000.0 90.0 2.40\n1001.0 95.0 2.35\n1000.5 100.0 2.30\n"
    with pytest.raises(ValueError, match=r"not strictly monotonic at line 17"):
        read_well(_write(tmp_path, "jump.las", text), required=("vp",))


def test_wells_refuse_unknown_curve_names():
    with pytest.raises(ValueError, match=r"unknown curve name\(s\) \['rhob'\]"):
        WellLogs("w", np.array([1.0, 2.0]), {"rhob": np.array([2.0, 2.1])})


def test_written_file_is_las_2_with_null(tmp_path, logs):
    path = write_well(tmp_path / "w.las", logs)
    text = path.read_text()
    assert "VERS.                 2.0" in text or "VERS. 2.0" in " ".join(text.split())
    assert "-999.25" in text  # the NaN of vs
    las = lasio.read(io.StringIO(text))
    assert [c.mnemonic for c in las.curves] == ["DEPT", "VP", "VS", "RHOB", "GR", "SW"]


def test_wrapped_file_is_parsed_by_depth_step(tmp_path):
    las = lasio.LASFile()
    las.well["NULL"].value = -999.25
    las.append_curve("DEPT", np.arange(100.0, 104.0), unit="M")
    for k in range(12):  # enough columns that lasio wraps each depth step over two lines
        las.append_curve(f"AUX{k}", np.arange(4.0) + k)
    las.append_curve("DT", np.array([100.0, 90.0, -9999.0, 80.0]), unit="US/F")
    path = tmp_path / "wrapped.las"
    with open(path, "w") as fh:
        las.write(fh, version=2.0, wrap=True)
    text = path.read_text().splitlines()
    assert any(line.startswith("WRAP.") and "YES" in line for line in text)
    step_line = 1 + next(k for k, line in enumerate(text) if line.strip().startswith("102.0"))
    with pytest.raises(ValueError, match=rf"value -9999 at depth 102 m, line {step_line}, but"):
        read_well(path, required=("vp",))
    w = read_well(path, required=("vp",), extra_nulls=(-9999,))
    np.testing.assert_allclose(w.depth, [100.0, 101.0, 102.0, 103.0])
    np.testing.assert_allclose(w.curves["vp"], [3048.0, 304800 / 90, np.nan, 3810.0])
    # a depth step that runs into the next one is refused, not reflowed
    bad = text.copy()
    k = step_line - 1
    bad[k + 1] = bad[k + 1] + " 1.0"
    path.write_text("\n".join(bad) + "\n")
    with pytest.raises(ValueError, match=rf"line {k + 2}: wrapped depth step runs past its 14"):
        read_well(path, required=("vp",), extra_nulls=(-9999,))
