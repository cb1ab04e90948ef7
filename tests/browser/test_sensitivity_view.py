"""A sensitivity run started from the scenario workspace and its results page: the tornado
charts drawn in the browser hold the numbers of the run's sensitivity.json (bar ends, input
values, base line, colours, units), and the first-order indices table lists the run's
indices, largest first."""

from __future__ import annotations

import re
from typing import Any

import pytest
from browser_helpers import shot
from world import MapProject, build_map_project, login

TORNADO = """(el) => ({traces: el.data.map((t) => ({type: t.type, orientation: t.orientation,
  name: t.name, y: t.y, x: t.x, base: t.base, customdata: t.customdata, colour: t.marker.color,
  hovertext: t.hovertext})),
  xtitle: el.layout.xaxis.title.text, yrange: el.layout.yaxis.range,
  shape: el.layout.shapes[0], note: el.layout.annotations[0].text})"""

OUTCOME_AXES = {"probability_hc": "Probability of hydrocarbon (frac.)",
                "expected_area_km2": "Expected hydrocarbon area (km²)"}
MAX_BARS = 12


def _runs_api(client: Any) -> bool:
    return "/api/scenarios/{scenario_id}/runs" in client.get("/openapi.json").json()["paths"]


def _fix3(value: float) -> str:
    """Three decimals as the page shows them (no sign on a value that rounds to zero)."""
    return "0.000" if abs(value) < 0.0005 else f"{value:.3f}"


def _shown(t: dict[str, Any]) -> list[dict[str, Any]]:
    """The swings a chart draws: those that move the outcome, largest first, at most 12."""
    moving = [s for s in t["swings"]
              if s["outcome_low"] != t["base"] or s["outcome_high"] != t["base"]]
    return moving[:MAX_BARS]


@pytest.fixture(scope="module")
def study(world: Any) -> MapProject:
    """A project of its own (the world's maps and outlines), ready to run."""
    return build_map_project(world, "Invented sensitivity study")


def test_sensitivity_run_from_the_workspace_and_its_tornado_charts(sessions, world, study):
    api = login(world.base_url, "owner1")
    if not _runs_api(api):
        pytest.xfail("the run API (POST /api/scenarios/{id}/runs) is not in this build yet")
    sid = study.scenario_id
    prospects = sorted(api.get(f"/api/projects/{study.project_id}/prospects").json(),
                       key=lambda p: p["id"])
    s = sessions("owner1")
    page = s.page
    page.goto(f"/scenario.html?id={sid}")
    page.wait_for_selector("body[data-ready='1']")

    # Start it from the run panel: the maps and every prospect are chosen already.
    page.select_option("#run-kind", "sensitivity")
    assert page.input_value("#run-attr-intercept") == str(study.grid_ids["intercept"])
    cube_options = page.locator("#run-attr-intercept option:has-text('(cube)')").count()
    assert cube_options == 0  # maps only
    assert page.locator("#run-prospects option:checked").count() == len(prospects) == 2
    assert page.input_value("#run-low-q") == "0.1" and page.input_value("#run-high-q") == "0.9"
    page.fill("#run-realisations", "30")  # small: 2 x inputs + 1 runs of the whole chain
    page.fill("#run-high-q", "0.05")
    page.click("#run-start")
    # A quantile pair out of order is refused, with the field and the allowed range.
    page.wait_for_selector("[data-testid=run-note] .field-error:has-text('high_quantile')")
    note = page.inner_text("[data-testid=run-note]")
    assert "must be greater than low_quantile (0.1)" in note
    assert "0 < low_quantile < high_quantile < 1" in note
    page.fill("#run-high-q", "0.9")
    page.click("#run-start")  # every section is marked ready: one click starts it
    page.wait_for_selector("[data-testid=run-stage]:has-text('tornado')", timeout=60_000)
    stage = page.inner_text("[data-testid=run-stage]")
    assert re.search(r"Stage: tornado \(\d+ of \d+ evaluations\)", stage), stage
    shot(page, "20-sensitivity-run-progress")
    page.wait_for_selector("[data-testid=run-status]:has-text('succeeded'), "
                           "[data-testid=run-error]", timeout=240_000)
    assert not page.is_visible("[data-testid=run-error]"), \
        page.inner_text("[data-testid=run-error]")
    run_id = int(page.get_attribute("[data-testid=run-active] [data-run]", "data-run"))
    run = api.get(f"/api/runs/{run_id}").json()
    assert run["kind"] == "sensitivity" and run["status"] == "succeeded"
    assert run["parameters"]["prospect_ids"] == [p["id"] for p in prospects]
    assert run["readiness_override"] is False
    assert run["parameters"]["realisations"] == 30
    doc = api.get(f"/api/runs/{run_id}/artefacts/sensitivity.json").json()

    page.click("[data-testid=open-results]")
    page.wait_for_selector("body[data-ready='1']")
    assert "sensitivity of prospect risk" in page.inner_text("#run-sub")
    assert "not for well design" in page.inner_text("[data-testid=caution]")
    assert page.is_hidden("#map-views") and page.is_visible("#sensitivity-panel")
    what = page.inner_text("[data-testid=sens-what]")
    assert f"{len(doc['inputs'])} uncertain inputs" in what
    assert "10th and 90th percentile" in what and f"{doc['n_evaluations']} runs" in what

    # One tornado per prospect and outcome, with the run's numbers.
    palette = page.evaluate("import('/js/palette.js').then((m) => ({...m.SWING}))")
    drawn = 0
    names = [p["name"] for p in doc["prospects"]]
    assert names == [p["name"] for p in prospects]
    for name in names:
        for outcome, xtitle in OUTCOME_AXES.items():
            t = doc["tornado"][name][outcome]
            sel = f"[data-testid=tornado][data-prospect='{name}'][data-outcome='{outcome}']"
            shown = _shown(t)
            if not shown:
                flat = page.inner_text(f"[data-testid=tornado-flat][data-prospect='{name}']"
                                       f"[data-outcome='{outcome}']")
                assert "No input moves it" in flat
                continue
            page.wait_for_selector(f"{sel} .main-svg")
            tr = page.eval_on_selector(sel, TORNADO)
            drawn += 1
            assert tr["xtitle"] == xtitle
            assert tr["yrange"][0] > tr["yrange"][1]  # reversed: the first (largest) on top
            # the base: a line at the base value, labelled with it
            assert tr["shape"]["x0"] == tr["shape"]["x1"] == t["base"]
            assert tr["shape"]["line"]["color"] == palette["base"]
            assert tr["note"].startswith("base ")
            low, high = tr["traces"]
            for trace, side, colour in ((low, "low", palette["low"]),
                                        (high, "high", palette["high"])):
                assert trace["type"] == "bar" and trace["orientation"] == "h"
                assert trace["colour"] == colour and side in trace["name"]
                assert trace["base"] == t["base"]
                assert len(trace["y"]) == len(shown)
                for i, sw in enumerate(shown):
                    # each bar runs from the base to the outcome with the input at that value
                    assert trace["base"] + trace["x"][i] == pytest.approx(
                        sw[f"outcome_{side}"], rel=1e-12, abs=1e-15)
                    assert trace["customdata"][i] == [sw[f"{side}_value"],
                                                      sw[f"outcome_{side}"]]
            # plain words, not scenario paths
            assert low["y"] == high["y"]
            assert all("." not in label and "_" not in label for label in low["y"]), low["y"]
            sizes = [abs(sw["outcome_high"] - sw["outcome_low"]) for sw in shown]
            assert sizes == sorted(sizes, reverse=True)
            unit = "frac." if outcome == "probability_hc" else "km²"
            assert f" {unit} (" in low["hovertext"][0] and "percentile" in low["hovertext"][0]
    assert drawn >= 2  # the area of the lead on the high moves with the inputs at least

    # The plain-word names of paths the example scenario always has.
    labels = {y for sel in page.query_selector_all("[data-testid=tornado]")
              for y in sel.evaluate("(el) => el.data[0].y")}
    known = {"burial.covariates.present_depth_m.uncertainty":
             "Present depth of horizon: uncertainty",
             "geology.sand.porosity_surface": "Reservoir sand: depositional porosity",
             "rockphysics.fluids.hydrocarbon_saturation": "Hydrocarbon saturation"}
    shown_paths = {sw["path"] for name in names for o in OUTCOME_AXES
                   for sw in _shown(doc["tornado"][name][o])}
    for path, label in known.items():
        if path in shown_paths:
            assert label in labels, (label, labels)

    # Pointing at a bar shows its input value and the outcome, with units.
    boxes = [b for b in (p.bounding_box() for p in
                         page.locator("[data-testid=tornado]").first.locator(".bars path").all())
             if b is not None]
    widest = max(boxes, key=lambda b: b["width"])
    page.mouse.move(widest["x"] + widest["width"] / 2, widest["y"] + widest["height"] / 2)
    page.wait_for_selector(".hoverlayer .hovertext")
    hover = page.text_content(".hoverlayer .hovertext")
    assert "percentile" in hover and "from the base" in hover, hover

    # The first-order indices of each hydrocarbon facies, largest first, with ± and interval.
    explain = page.inner_text("[data-testid=idx-explain]")
    assert "share of the variance" in explain and "90 % interval" in explain
    for facies, entry in doc["indices"].items():
        table = f"[data-testid=indices-table][data-facies='{facies}']"
        if "indices" not in entry:
            continue
        rows = page.locator(f"{table} tbody tr")
        ranked = sorted(entry["indices"].items(), key=lambda kv: -kv[1]["value"])
        assert rows.count() == len(ranked)
        for i in (0, len(ranked) - 1):
            path, v = ranked[i]
            cells = rows.nth(i).locator("td").all_inner_texts()
            assert rows.nth(i).get_attribute("data-path") == path
            assert cells[1] == f"{_fix3(v['value'])} ± {_fix3(v['standard_error'])}"
            assert cells[2] == f"{_fix3(v['ci_low'])} to {_fix3(v['ci_high'])}"
        caption = page.inner_text(f"{table} caption")
        assert f"{entry['n_samples']} realisations of {facies}" in caption
    assert "sensitivity.json" in page.inner_text("[data-testid=run-files]")
    page.mouse.move(5, 5)  # the hover label off the charts
    page.wait_for_selector(".hoverlayer .hovertext", state="detached")
    shot(page, "21-sensitivity-results")

    # A viewer sees the run's summary, not the charts (no file access).
    v = sessions("viewer1")
    v.page.goto(f"/results.html?run={run_id}")
    v.page.wait_for_selector("body[data-ready='1']")
    assert "shows run summaries only, not the tornado charts" in v.page.inner_text("#tornadoes")
    summary = v.page.inner_text("[data-testid=sens-summary]")
    assert "Lead North" in summary and "Expected hydrocarbon area" in summary
    for p in run["result"]["prospects"]:
        for outcome, o in p["outcomes"].items():
            flat = all(sw["outcome_low"] == sw["outcome_high"] == o["base"]
                       for sw in doc["tornado"][p["name"]][outcome]["swings"])
            assert (o["largest"] is None) == flat
    if any(o["largest"] is None for p in run["result"]["prospects"]
           for o in p["outcomes"].values()):
        assert "no input moves it" in summary
    shot(v.page, "22-sensitivity-viewer")
    api.close()
