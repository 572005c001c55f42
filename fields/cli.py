"""The ``keepclear`` command line: a thin layer over :mod:`keepclear.fields.assessment`.

Results go to stdout, diagnostics to stderr.  Exit status: 0 done; 2 bad input or
usage (one line on stderr naming the file, the key or argument, and what is
wrong; nothing written); 1 an unexpected fault.
"""

from __future__ import annotations

import os
import sys
import warnings
from importlib import metadata
from pathlib import Path
from typing import Annotated, Any

import numpy as np
import typer
from typer.core import TyperGroup

from keepclear.antennas.base import ModelRangeWarning

from .cautions import caution_block
from .errors import InputError

PANEL_OUTPUT = "Output"
PANEL_POINTS = "Points"


class _Group(TyperGroup):
    """Map every input error to exit 2 with one line on stderr; faults to exit 1."""

    def main(self, args: Any = None, prog_name: str | None = None, **extra: Any) -> Any:  # noqa: D102
        extra.pop("standalone_mode", None)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("always", ModelRangeWarning)
                warnings.showwarning = _show_warning
                return super().main(args, prog_name or "keepclear", standalone_mode=False, **extra)
        except InputError as exc:
            _fail(str(exc))
        except typer.Exit as exc:
            sys.exit(exc.exit_code)
        except typer.TyperException as exc:  # usage errors of the (vendored) click layer
            if type(exc).__name__ == "NoArgsIsHelpError" and getattr(exc, "ctx", None) is not None:
                typer.echo(exc.ctx.get_help(), err=True)
                sys.exit(2)
            _fail(_usage_line(exc))
        except typer.Abort:
            typer.echo("keepclear: interrupted", err=True)
            sys.exit(1)
        except (KeyboardInterrupt, BrokenPipeError):
            sys.exit(1)
        except Exception as exc:  # noqa: BLE001 - the last line of defence
            if os.environ.get("KEEPCLEAR_DEBUG"):
                raise
            typer.echo(
                f"keepclear: unexpected fault ({type(exc).__name__}: {exc}); this is a bug, "
                "please report it with the scenario (set KEEPCLEAR_DEBUG=1 for the traceback)",
                err=True,
            )
            sys.exit(1)
        sys.exit(0)


def _usage_line(exc: typer.TyperException) -> str:
    message = exc.format_message().replace("\n", " ")
    ctx = getattr(exc, "ctx", None)
    command = ctx.command_path if ctx is not None else "keepclear"
    return f"{command}: {message} (see --help)"


def _fail(line: str) -> None:
    typer.echo(f"keepclear: {line}", err=True)
    sys.exit(2)


def _show_warning(message, category, filename, lineno, file=None, line=None) -> None:  # noqa: ANN001
    typer.echo(f"keepclear: warning: {message}", err=True)


def _version(value: bool) -> None:
    if value:
        try:
            version = metadata.version("keepclear")
        except metadata.PackageNotFoundError:  # pragma: no cover - running from a checkout
            version = "unknown"
        typer.echo(f"keepclear {version}")
        raise typer.Exit()


app = typer.Typer(
    cls=_Group,
    name="keepclear",
    help=(
        "Fields, power density and keep-out distances around portable 2.45 GHz sources "
        "(bare probes, open waveguides, horns, leaky enclosures), checked against "
        "published exposure limits.  An estimate, not a measurement."
    ),
    no_args_is_help=True,
    add_completion=False,
    rich_markup_mode=None,
    pretty_exceptions_enable=False,
)


@app.callback()
def _root(
    version: Annotated[
        bool,
        typer.Option(
            "--version", callback=_version, is_eager=True, help="Print the version and exit."
        ),
    ] = False,
) -> None:
    """Keep-out estimates for 2.45 GHz sources."""


ScenarioPath = Annotated[
    Path,
    typer.Argument(help="Scenario file (TOML).", show_default=False),
]
JsonFlag = Annotated[
    bool,
    typer.Option(
        "--json", help="Print one JSON object instead of a table.", rich_help_panel=PANEL_OUTPUT
    ),
]


def _emit_json(data: dict[str, Any]) -> None:
    from .outputs import json_text

    typer.echo(json_text(data))


def _load(path: Path):  # noqa: ANN202
    from .scenario import load_scenario

    return load_scenario(path)


# ------------------------------------------------------------------ limits
@app.command("limits")
def limits_command(
    frequency_hz: Annotated[
        float,
        typer.Option(
            "--frequency-hz", help="Frequency at which to evaluate the limits [Hz].", min=1.0
        ),
    ] = 2.45e9,
    json_out: JsonFlag = False,
) -> None:
    """List every known exposure limit at a frequency, with its source."""
    from .assessment import limits_data
    from .errors import InputError as _InputError

    if not np.isfinite(frequency_hz):
        raise _InputError("must be a finite frequency in Hz", "argument", "--frequency-hz")
    data = limits_data(frequency_hz)
    if json_out:
        _emit_json(data)
        return
    from .report_text import limits_table

    typer.echo(limits_table(data))
    typer.echo()
    typer.echo(caution_block(100))


# ------------------------------------------------------------------- probe
def _parse_at(values: list[str]) -> np.ndarray:
    points = []
    for text in values:
        parts = [p.strip() for p in text.split(",")]
        try:
            xyz = [float(p) for p in parts]
        except ValueError:
            xyz = []
        if len(xyz) != 3 or not all(np.isfinite(xyz)):
            raise InputError(
                f"expects three finite numbers X,Y,Z in metres, got '{text}'", "argument", "--at"
            )
        points.append(xyz)
    return np.asarray(points, dtype=float).reshape(-1, 3)


@app.command("probe")
def probe_command(
    scenario: ScenarioPath,
    at: Annotated[
        list[str] | None,
        typer.Option(
            "--at",
            help="A point X,Y,Z [m]; repeat for more (--at=-0.5,0,1 for a negative first value).",
            rich_help_panel=PANEL_POINTS,
            show_default=False,
        ),
    ] = None,
    points: Annotated[
        Path | None,
        typer.Option(
            "--points",
            help="CSV of points with header x_m,y_m,z_m [m].",
            rich_help_panel=PANEL_POINTS,
            show_default=False,
        ),
    ] = None,
    csv_out: Annotated[
        Path | None,
        typer.Option(
            "--csv",
            help="Write the results as CSV to this file.",
            rich_help_panel=PANEL_OUTPUT,
            show_default=False,
        ),
    ] = None,
    json_out: JsonFlag = False,
) -> None:
    """Fields, power density and exposure quotients at points.

    Without --at or --points, the scenario's named [[point]] places are probed.
    """
    from .outputs import atomic_write_bytes, probe_csv_bytes, read_points_csv, refuse_overwriting

    if csv_out is not None:
        refuse_overwriting(csv_out, [scenario] + ([points] if points else []))
    at_points = _parse_at(at) if at else None
    loaded = _load(scenario)
    pts = [at_points] if at_points is not None else []
    if points is not None:
        pts.append(read_points_csv(points))
    if not pts:
        if not loaded.points:
            raise InputError(
                "give at least one --at X,Y,Z or a --points file (the scenario has no [[point]])",
                "argument",
                "--at",
            )
        pts.append(np.array([p.position_m for p in loaded.points]))
    all_points = np.vstack(pts)
    from .assessment import probe_data

    if csv_out is not None and not json_out:
        from .field import evaluate

        result = evaluate(loaded, all_points)
        columns = (
            result.e_v_m,
            result.h_a_m,
            result.power_density_w_m2,
            result.peak_power_density_w_m2,
        )
        atomic_write_bytes(csv_out, probe_csv_bytes(all_points, columns))
        typer.echo(f"wrote {all_points.shape[0]} points to {csv_out}", err=True)
        if at and points is None:
            data, _ = probe_data(loaded, all_points)
            _print_probe(data)
        return
    data, result = probe_data(loaded, all_points)
    if csv_out is not None:
        columns = (
            result.e_v_m,
            result.h_a_m,
            result.power_density_w_m2,
            result.peak_power_density_w_m2,
        )
        atomic_write_bytes(csv_out, probe_csv_bytes(all_points, columns))
    if json_out:
        _emit_json(data)
    else:
        _print_probe(data)


def _print_probe(data: dict[str, Any]) -> None:
    from .report_text import probe_table

    typer.echo(probe_table(data))
    typer.echo()
    typer.echo(caution_block(100))


# ----------------------------------------------------------------- keepout
@app.command("keepout")
def keepout_command(
    scenario: ScenarioPath,
    json_out: JsonFlag = False,
    screening: Annotated[
        bool,
        typer.Option(
            "--screening",
            help="Show the far-field screening estimate (P G / 4 pi R^2 with the OET 65 reflection "
            "factors) beside the full calculation.",
            rich_help_panel=PANEL_OUTPUT,
        ),
    ] = False,
) -> None:
    """Keep-out distance about the first source for each limit of the scenario."""
    from .assessment import keepout_data

    loaded = _load(scenario)
    data, _ = keepout_data(loaded)
    if json_out:
        _emit_json(data)
        return
    from .report_text import keepout_table

    typer.echo(keepout_table(data, loaded, screening=screening))
    typer.echo()
    typer.echo(caution_block(100))


def main() -> None:
    """Console-script entry point."""
    app()


if __name__ == "__main__":  # pragma: no cover
    main()
