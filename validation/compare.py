"""Print keepclear's errors against the stored full-wave data, per case and region.

Run with the project's environment (no openEMS needed)::

    python validation/compare.py                 # every stored case, the models as they are
    python validation/compare.py --infinite-ground   # probe cases with the ground keys removed
                                                    # (the infinite-ground monopole)

Error = 10 log10(keepclear / full wave) of the power density per radiated watt [dB]:
positive means keepclear is higher (conservative).
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import tomllib
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from keepclear.fields.field import evaluate  # noqa: E402
from keepclear.fields.scenario import load_scenario  # noqa: E402
from tests import validation_data as vd  # noqa: E402

_GROUND_KEYS = ("ground", "ground_size_m", "ground_up", "ground_offset_m", "box_depth_m")


def _toml_value(v: object) -> str:
    if isinstance(v, str):
        return f'"{v}"'
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    return repr(float(v))  # type: ignore[arg-type]


def source_text(case: vd.FullWaveCase, infinite_ground: bool) -> str:
    """The case's scenario, optionally with the finite-ground keys removed."""
    if not infinite_ground:
        return case.scenario_text()
    table = tomllib.loads(case.source_toml)["source"][0]
    rows = ["[[source]]"] + [
        f"{k} = {_toml_value(v)}" for k, v in table.items() if k not in _GROUND_KEYS
    ]
    return 'name = "validation"\nfrequency_hz = 2.45e9\n\n' + "\n".join(rows) + "\n"


def errors(case: vd.FullWaveCase, infinite_ground: bool = False) -> tuple[np.ndarray, float]:
    """Error per sample [dB] and the model's peak gain [dBi]."""
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "case.toml"
        path.write_text(source_text(case, infinite_ground), encoding="utf-8")
        scenario = load_scenario(path)
    model = evaluate(scenario, case.positions_m).power_density_w_m2
    with np.errstate(divide="ignore"):
        err = 10 * np.log10(model / case.power_density_w_m2)
    return err, float(10 * np.log10(scenario.sources[0].radiator.max_gain()))


def report(name: str, infinite_ground: bool, detail: bool) -> None:
    """Print one case's errors per region."""
    case = vd.load(name)
    try:
        err, peak = errors(case, infinite_ground)
    except Exception as exc:  # noqa: BLE001
        print(f"{name}: model not available ({exc})")
        return
    front = case.front()
    print(
        f"\n{name} ({case.engine}); peak directivity: full wave "
        f"{case.peak_directivity_dbi:.2f} dBi, model {peak:.2f} dBi"
    )
    for region, m in (("front <= 60 deg", front), ("elsewhere", ~front)):
        e = err[m]
        zeros = int(np.sum(~np.isfinite(e)))
        f = e[np.isfinite(e)]
        lo = f"{f.min():+7.2f}" if f.size else "    n/a"
        hi = f"{f.max():+7.2f}" if f.size else "    n/a"
        print(
            f"  {region:16s} n={m.sum():2d}  min {lo} dB  max {hi} dB"
            + (f"  (and {zeros} points where the model gives zero)" if zeros else "")
        )
    if detail:
        for lab, e, pos in zip(case.labels, err, case.positions_m, strict=True):
            print(f"    {lab:26s} {np.round(pos, 3)!s:28s} {e:+7.2f} dB")


def _db(v: float) -> str:
    return f"{v:+.1f} dB" if np.isfinite(v) else "model zero"


def markdown(names: list[str]) -> None:
    """Print a markdown table: one row per case and region.

    The models as they are; for the probes, the infinite-ground monopole (ground keys removed).
    """
    print(
        "| case (openEMS v0.0.35) | model | peak D: full wave / model [dBi] | region | points "
        "| error min / max [dB] | worst point |"
    )
    print("|" + " --- |" * 7)
    for name in names:
        case = vd.load(name)
        probe = "ground" in case.source_toml
        try:
            err, peak = errors(case, infinite_ground=probe)
        except Exception as exc:  # noqa: BLE001
            print(f"| {name} | not available ({exc}) | | | | | |")
            continue
        label = "infinite-ground monopole (ground keys removed)" if probe else "as built"
        front = case.front()
        for region, m in (("front <= 60 deg", front), ("elsewhere", ~front)):
            e = err[m]
            labs = [lab for lab, k in zip(case.labels, m, strict=True) if k]
            zeros = int(np.sum(~np.isfinite(e)))
            f = np.where(np.isfinite(e), e, -np.inf)
            worst = int(np.argmax(np.abs(f)))
            fin = e[np.isfinite(e)]
            text = f"{fin.min():+.1f} / {fin.max():+.1f}" if fin.size else "n/a"
            if zeros:
                text += f"; zero at {zeros} points"
            print(
                f"| {name} | {label} | {case.peak_directivity_dbi:.2f} / {peak:.2f} | {region} "
                f"| {m.sum()} | {text} | {labs[worst]}: {_db(f[worst])} |"
            )


def main() -> None:
    """Command line."""
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument(
        "--infinite-ground",
        action="store_true",
        help="drop the finite-ground keys (the infinite-ground monopole)",
    )
    ap.add_argument("--detail", action="store_true", help="one line per sample")
    ap.add_argument("--markdown", action="store_true", help="a table for the README")
    ap.add_argument("cases", nargs="*", default=None)
    args = ap.parse_args()
    if args.markdown:
        markdown(args.cases or vd.available())
        return
    for name in args.cases or vd.available():
        report(name, args.infinite_ground, args.detail)


if __name__ == "__main__":
    main()
