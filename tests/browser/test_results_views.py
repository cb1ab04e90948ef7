"""Results pages of cube classifications and blind tests, read as a person would: the
section through the classified cube (layers, lines, read-out) and the logs beside
predicted facies at a well with the confusion matrix, checked against the API."""

from __future__ import annotations

import csv
import io
import re
from typing import Any

import numpy as np
import pytest
from browser_helpers import shot
from world import CUBE, cube_facies, login

SECTION_TRACE = """() => { const el = document.getElementById('section'); const d = el.data[0];
  const l = el.layout; return {type: d.type, x: d.x, y: d.y, z: d.z, zmin: d.zmin, zmax: d.zmax,
  colorscale: d.colorscale, colorbar: d.colorbar ? d.colorbar.title.text : null,
  xtitle: l.xaxis.title.text, ytitle: l.yaxis.title.text, yrange: l.yaxis.range}; }"""


def _palette(page: Any) -> list[str]:
    """The facies colour sequence of frontend/js/palette.js, as the page has it."""
    return page.evaluate("import('/js/palette.js').then((m) => [...m.FACIES_SEQUENCE])")


def _open(page: Any, run_id: int) -> None:
    page.goto(f"/results.html?run={run_id}")
    page.wait_for_selector("body[data-ready='1']")


def _hover_centre(page: Any, plot: str) -> None:
    box = page.locator(f"{plot} .nsewdrag").first.bounding_box()
    page.mouse.move(box["x"] + box["width"] * 0.5, box["y"] + box["height"] * 0.4)
    page.mouse.move(box["x"] + box["width"] * 0.52, box["y"] + box["height"] * 0.42)


def test_section_through_the_classified_cube(sessions, world, cube_run):
    run_id = cube_run["id"]
    api = login(world.base_url, "geophysicist1")
    s = sessions("geophysicist1")
    page = s.page
    _open(page, run_id)
    assert page.is_hidden("#map-views") and page.is_hidden("#well-panel")
    assert "cube classification" in page.inner_text("#run-sub")
    page.wait_for_selector("#section[data-layer='most_likely'] .main-svg")
    n_il, n_xl, ns = cube_run["result"]["shape"]
    assert (n_il, n_xl, ns) == (CUBE["ny"], CUBE["nx"], CUBE["n_samples"])

    # The middle line by default: the heatmap holds the API's section, samples down, traces across.
    ref = api.get(f"/api/runs/{run_id}/section").json()
    tr = page.evaluate(SECTION_TRACE)
    assert tr["type"] == "heatmap" and ref["line"] == n_il // 2
    assert len(tr["z"]) == ns and all(len(row) == n_xl for row in tr["z"])
    assert tr["z"] == ref["z"]
    assert tr["x"] == [CUBE["x0"] + CUBE["dx"] * i for i in range(n_xl)]
    assert tr["y"] == [CUBE["t0_ms"] + CUBE["dt_ms"] * k for k in range(ns)]
    assert tr["xtitle"] == "x (m)" and tr["ytitle"] == "Two-way time (ms)"
    assert tr["yrange"][0] > tr["yrange"][1]  # time increases downwards
    # Facies colours in the scenario's order, from the palette.
    colours = _palette(page)
    names = [f["name"] for f in ref["facies"]]
    assert [tr["colorscale"][2 * j][1] for j in range(len(names))] == colours[:len(names)]
    legend = page.inner_text("[data-testid=section-legend]")
    assert all(n in legend for n in names) and "%" in legend
    # What is drawn is the invented survey's section: shale around a sand layer over the high.
    truth = cube_facies()[ref["line"]].T  # (samples, traces)
    shown = np.array([[-1 if v is None else v for v in row] for row in tr["z"]])
    shale = truth == 0
    assert np.mean(shown[shale] == 0) > 0.9
    assert np.mean(shown[~shale] > 0) > 0.7
    where = page.inner_text("[data-testid=section-where]")
    assert f"inline {CUBE['first_inline'] + ref['line']}" in where and f"of {n_il}" in where
    shot(page, "16-cube-section-facies")

    # Another line: the choice of line changes the heatmap to that inline.
    assert page.locator("#line option").count() == n_il
    page.select_option("#line", "1")
    page.wait_for_selector("#section[data-line='1']")
    line1 = api.get(f"/api/runs/{run_id}/section", params={"line": 1}).json()
    assert page.evaluate(SECTION_TRACE)["z"] == line1["z"] != ref["z"]
    assert f"inline {CUBE['first_inline'] + 1}" in page.inner_text("[data-testid=section-where]")
    page.click("#line-next")
    page.wait_for_selector("#section[data-line='2']")
    line2 = api.get(f"/api/runs/{run_id}/section", params={"line": 2}).json()
    assert page.evaluate(SECTION_TRACE)["z"] == line2["z"]
    page.click("#line-prev")
    page.click("#line-prev")
    page.wait_for_selector("#section[data-line='0']")
    assert page.is_disabled("#line-prev") and not page.is_disabled("#line-next")

    # Another layer on the same line: the probability of gas sand, on a 0-1 scale with its unit
    # (on the crest line, where there is gas).
    mid = ref["line"]
    page.select_option("#line", str(mid))
    page.wait_for_selector(f"#section[data-line='{mid}']")
    page.select_option("#sec-layer", "posterior:gas sand")
    page.wait_for_selector(f"#section[data-layer='posterior:gas sand'][data-line='{mid}']")
    post = api.get(f"/api/runs/{run_id}/section",
                   params={"line": mid, "layer": "posterior:gas sand"}).json()
    tr = page.evaluate(SECTION_TRACE)
    assert tr["z"] == post["z"] and post["kind"] == "posterior"
    flat = [v for row in tr["z"] for v in row if v is not None]
    assert len(flat) == ns * n_xl and 0.0 <= min(flat) < 0.5 < max(flat) <= 1.0
    assert (tr["zmin"], tr["zmax"]) == (0, 1) and tr["colorbar"] == "P(gas sand) (frac.)"
    assert page.is_hidden("[data-testid=section-legend]")  # the colour bar says it

    # Pointing at the section reads out the value under the pointer, with its place and units.
    _hover_centre(page, "[data-testid=section]")
    page.wait_for_selector("[data-testid=section-readout]:has-text(' ms: P(gas sand) ')")
    text = page.inner_text("[data-testid=section-readout]")
    m = re.fullmatch(r"inline (\d+), crossline (\d+), x (\d+) m, time (\d+) ms: P\(gas sand\) "
                     r"([\d.e-]+) frac\.", text)
    assert m, text
    row = int(page.get_attribute("[data-testid=section-readout]", "data-row"))
    col = int(page.get_attribute("[data-testid=section-readout]", "data-col"))
    assert int(m.group(1)) == CUBE["first_inline"] + mid
    assert int(m.group(2)) == CUBE["first_crossline"] + col
    assert float(m.group(3)) == post["x"][col] and float(m.group(4)) == post["y"][row]
    assert float(m.group(5)) == pytest.approx(post["z"][row][col], abs=5e-4 + 1e-3 * abs(
        post["z"][row][col]))  # shown to 3 significant digits
    shot(page, "17-cube-section-probability")

    # A QC layer has its own unit on the colour bar.
    page.select_option("#sec-layer", "mahalanobis")
    page.wait_for_selector("#section[data-layer='mahalanobis']")
    assert page.evaluate(SECTION_TRACE)["colorbar"] == "Mahalanobis distance (std. dev.)"
    api.close()


def test_cube_section_for_a_viewer_explains_what_is_missing(sessions, world, cube_run):
    s = sessions("viewer1")
    page = s.page
    _open(page, cube_run["id"])
    page.wait_for_selector("#section .empty")
    text = page.inner_text("#section")
    assert "(viewer) shows run summaries only, not the section" in text
    assert page.is_hidden("#sec-layer") and page.is_hidden("#line-next")
    assert "cannot download run files" in page.inner_text("[data-testid=run-files]")
    assert page.locator("[data-testid=run-files] a").count() == 0
    shot(page, "19-cube-section-viewer")


def _csv_columns(text: str) -> dict[str, list[str]]:
    rows = list(csv.reader(io.StringIO(text)))
    return {name: [r[i] for r in rows[1:]] for i, name in enumerate(rows[0])}


def test_blind_test_at_a_well_logs_facies_and_confusion_matrix(sessions, world, calibrate_run):
    run_id = calibrate_run["id"]
    api = login(world.base_url, "geologist1")
    res = api.get(f"/api/runs/{run_id}").json()["result"]
    logs = _csv_columns(api.get(f"/api/runs/{run_id}/artefacts/well_facies.csv").text)
    s = sessions("geologist1")
    page = s.page
    _open(page, run_id)
    assert page.is_hidden("#map-views") and page.is_hidden("#section-panel")
    assert page.input_value("#well") == "0" and "Invented-1" in page.inner_text("#well")
    page.wait_for_selector("[data-testid=well-tracks] .main-svg")

    # Five log tracks and two facies strips over the same depths.
    tracks = page.evaluate("""() => { const el = document.getElementById('tracks');
      return {traces: el.data.map((t) => ({type: t.type || 'scatter', name: t.name, x: t.x,
        y: t.y, z: t.z, colorscale: t.colorscale, xaxis: t.xaxis})),
        titles: Object.keys(el.layout).filter((k) => k.startsWith('xaxis')).sort()
          .map((k) => el.layout[k].title.text), y: el.layout.yaxis.title.text}; }""")
    assert tracks["titles"] == ["Vp (m/s)", "Vs (m/s)", "Density (g/cm³)", "Vshale (frac.)",
                                "Sw (frac.)", "Facies from logs", "Predicted facies"]
    assert tracks["y"] == "Depth (m)"
    depth = [float(v) for v in logs["depth_m"]]
    by_name = {t["name"]: t for t in tracks["traces"]}
    assert len(tracks["traces"]) == 7
    for name, col in (("Vp", "vp_m_s"), ("Vs", "vs_m_s"), ("Density", "density_g_cm3"),
                      ("Vshale", "vshale"), ("Sw", "sw")):
        t = by_name[name]
        assert t["type"] == "scatter" and t["y"] == depth
        assert t["x"] == [float(v) for v in logs[col]]
    labels = res["labels"]
    for name, col in (("facies from logs", "facies_cutoff"), ("predicted facies",
                                                              "facies_predicted")):
        t = by_name[name]
        assert t["type"] == "heatmap" and t["y"] == depth
        assert [r[0] for r in t["z"]] == [labels.index(f) if f in labels else None
                                          for f in logs[col]]
        assert [t["colorscale"][2 * j][1] for j in range(len(labels))] == \
            _palette(page)[:len(labels)]
    assert set(logs["facies_cutoff"]) <= set(labels)
    legend = page.inner_text("[data-testid=well-legend]")
    assert all(f in legend for f in labels) and "10 m" in legend

    # The confusion matrix shows the run's own numbers, cell by cell.
    assert page.locator("[data-testid=confusion] thead th").all_inner_texts()[1:len(labels) + 1] \
        == labels
    cells = page.evaluate("""() => [...document.querySelectorAll(
      "[data-testid=confusion] tbody td[data-row]")].map((td) =>
      [Number(td.dataset.row), Number(td.dataset.col), td.textContent])""")
    shown = np.zeros((len(labels), len(labels)), dtype=int)
    for i, j, text in cells:
        shown[i, j] = int(text)
    assert len(cells) == len(labels) ** 2
    assert shown.tolist() == res["matrix"]
    assert shown.sum() == res["n_samples"] > 0
    row_totals = page.locator("[data-testid=confusion] tbody td.total").all_inner_texts()
    assert [int(v) for v in row_totals] == [sum(r) for r in res["matrix"]]
    accuracy = page.inner_text("[data-testid=accuracy]")
    shown = re.search(r"Accuracy ([\d.]+) %", accuracy)
    assert shown, accuracy
    # Shown to 3 significant digits (the page rounds half up, Python half to even).
    assert float(shown.group(1)) == pytest.approx(100 * res["accuracy"], abs=0.051)
    assert f"over {res['n_samples']} log samples" in accuracy
    # The covariates used at the well, with units; the ones not given are marked assumed.
    panel = page.inner_text("#confusion")
    uplift = float(f"{res['covariates']['net_uplift_m']:.4g}")
    assert f"Net uplift (erosion): {uplift:g} m" in panel
    assert re.search(r"Present depth of horizon: [\d.]+ m \(assumed\)", panel)
    files = page.inner_text("[data-testid=run-files]")
    assert "calibration.json" in files and "well_facies.csv" in files
    shot(page, "18-blind-test-at-a-well")
    api.close()
