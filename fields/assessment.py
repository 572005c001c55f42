"""The orchestrator: scenario -> fields -> limits -> keep-out, as plain data.

Each function returns the JSON-ready dictionary of the stable contract
(``schema_version`` 1); the command line prints it or renders it as text.
Computation happens here and in the modules below; the CLI only formats.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray

from . import limits as limits_mod
from .cautions import CAUTION_TEXT
from .field import FieldResult, evaluate
from .keepout import KeepoutResult, keepout_distances
from .scenario import Scenario

SCHEMA_VERSION = 1


def limits_data(frequency_hz: float) -> dict[str, Any]:
    """Every known limit at a frequency (contract ``limits`` JSON)."""
    covered, uncovered = limits_mod.values_at(frequency_hz)
    return {
        "schema_version": SCHEMA_VERSION,
        "frequency_hz": frequency_hz,
        "limits": [
            {
                "id": v.id,
                "power_density_w_m2": v.power_density_w_m2,
                "e_v_m": v.e_v_m,
                "h_a_m": v.h_a_m,
                "averaging_time_s": v.averaging_time_s,
                "source": v.source,
                "tier": v.tier,
                "population": v.population,
                "expression": v.expression,
            }
            for v in covered
        ],
        "not_covering_frequency": list(uncovered),
        "caution": CAUTION_TEXT,
    }


def quotients_at(scenario: Scenario, result: FieldResult) -> dict[str, NDArray[np.float64]]:
    """Exposure quotient per scenario limit for time-averaged fields."""
    out = {}
    for limit_id in scenario.limit_ids:
        value = limits_mod.get_limit(limit_id).at(scenario.frequency_hz)
        out[limit_id] = limits_mod.quotient(
            value, result.power_density_w_m2, result.e_v_m, result.h_a_m
        )
    return out


def probe_data(
    scenario: Scenario, points_m: NDArray[np.float64]
) -> tuple[dict[str, Any], FieldResult]:
    """Fields and exposure quotients at points (contract ``probe`` JSON)."""
    from .places import allowed_seconds

    result = evaluate(scenario, points_m)
    quotients = quotients_at(scenario, result)
    points = []
    for i, p in enumerate(points_m):
        allowed, rules = allowed_seconds(scenario, quotients, i)
        points.append(
            {
                "position_m": [float(x) for x in p],
                "e_v_m": float(result.e_v_m[i]),
                "h_a_m": float(result.h_a_m[i]),
                "power_density_w_m2": float(result.power_density_w_m2[i]),
                "peak_power_density_w_m2": float(result.peak_power_density_w_m2[i]),
                "peak_e_v_m": float(result.peak_e_v_m[i]),
                "peak_h_a_m": float(result.peak_h_a_m[i]),
                "quotients": {k: float(q[i]) for k, q in quotients.items()},
                "allowed_s": allowed,
                "allowed_rule": {k: rules[k] for k, v in allowed.items() if v is not None},
            }
        )
    data = {
        "schema_version": SCHEMA_VERSION,
        "frequency_hz": scenario.frequency_hz,
        "scenario": scenario.name,
        "reflections": scenario.reflections,
        "points": points,
        "caution": CAUTION_TEXT,
    }
    return data, result


def keepout_entry(r: KeepoutResult) -> dict[str, Any]:
    """One ``keepout`` list entry (contract keys first)."""
    return {
        "limit": r.limit_id,
        "limit_w_m2": r.limit_w_m2,
        "distance_m": r.distance_m,
        "direction": None if r.direction is None else [float(x) for x in r.direction],
        "reached": r.reached,
        "averaging_time_s": r.averaging_time_s,
        "screening_distance_m": r.screening_distance_m,
        "model_uncertainty_db": r.uncertainty_db,
        "distance_with_uncertainty_m": r.distance_with_uncertainty_m,
        **(
            {}
            if r.outside_enclosure is None
            else {
                "outside_enclosure": {
                    k: (None if v is None else (list(map(float, v)) if k == "direction" else v))
                    for k, v in r.outside_enclosure.items()
                }
            }
        ),
    }


def uncertainty_data(scenario: Scenario, results: list[KeepoutResult]) -> dict[str, Any] | None:
    """The Monte Carlo spread of each keep-out (None without ``[uncertainty]``).

    Returns ``{"spec": ..., "per_limit": {id: (median_m, p95_m)}}``.
    """
    spec = scenario.uncertainty
    if spec is None:
        return None
    from .field import radiating_terms
    from .uncertainty import gain_sigma_db, keepout_spread

    spreads = keepout_spread(scenario, spec, results)
    return {
        "spec": {
            **spec.as_dict(),
            "gain_db_used": [gain_sigma_db(spec, t) for t in radiating_terms(scenario)],
            "method": "seeded Monte Carlo (PCG64), fields re-weighted per sample",
        },
        "per_limit": {s.limit_id: (s.median_m, s.p95_m) for s in spreads},
    }


def _add_spread(entries: list[dict[str, Any]], spread: dict[str, Any] | None) -> None:
    if spread is None:
        return
    for entry in entries:
        median, p95 = spread["per_limit"][entry["limit"]]
        entry["distance_median_m"] = median
        entry["distance_p95_m"] = p95


def keepout_data(scenario: Scenario) -> tuple[dict[str, Any], list[KeepoutResult]]:
    """Keep-out distance for each scenario limit (contract ``keepout`` JSON)."""
    results = keepout_distances(scenario)
    spread = uncertainty_data(scenario, results)
    data = {
        "schema_version": SCHEMA_VERSION,
        "frequency_hz": scenario.frequency_hz,
        "scenario": scenario.name,
        "average_power_w": scenario.average_power_w,
        "centre_m": [float(x) for x in scenario.centre_m],
        "reflections": scenario.reflections,
        "keepout": [keepout_entry(r) for r in results],
        "caution": CAUTION_TEXT,
    }
    _add_spread(data["keepout"], spread)
    if spread is not None:
        data["uncertainty"] = spread["spec"]
    return data, results


def readings_data(scenario: Scenario, readings: list[Any]) -> dict[str, Any]:
    """Survey readings against the time-averaged prediction (``readings --json``).

    Each reading's power density is compared with every scenario limit: the reading
    counts as over a limit where its quotient (the measured density against the
    limit's density) reaches one.
    """
    from .readings import compare_readings

    pts = np.array([r.position_m for r in readings])
    result = evaluate(scenario, pts)
    measured = np.array([r.power_density_w_m2 for r in readings])
    quotients = {}
    for limit_id in scenario.limit_ids:
        value = limits_mod.get_limit(limit_id).at(scenario.frequency_hz)
        quotients[limit_id] = limits_mod.quotient(value, measured)
    body = compare_readings(readings, result.power_density_w_m2, quotients)
    return {
        "schema_version": SCHEMA_VERSION,
        "frequency_hz": scenario.frequency_hz,
        "scenario": scenario.name,
        **body,
        "compared_with": "time-averaged prediction (duty cycle applied): a survey meter "
        "averages over at least a second, far longer than a mains cycle",
        "caution": CAUTION_TEXT,
    }


# ------------------------------------------------------------------------------------------
# Maps, comparison and the full assessment (keepclear map / compare / assess).
def named_points_data(
    scenario: Scenario, limit_ids: list[str] | tuple[str, ...] | None = None
) -> list[dict[str, Any]]:
    """The scenario's ``[[point]]`` places, probe-like, each with its ``name``."""
    if not scenario.points:
        return []
    ids = tuple(scenario.limit_ids if limit_ids is None else limit_ids)
    probed = scenario.with_limits(ids)
    pts = np.array([p.position_m for p in scenario.points])
    data, _ = probe_data(probed, pts)
    from .maps import point_letter
    from .places import add_spatial_averages

    add_spatial_averages(probed, data["points"])

    out = []
    for i, (p, entry) in enumerate(zip(scenario.points, data["points"], strict=True)):
        worst = max(entry["quotients"].items(), key=lambda kv: kv[1])
        out.append(
            {
                "name": p.name,
                "map_letter": point_letter(i),
                **entry,
                "worst_limit": worst[0],
                "worst_quotient": worst[1],
                "exceeds": [k for k, q in entry["quotients"].items() if q >= 1.0],
            }
        )
    return out


def map_files(
    run: Any,
    stem: str,
    style: Any = None,
    formats: tuple[str, ...] = ("png", "svg"),
    overlay: Any = None,
) -> dict[str, bytes]:
    """The files of one map run, by name, in the ``formats`` asked.

    ``{stem}.png``, ``{stem}.svg`` (the figure), ``{stem}.csv``, ``{stem}.npz`` (the
    grid) and ``zones-....geojson`` (the zones; ``map-`` in the stem becomes ``zones-``).
    """
    from . import maps, plots
    from .outputs import json_text

    files: dict[str, bytes] = {}
    if "png" in formats or "svg" in formats:
        fig = plots.map_figure(
            run.result, run.scenario, run.keepouts, style, run.zones, overlay=overlay
        )
        for fmt in ("png", "svg"):
            if fmt in formats:
                files[f"{stem}.{fmt}"] = plots.figure_bytes(fig, fmt)
    if "csv" in formats:
        files[f"{stem}.csv"] = maps.grid_csv_bytes(run.result)
    if "npz" in formats:
        files[f"{stem}.npz"] = maps.grid_npz_bytes(
            run.result, {"scenario": run.scenario.name, "summary": run.summary()}
        )
    if "geojson" in formats:
        zone_stem = stem.replace("map-", "zones-", 1) if stem.startswith("map-") else stem
        files[f"{zone_stem}.geojson"] = json_text(maps.map_geojson(run)).encode()
    return files


def map_data(run: Any, files: list[str] | None = None) -> dict[str, Any]:
    """The ``map --json`` object: plane, grid, zones and shapes per limit."""
    return {
        "schema_version": SCHEMA_VERSION,
        "frequency_hz": run.scenario.frequency_hz,
        "scenario": run.scenario.name,
        "reflections": run.scenario.reflections,
        "keepout": [keepout_entry(k) for k in run.keepouts],
        "map": run.summary(),
        "files": files or [],
        "caution": CAUTION_TEXT,
    }


def stage_output_folder(out_dir: str | Any) -> Any:
    """A fresh, empty staging folder for outputs bound for ``out_dir``.

    Beside ``out_dir`` when it does not exist yet (so it can be renamed into place
    whole); inside it, hidden, when it does.  Checks up front that the folder can be
    written, before any computation.

    Raises
    ------
    ResourceError
        Naming ``--out`` when the path is a file, its parent folder is missing, or
        nothing can be created there.
    """
    import os
    import tempfile
    from pathlib import Path

    from .errors import ResourceError

    out = Path(out_dir)
    label = str(out_dir)
    if out.exists() and not out.is_dir():
        raise ResourceError(
            f"'{label}' is a file, not a folder; give a folder", "argument", "--out"
        )
    parent = out.absolute().parent
    if not out.exists() and not parent.is_dir():
        what = "is not a folder" if parent.exists() else "does not exist"
        raise ResourceError(
            f"cannot create '{label}': '{parent}' {what}; create it first", "argument", "--out"
        )
    where = out if out.exists() else parent
    if not os.access(where, os.W_OK | os.X_OK):
        raise ResourceError(f"'{where}' cannot be written (permission denied)", "argument", "--out")
    try:
        staging = tempfile.mkdtemp(prefix=f".{out.name or 'out'}.", suffix=".partial", dir=where)
    except OSError as exc:
        raise ResourceError(
            f"'{where}' cannot be written ({exc.strerror})", "argument", "--out"
        ) from None
    return Path(staging)


def discard_staging(staging: Any) -> None:
    """Remove a staging folder and everything in it."""
    import shutil

    shutil.rmtree(staging, ignore_errors=True)


def publish_output_folder(staging: Any, out_dir: Any, protected: list[Any]) -> list[Any]:
    """Move the staged files into ``out_dir``; return their final paths.

    A new ``out_dir`` is the staging folder renamed (one atomic step).  Into an
    existing folder each file is renamed over its old version (each atomic), after
    checking that none would replace an input file or a folder.  On a refusal the
    staging folder is removed and nothing is written.
    """
    import os
    from pathlib import Path

    from .errors import ResourceError
    from .outputs import refuse_overwriting

    staging = Path(staging)
    out = Path(out_dir)
    names = sorted(p.name for p in staging.iterdir())
    try:
        for name in names:
            target = out / name
            refuse_overwriting(target, [Path(p) for p in protected])
            if target.is_dir():
                raise ResourceError(
                    f"'{target}' is a folder; cannot replace it by a file", "argument", "--out"
                )
        if not out.exists():
            umask = os.umask(0)
            os.umask(umask)
            os.chmod(staging, 0o777 & ~umask)
            try:
                os.rename(staging, out)
                return [out / n for n in names]
            except OSError:
                out.mkdir()
        for name in names:
            os.replace(staging / name, out / name)
        return [out / n for n in names]
    except OSError as exc:
        raise ResourceError(
            f"'{out}' cannot be written ({exc.strerror})", "argument", "--out"
        ) from None
    finally:
        if staging.exists():
            discard_staging(staging)


def run_assessment(
    scenario: Scenario,
    *,
    limit_ids: list[str] | tuple[str, ...] | None = None,
    height_m: float | None = None,
    half_extent_m: float | None = None,
    step_m: float | None = None,
    pixels: int | None = None,
    scenario_text: str | None = None,
    progress: Any = None,
    readings: list[Any] | None = None,
) -> tuple[dict[str, Any], dict[str, bytes]]:
    """The whole assessment: keep-out, points, maps, zones, comparison and report.

    Parameters
    ----------
    scenario : Scenario
    limit_ids : sequence of str, optional
        Limits to assess (default: the scenario's).
    height_m : float, optional
        Height of the floor-plane map and zones (default: the first source's) [m].
    half_extent_m, step_m, pixels : optional
        Grid settings of the maps (defaults from the keep-out radius).
    scenario_text : str, optional
        The scenario file as written, for the report.
    progress : callable, optional
        ``progress(label)`` returns a ``(done, total)`` callback or None.
    readings : list of Reading, optional
        Survey readings to compare and to mark on the maps.

    Returns
    -------
    data : dict
        The ``assessment.json`` object.
    files : dict
        File name -> bytes, every output (``assessment.json`` and ``report.html``
        included).
    """
    import math
    from importlib import metadata

    from . import maps, plots
    from .errors import InputError
    from .outputs import json_text
    from .report import render_report

    ids = tuple(scenario.limit_ids if limit_ids is None else limit_ids)
    if height_m is not None and not math.isfinite(height_m):
        raise InputError("must be a finite height in metres", "argument", "--height-m")

    def callback(label: str) -> Any:
        return progress(label) if progress is not None else None

    with maps.busy(progress, "keep-out search"):
        keepouts = keepout_distances(scenario, ids)
    centre = scenario.centre_m
    height = float(centre[2]) if height_m is None else float(height_m)
    grid_args: dict[str, Any] = {
        "half_extent_m": half_extent_m,
        "step_m": step_m,
        "pixels": pixels,
    }
    floor_plane = maps.principal_plane("xy", [centre[0], centre[1], height])
    vertical_plane = maps.boresight_plane(scenario)
    floor = maps.run_map(
        scenario, floor_plane, keepouts, progress=callback("floor-plane map"), **grid_args
    )
    vertical = maps.run_map(
        scenario, vertical_plane, keepouts, progress=callback("vertical map"), **grid_args
    )
    zone_points = {
        k.limit_id: np.vstack([floor.zone_points_m(k.limit_id), vertical.zone_points_m(k.limit_id)])
        for k in keepouts
    }
    cylinders = maps.keepout_cylinders(
        scenario, keepouts, progress=callback("vertical extent"), extra_points_m=zone_points
    )
    points = named_points_data(scenario, ids)
    spread = None
    if scenario.uncertainty is not None:
        with maps.busy(progress, "uncertainty samples"):
            spread = uncertainty_data(scenario.with_limits(ids), keepouts)
    readings_block = None
    if readings:
        readings_block = readings_data(scenario.with_limits(ids), readings)
    overlays = {
        name: _map_overlay(scenario, run, readings_block)
        for name, run in (("floor", floor), ("vertical", vertical))
    }

    files: dict[str, bytes] = {}
    files.update(
        map_files(
            floor,
            "map-floor",
            formats=("png", "svg", "npz", "geojson"),
            overlay=overlays["floor"],
        )
    )
    files.update(
        map_files(
            vertical, "map-vertical", formats=("png", "svg", "npz"), overlay=overlays["vertical"]
        )
    )
    comparison = None
    if scenario.options:
        from .compare import compare_options

        comparison = compare_options(
            scenario,
            ids,
            height_m=height,
            progress=callback,
            base_keepouts=keepouts,
            **grid_args,
        )
        fig = comparison.figure()
        files["compare.png"] = plots.figure_bytes(fig, "png")
        files["compare.svg"] = plots.figure_bytes(fig, "svg")
        files["compare.json"] = json_text(comparison.data()).encode()
    if scenario_text is not None:
        files["scenario-input.toml"] = scenario_text.encode("utf-8")

    by_cyl = {c.limit_id: c for c in cylinders}
    keepout_rows = []
    for k in keepouts:
        row = keepout_entry(k)
        row["recommended_distance_m"] = k.recommended_distance_m
        # Cross-check of the keep-out search by the maps: the farthest zone point found.
        reach = max(floor.reach_m(k.limit_id), vertical.reach_m(k.limit_id))
        step = max(floor.result.grid.step_m, vertical.result.grid.step_m)
        row["map_reach_m"] = reach
        row["map_reach_beyond_keepout"] = bool(reach > k.recommended_distance_m + step)
        row["mark_out_m"] = max(k.recommended_distance_m, reach)
        row["cylinder"] = by_cyl[k.limit_id].as_dict()
        row["floor_zone"] = floor.conservative_shapes(k.limit_id)
        keepout_rows.append(row)
    _add_spread(keepout_rows, spread)
    try:
        version = metadata.version("keepclear")
    except metadata.PackageNotFoundError:  # pragma: no cover - running from a checkout
        version = "unknown"
    values = [limits_mod.get_limit(i).at(scenario.frequency_hz) for i in ids]
    data: dict[str, Any] = {
        "schema_version": SCHEMA_VERSION,
        "tool_version": version,
        "scenario": scenario.name,
        "scenario_file": scenario.path,
        "frequency_hz": scenario.frequency_hz,
        "reflections": scenario.reflections,
        "average_power_w": scenario.average_power_w,
        "centre_m": [float(x) for x in centre],
        "sources": [
            {
                "id": s.id,
                "antenna": s.antenna,
                "power_w": s.power_w,
                "duty_cycle": s.duty_cycle,
                "average_power_w": s.average_power_w,
                "position_m": [float(x) for x in s.position_m],
            }
            for s in scenario.sources
        ],
        "limits": [{**v.as_dict(), "verification": v.verification} for v in values],
        "keepout": keepout_rows,
        "points": points,
        "maps": {
            "floor": {**floor.summary(), "height_m": height},
            "vertical": vertical.summary(),
        },
        "comparison": None if comparison is None else comparison.data(),
        "uncertainty": None if spread is None else spread["spec"],
        "readings": readings_block,
        "assumptions": {
            "time_averaging": plots.duty_text(scenario),
            "reflections": plots.reflection_text(scenario),
            "shields": len(scenario.shields),
            "enclosure": scenario.enclosure is not None,
        },
        "caution": CAUTION_TEXT,
    }
    names = sorted([*files, "assessment.json", "report.html"])
    data["files"] = names
    figures = {
        "floor": files["map-floor.png"],
        "vertical": files["map-vertical.png"],
    }
    if comparison is not None:
        figures["compare"] = files["compare.png"]
    files["report.html"] = render_report(data, figures, scenario_text).encode("utf-8")
    files["assessment.json"] = json_text(data).encode("utf-8")
    return data, files


def _map_overlay(scenario: Scenario, run: Any, readings_block: dict[str, Any] | None) -> Any:
    """The P95 contours (with ``[uncertainty]``) and the readings near a map's plane."""
    from .plots import MapOverlay

    p95: dict[str, NDArray[np.float64]] = {}
    if scenario.uncertainty is not None:
        from .uncertainty import quotient_percentile

        grid = run.result.grid
        q = quotient_percentile(
            scenario, scenario.uncertainty, grid.points_m(), list(run.result.limit_ids)
        )
        p95 = {k: v.reshape(grid.shape) for k, v in q.items()}
    marks = []
    if readings_block is not None:
        plane = run.result.grid.plane
        near = max(0.5, 2 * run.result.grid.step_m)
        for i, r in enumerate(readings_block["readings"]):
            pos = np.asarray(r["position_m"], dtype=float)
            st, off = plane.to_plane(pos)
            if abs(float(off[0])) <= near:
                marks.append(
                    {
                        "s": float(st[0, 0]),
                        "t": float(st[0, 1]),
                        "tag": r["label"] or f"R{i + 1}",
                        "under": r["under_predicted"],
                    }
                )
    return MapOverlay(p95=p95, readings=marks)


#: Every file ``assess`` may write (the comparison only with options).
ASSESS_FILE_NAMES = (
    "assessment.json",
    "report.html",
    "map-floor.png",
    "map-floor.svg",
    "map-floor.npz",
    "zones-floor.geojson",
    "map-vertical.png",
    "map-vertical.svg",
    "map-vertical.npz",
    "compare.json",
    "compare.png",
    "compare.svg",
    "scenario-input.toml",
)
