"""``porecast classify``, ``porecast calibrate`` and ``porecast sensitivity`` sub-commands."""

from __future__ import annotations

import argparse
import json
import shutil
import tempfile
from pathlib import Path
from types import SimpleNamespace
from typing import Any

import numpy as np

from .io import GridData, atomic_path, write_npz
from .physics import forward
from .services import calibration as calibration_service
from .services import classification as cls
from .services import sensitivity as sensitivity_service
from .services.run_execution import prospect_risks
from .services.simulation import load


def _pairs(items: list[str] | None, what: str) -> dict[str, str]:
    out: dict[str, str] = {}
    for item in items or []:
        if "=" in item:
            name, value = item.split("=", 1)
        elif what == "attribute":
            name, value = Path(item).stem, item
        else:
            raise ValueError(f"--{what} takes NAME=VALUE (got {item!r})")
        if name in out:
            raise ValueError(f"--{what} {name} given twice")
        out[name.strip()] = value.strip()
    return out


def _train(args: argparse.Namespace, progress: Any) -> tuple[Any, cls.FaciesModel]:
    sc, _ = load(args.scenario)
    result = forward.simulate(sc, realisations=args.realisations, progress=progress)
    return sc, cls.train(result, sc)


def _json_default(value: Any) -> Any:
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, np.generic):
        return value.item()
    raise TypeError(f"not JSON serialisable: {type(value).__name__}")


def _write_json(path: Path, doc: dict[str, Any]) -> None:
    with atomic_path(path) as tmp:
        Path(tmp).write_text(json.dumps(doc, indent=1, default=_json_default), encoding="utf-8")


def _read_prospects(path: str) -> list[dict[str, Any]]:
    try:
        doc = json.loads(Path(path).read_text(encoding="utf-8"))
    except json.JSONDecodeError as exc:
        raise ValueError(f"{path} is not valid JSON: {exc.msg} at line {exc.lineno}") from None
    if not isinstance(doc, list) or not all(
        isinstance(p, dict) and "name" in p and "outline" in p for p in doc
    ):
        raise ValueError(f'{path}: expected a list of {{"name": ..., "outline": [[x, y], ...]}}')
    return doc


def _cmd_classify(args: argparse.Namespace) -> int:
    from .cli import ProgressBar

    bar = ProgressBar("train", enabled=not args.quiet)
    try:
        sc, model = _train(args, bar)
    finally:
        bar.close()
    attrs = _pairs(args.attributes, "attribute")
    covs = _pairs(args.covariate, "covariate")
    out = Path(args.out)
    first = attrs.get(model.attributes[0]) if model.attributes else None
    summary: dict[str, Any] = {
        "kind": "porecast.classification",
        "scenario": sc.name,
        "seed": sc.seed,
        "facies": list(model.facies),
        "attributes": list(model.attributes),
        "varying_covariates": list(model.axes),
        "caution": "Screening estimates for exploration decisions; not for well design, "
        "drilling or well control.",
    }
    if first is not None and cls.is_cube(first):
        cov_maps = {name: cls.read_map(path, name) for name, path in covs.items()}
        cov_arrays = {
            n: (d.values[n] if n in d.values else next(iter(d.values.values())))
            for n, d in cov_maps.items()
        }
        stage = Path(tempfile.mkdtemp(prefix=".classify-", dir=out.parent if out.parent.exists()
                                      else None))
        try:
            cbar = ProgressBar("classify", enabled=not args.quiet)
            try:
                result, clamped = cls.classify_cube(
                    model, attrs, cov_arrays, stage, max_mahalanobis=args.max_mahalanobis,
                    progress=lambda d, t: cbar(d, t, "traces"),
                )
            finally:
                cbar.close()
            out.mkdir(parents=True, exist_ok=True)
            for path in result.outputs.values():
                shutil.move(str(path), out / Path(path).name)
        finally:
            shutil.rmtree(stage, ignore_errors=True)
        summary.update(kind_of_input="cube", shape=list(result.shape), n_clamped=clamped,
                       n_dead_traces=result.n_dead_traces,
                       n_no_data_samples=result.n_no_data_samples,
                       outputs=sorted(Path(p).name for p in result.outputs.values()))
    else:
        grid, values = cls.map_attributes(model, attrs)
        cov_arrays = cls.covariate_maps(model, covs, grid.shape, "the attribute maps")
        res = cls.classify_map(model, values, cov_arrays, max_mahalanobis=args.max_mahalanobis)
        maps = {f"posterior_{cls.slug(f)}": res["posterior"][..., j]
                for j, f in enumerate(model.facies)}
        maps.update({k: np.asarray(res[k], dtype=float) for k in cls.MAP_OUTPUTS})
        out.mkdir(parents=True, exist_ok=True)
        write_npz(out / "classification.npz", GridData(grid.with_attributes(tuple(maps)), maps))
        valid = res["most_likely"] >= 0
        summary.update(
            kind_of_input="map", shape=list(grid.shape), n_clamped=res["n_clamped"],
            n_no_data=int((~valid).sum()),
            facies_fraction={f: float(np.mean(res["most_likely"][valid] == j))
                             for j, f in enumerate(model.facies)} if valid.any() else {},
            outputs=["classification.npz"],
        )
        if args.prospects:
            summary["prospects"] = _prospect_risks(args, model, grid, res["posterior"], sc.seed)
    _write_json(out / "summary.json", summary)
    if not args.quiet:
        print(json.dumps({k: v for k, v in summary.items() if k != "caution"}, indent=1,
                         default=_json_default))
    return 0


def _prospect_risks(args, model, grid, posterior, seed) -> list[dict[str, Any]]:
    """Risk numbers per prospect: the service's function, a bad outline an error here."""
    rows = prospect_risks(posterior, grid, list(model.hydrocarbon),
                          _read_prospects(args.prospects), seed=seed,
                          correlation_length_m=args.correlation_length)
    for row in rows:
        if "error" in row:
            raise ValueError(f"prospect {row['name']}: {row['error']}")
        row.pop("prospect_id", None)
    return rows


def _cmd_calibrate(args: argparse.Namespace) -> int:
    from .cli import ProgressBar

    bar = ProgressBar("train", enabled=not args.quiet)
    try:
        sc, model = _train(args, bar)
    finally:
        bar.close()
    given = {k: float(v) for k, v in _pairs(args.covariate, "covariate").items()}
    res = calibration_service.calibrate_well(
        sc, model, args.well, covariates=given, vshale_cutoff=args.vshale_cutoff,
        sw_cutoff=args.sw_cutoff, block_m=args.block, hydrocarbon_facies=args.hydrocarbon_facies,
    )
    logs = res.pop("logs")
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    with atomic_path(out / "well_facies.csv") as tmp, open(tmp, "w", encoding="utf-8") as fh:
        head = ["depth_m", "vp_m_s", "vs_m_s", "density_g_cm3", "vshale", "sw",
                *model.attributes, "facies_cutoff", "facies_predicted",
                *(f"p_{cls.slug(f)}" for f in model.facies)]
        fh.write(",".join(head) + "\n")
        for i in range(logs["depth_m"].size):
            nums = [logs["depth_m"][i], logs["vp"][i], logs["vs"][i], logs["density"][i],
                    logs["vshale"][i], logs["sw"][i], *logs["attributes"][i]]
            tail = [logs["facies_cutoff"][i], logs["facies_predicted"][i]]
            post = [f"{v:.4f}" for v in logs["posterior"][i]]
            fh.write(",".join([f"{v:.6g}" for v in nums] + tail + post) + "\n")
    res["caution"] = ("Screening estimates for exploration decisions; not for well design, "
                      "drilling or well control.")
    _write_json(out / "calibration.json", res)
    if not args.quiet:
        c = res["confusion"]
        print(f"well {res['well']}: {c['n_samples']} samples, accuracy {c['accuracy']:.3f}")
        width = max(len(x) for x in c["labels"])
        print(" " * (width + 2) + "  ".join(f"{x[:10]:>10}" for x in c["labels"]) + "   recall")
        for name, row, rec in zip(c["labels"], c["matrix"], c["recall"], strict=True):
            print(f"{name:>{width}}  " + "  ".join(f"{v:>10d}" for v in row)
                  + f"   {'-' if rec is None else f'{rec:.2f}':>6}")
        for line in res["assumed"]:
            print(f"assumed: {line}")
    return 0


def _cmd_sensitivity(args: argparse.Namespace) -> int:
    from .cli import ProgressBar

    sc, _ = load(args.scenario)
    prospects = _read_prospects(args.prospects)
    # What the maps must supply: the scenario's attributes and its varying covariates.
    node_axes, _ = forward.covariate_grid(sc)
    probe = SimpleNamespace(attributes=tuple(sc.rockphysics.seismic.attributes),
                            axes=tuple(c for c, v in node_axes.items() if len(v) > 1))
    grid, values = cls.map_attributes(probe, _pairs(args.attributes, "attribute"))
    covs = cls.covariate_maps(probe, _pairs(args.covariate, "covariate"), grid.shape,
                              "the attribute maps")
    bar = ProgressBar("sensitivity", enabled=not args.quiet)
    try:
        doc = sensitivity_service.prospect_sensitivity(
            sc, values, grid, covs, prospects, realisations=args.realisations,
            low_q=args.low_quantile, high_q=args.high_quantile, fix_others=args.fix_others,
            correlation_length_m=args.correlation_length,
            progress=lambda d, t, label: bar(d, t, label))
    finally:
        bar.close()
    doc.update(kind="porecast.sensitivity", scenario=sc.name, seed=sc.seed,
               caution="Screening estimates for exploration decisions; not for well design, "
               "drilling or well control.")
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    with atomic_path(out / "tornado.html") as tmp:
        sensitivity_service.tornado_figure(doc).write_html(tmp, include_plotlyjs=True,
                                                           full_html=True)
    _write_json(out / "sensitivity.json", doc)
    if not args.quiet:
        for name, per in doc["tornado"].items():
            for outcome, label, scale in (("probability_hc", "P(hydrocarbon)", ""),
                                          ("expected_area_km2", "expected hc area", " km2")):
                t = per[outcome]
                print(f"{name}: {label} {t['base']:.3f}{scale} at base; largest swings:")
                for s in t["swings"][:5]:
                    print(f"  {s['path']:<52s} {s['outcome_low']:.3f} .. "
                          f"{s['outcome_high']:.3f}{scale}")
        for facies, entry in doc["indices"].items():
            if "indices" not in entry:
                print(f"{facies}: no first-order indices ({entry['note']})")
                continue
            print(f"{facies}: first-order indices of P(hydrocarbon) over "
                  f"{entry['n_samples']} realisations (mean {entry['mean_probability_hc']:.3f}):")
            for path, e in list(entry["indices"].items())[:5]:
                print(f"  {path:<52s} {e['value']:.3f} +/- {e['standard_error']:.3f}")
    return 0


def add_analysis_commands(sub: argparse._SubParsersAction) -> None:
    """Register ``classify``, ``calibrate`` and ``sensitivity``."""
    p = sub.add_parser("classify", help="facies probabilities of attribute maps or cubes")
    p.add_argument("scenario", help="scenario JSON file")
    p.add_argument("--attributes", nargs="+", required=True, metavar="[NAME=]FILE",
                   help="one file per attribute (CSV/XYZ, .npy, .npz map; SEG-Y or 3-D .npy "
                   "cube); NAME defaults to the file name without suffix")
    p.add_argument("--covariate", action="append", metavar="NAME=FILE",
                   help="covariate map, e.g. net_uplift_m=uplift.xyz (repeat per covariate)")
    p.add_argument("--prospects", help="JSON list of prospect outlines (maps only)")
    p.add_argument("--correlation-length", type=float, default=None, metavar="M",
                   help="spatial correlation length of the p-field risk simulation, m")
    p.add_argument("--max-mahalanobis", type=float, default=None,
                   help="leave samples farther than this from every facies unclassified")
    p.add_argument("--realisations", type=int, default=None)
    p.add_argument("--out", required=True, help="output folder")
    p.add_argument("--quiet", action="store_true")
    p.set_defaults(handler=_cmd_classify)

    c = sub.add_parser("calibrate", help="blind test of a scenario at a well (LAS 2.0)")
    c.add_argument("scenario", help="scenario JSON file")
    c.add_argument("--well", required=True, help="LAS 2.0 file")
    c.add_argument("--covariate", action="append", metavar="NAME=VALUE",
                   help="covariate value at the well, e.g. net_uplift_m=400")
    c.add_argument("--vshale-cutoff", type=float, default=0.40)
    c.add_argument("--sw-cutoff", type=float, default=0.60)
    c.add_argument("--block", type=float, default=10.0, metavar="M",
                   help="blocking window of the attribute logs, m (0 = none)")
    c.add_argument("--hydrocarbon-facies", default=None,
                   help="facies name for sands below the water-saturation cut-off")
    c.add_argument("--realisations", type=int, default=None)
    c.add_argument("--out", required=True, help="output folder")
    c.add_argument("--quiet", action="store_true")
    c.set_defaults(handler=_cmd_calibrate)

    s = sub.add_parser("sensitivity",
                       help="which uncertain input moves each prospect's risk numbers most")
    s.add_argument("scenario", help="scenario JSON file")
    s.add_argument("--attributes", nargs="+", required=True, metavar="[NAME=]FILE",
                   help="attribute maps, as for classify")
    s.add_argument("--covariate", action="append", metavar="NAME=FILE",
                   help="covariate map, as for classify")
    s.add_argument("--prospects", required=True, help="JSON list of prospect outlines")
    s.add_argument("--low-quantile", type=float, default=0.1,
                   help="quantile of each input for its low swing (default 0.1)")
    s.add_argument("--high-quantile", type=float, default=0.9,
                   help="quantile of each input for its high swing (default 0.9)")
    s.add_argument("--fix-others", choices=("mean", "median"), default=None,
                   help="fix the inputs not being swung (default: leave them uncertain)")
    s.add_argument("--correlation-length", type=float, default=None, metavar="M",
                   help="spatial correlation length of the p-field risk simulation, m")
    s.add_argument("--realisations", type=int, default=None,
                   help="realisations per facies and node in each evaluation")
    s.add_argument("--out", required=True, help="output folder")
    s.add_argument("--quiet", action="store_true")
    s.set_defaults(handler=_cmd_sensitivity)
