"""The ``keepclear`` command line: a thin layer over :mod:`keepclear.fields.assessment`.

Results go to stdout, diagnostics to stderr.  Exit status: 0 done; 2 bad input or
usage (one line on stderr naming the file, the key or argument, and what is
wrong; nothing written); 1 an unexpected fault.
"""

from __future__ import annotations

import os
import sys
import warnings
from enum import StrEnum
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
#: Largest coordinate accepted on the command line, as in scenario files and point files [m].
COORDINATE_BOUND_M = 1e6
#: Smallest map extent accepted [m] (a tenth of a millimetre).
SMALLEST_GRID_M = 1e-4
PANEL_POINTS = "Points"


class _Group(TyperGroup):
    """Map every input error to exit 2 with one line on stderr; faults to exit 1."""

    def main(self, args: Any = None, prog_name: str | None = None, **extra: Any) -> Any:  # noqa: D102
        extra.pop("standalone_mode", None)
        _PENDING_WARNINGS.clear()
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("always", ModelRangeWarning)
                warnings.showwarning = _show_warning
                rv = super().main(args, prog_name or "keepclear", standalone_mode=False, **extra)
        except InputError as exc:
            # Bad input: the one line that says what is wrong, and nothing else.
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
            _flush_warnings()
            typer.echo(
                f"keepclear: unexpected fault ({type(exc).__name__}: {exc}); this is a bug, "
                "please report it with the scenario (set KEEPCLEAR_DEBUG=1 for the traceback)",
                err=True,
            )
            sys.exit(1)
        _flush_warnings()
        # Without standalone mode the click layer *returns* the code of an Exit it caught
        # (130 for an interrupt): never let that pass as success.
        if isinstance(rv, int) and not isinstance(rv, bool) and rv != 0:
            if rv == 130:
                typer.echo("keepclear: interrupted", err=True)
            sys.exit(rv)
        sys.exit(0)


def _usage_line(exc: typer.TyperException) -> str:
    message = exc.format_message().replace("\n", " ")
    ctx = getattr(exc, "ctx", None)
    command = ctx.command_path if ctx is not None else "keepclear"
    return f"{command}: {message} (see --help)"


def _fail(line: str) -> None:
    typer.echo(f"keepclear: {line}", err=True)
    sys.exit(2)


#: Warnings of the current run, printed on stderr once it has not failed on bad input.
_PENDING_WARNINGS: list[str] = []


def _show_warning(message, category, filename, lineno, file=None, line=None) -> None:  # noqa: ANN001
    text = f"keepclear: warning: {message}"
    if text not in _PENDING_WARNINGS:
        _PENDING_WARNINGS.append(text)


def _flush_warnings() -> None:
    for text in _PENDING_WARNINGS:
        typer.echo(text, err=True)
    _PENDING_WARNINGS.clear()


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
        if max(abs(c) for c in xyz) > COORDINATE_BOUND_M:
            raise InputError(
                f"coordinates must lie within +-{COORDINATE_BOUND_M:g} m, got '{text}'",
                "argument",
                "--at",
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
    if not at and points is None:
        # The scenario's named places: say which is which (an added key, "name").
        for entry, place in zip(data["points"], loaded.points, strict=True):
            entry["name"] = place.name
        from .places import add_spatial_averages

        add_spatial_averages(loaded, data["points"])
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

    text = probe_table(data)
    for p in data["points"]:
        if "name" in p:
            x, y, z = p["position_m"]
            heading = f"Point ({x:g}, {y:g}, {z:g}) m"
            text = text.replace(heading, f"{p['name']}: {heading[0].lower()}{heading[1:]}", 1)
    typer.echo(text)
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
    if "uncertainty" in data:
        from .report_text import uncertainty_lines

        typer.echo()
        typer.echo(uncertainty_lines(data))
    typer.echo()
    typer.echo(caution_block(100))


# ----------------------------------------------------------------- readings
@app.command("readings")
def readings_command(
    scenario: ScenarioPath,
    csv_in: Annotated[
        Path,
        typer.Option(
            "--csv",
            help="Survey readings: header x_m,y_m,z_m,value,unit[,label]; unit one of W/m2, "
            "mW/cm2, V/m, A/m [m, and the unit given].",
            show_default=False,
        ),
    ],
    json_out: JsonFlag = False,
) -> None:
    """Survey-meter readings against the model: ratio, flags, limits, a suggested margin.

    A meter averages over a second or more, far longer than a mains cycle, so each
    reading is compared with the time-averaged prediction (duty cycle applied).  A
    reading more than 3 dB above the prediction is flagged as under-predicted.
    """
    from .assessment import readings_data
    from .readings import read_readings_csv

    readings = read_readings_csv(csv_in)
    loaded = _load(scenario)
    data = readings_data(loaded, readings)
    if json_out:
        _emit_json(data)
        return
    from .report_text import readings_table

    typer.echo(readings_table(data))
    typer.echo()
    typer.echo(caution_block(100))


# ------------------------------------------------------- maps, compare, assess
PANEL_PLANE = "Plane"
PANEL_GRID = "Grid"
PANEL_QUANTITY = "Quantity"


class Quantity(StrEnum):
    """What a map's colour shows."""

    density = "density"
    quotient = "quotient"


class PlaneChoice(StrEnum):
    """Principal planes, and the vertical plane through the first source's boresight."""

    xy = "xy"
    xz = "xz"
    yz = "yz"
    boresight = "boresight"


class _Progress:
    """Progress bars on stderr (rich) for stages that take over a second; none off a TTY.

    ``progress(label)`` gives a ``(done, total)`` callback for a stage that reports its
    steps; the callback's ``busy()`` is a context manager for a stage that cannot (a
    keep-out search): after a second it shows an indeterminate bar until the stage ends.
    """

    def __init__(self) -> None:
        import threading

        self.enabled = sys.stderr.isatty() and not os.environ.get("KEEPCLEAR_NO_PROGRESS")
        self._bar: Any = None
        self._lock = threading.Lock()

    def __enter__(self) -> _Progress:
        return self

    def __exit__(self, *exc: object) -> None:
        with self._lock:
            if self._bar is not None:
                self._bar.stop()
                self._bar = None

    def _progress_bar(self) -> Any:
        with self._lock:
            if self._bar is None:
                from rich.console import Console
                from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

                self._bar = Progress(
                    TextColumn("{task.description}"),
                    BarColumn(),
                    TextColumn("{task.percentage:>3.0f}%"),
                    TimeElapsedColumn(),
                    console=Console(stderr=True),
                    transient=True,
                )
                self._bar.start()
            return self._bar

    def __call__(self, label: str) -> Any:
        """A ``(done, total)`` callback for one stage, or None when disabled."""
        if not self.enabled:
            return None
        import contextlib
        import threading
        import time

        start = time.monotonic()
        task: list[Any] = []

        def update(done: int, total: int) -> None:
            if not task:
                if time.monotonic() - start < 1.0:
                    return
                task.append(self._progress_bar().add_task(label, total=total))
            self._progress_bar().update(task[0], completed=done, total=total)

        @contextlib.contextmanager
        def busy() -> Any:
            shown: list[Any] = []

            def show() -> None:
                shown.append(self._progress_bar().add_task(label, total=None))

            timer = threading.Timer(1.0, show)
            timer.daemon = True
            timer.start()
            try:
                yield
            finally:
                timer.cancel()
                timer.join()
                if shown:
                    self._progress_bar().remove_task(shown[0])

        update.busy = busy  # type: ignore[attr-defined]
        return update


def _parse_vector(text: str | None, option: str) -> np.ndarray | None:
    if text is None:
        return None
    parts = [p.strip() for p in text.split(",")]
    try:
        xyz = [float(p) for p in parts]
    except ValueError:
        xyz = []
    if len(xyz) != 3 or not all(np.isfinite(xyz)):
        raise InputError(
            f"expects three finite numbers X,Y,Z, got '{text}' (write {option}=-1,0,0 when the "
            "first is negative)",
            "argument",
            option,
        )
    if max(abs(c) for c in xyz) > COORDINATE_BOUND_M:
        raise InputError(
            f"coordinates must lie within +-{COORDINATE_BOUND_M:g} m, got '{text}'",
            "argument",
            option,
        )
    return np.asarray(xyz, dtype=float)


def _check_limits(loaded: Any, limit: list[str] | None) -> tuple[str, ...]:
    """The selected limit ids, each checked at the scenario frequency (names --limit)."""
    from . import limits as limits_mod
    from .errors import LimitError

    if not limit:
        return tuple(loaded.limit_ids)
    seen: list[str] = []
    for limit_id in limit:
        try:
            limits_mod.get_limit(limit_id).at(loaded.frequency_hz)
        except LimitError as exc:
            raise InputError(exc.message, "argument", "--limit") from None
        if limit_id not in seen:
            seen.append(limit_id)
    return tuple(seen)


def _check_grid_numbers(extent_m: float | None, step_m: float | None, pixels: int | None) -> None:
    for value, option, smallest in (
        (extent_m, "--extent-m", SMALLEST_GRID_M),
        (step_m, "--step-m", 0.0),
    ):
        if value is not None and not (
            np.isfinite(value) and value > 0 and smallest <= value <= COORDINATE_BOUND_M
        ):
            raise InputError(
                f"must be a positive number of metres from {smallest:g} to "
                f"{COORDINATE_BOUND_M:g}, got {value}",
                "argument",
                option,
            )
    if pixels is not None and pixels < 3:
        raise InputError(f"must be at least 3, got {pixels}", "argument", "--pixels")
    if step_m is not None and pixels is not None:
        raise InputError("give --step-m or --pixels, not both", "argument", "--pixels")
    # Refuse an oversized grid before any computation when its size is known already.
    _grid_size_check(extent_m, step_m, pixels)


def _grid_size_check(extent_m: float | None, step_m: float | None, pixels: int | None) -> None:
    from .errors import ResourceError
    from .maps import MAX_GRID_BYTES, MAX_PIXELS_PER_SIDE, grid_bytes

    if pixels is not None:
        n, option = pixels, "--pixels"
    elif step_m is not None and extent_m is not None:
        n, option = 2 * int(np.ceil(extent_m / step_m - 1e-9)) + 1, "--step-m"
    else:
        return
    if n > MAX_PIXELS_PER_SIDE or grid_bytes(n * n, 4) > MAX_GRID_BYTES:
        raise ResourceError(
            f"a {n} x {n} map needs about {grid_bytes(n * n, 4) / 2**20:.0f} MiB "
            f"(at most {MAX_PIXELS_PER_SIDE} samples a side and {MAX_GRID_BYTES / 2**20:.0f} MiB "
            f"allowed); use a coarser {option} or a smaller --extent-m",
            "argument",
            option,
        )


LimitOption = Annotated[
    list[str] | None,
    typer.Option(
        "--limit",
        help="A limit id to assess (repeat for more; default: the scenario's [exposure] "
        "limits); see `keepclear limits`.",
        rich_help_panel=PANEL_QUANTITY,
        show_default=False,
    ),
]
MapLimitOption = Annotated[
    list[str] | None,
    typer.Option(
        "--limit",
        help="A limit id to contour (repeat for more; default: the scenario's [exposure] "
        "limits). With --quantity quotient the first is the colour scale's reference.",
        rich_help_panel=PANEL_QUANTITY,
        show_default=False,
    ),
]
HeightOption = Annotated[
    float | None,
    typer.Option(
        "--height-m",
        help="Height of the horizontal (floor) plane; default the first source's height [m].",
        rich_help_panel=PANEL_PLANE,
        show_default=False,
    ),
]
ExtentOption = Annotated[
    float | None,
    typer.Option(
        "--extent-m",
        help="Half the side of the map: it spans the centre +- this; default 1.5 x the largest "
        "keep-out radius, at least 2 m [m].",
        rich_help_panel=PANEL_GRID,
        show_default=False,
    ),
]
StepOption = Annotated[
    float | None,
    typer.Option(
        "--step-m",
        help="Sample spacing of the map [m].",
        rich_help_panel=PANEL_GRID,
        show_default=False,
    ),
]
PixelsOption = Annotated[
    int | None,
    typer.Option(
        "--pixels",
        help="Samples along a side of the map (instead of --step-m; default 241) [count].",
        rich_help_panel=PANEL_GRID,
        show_default=False,
    ),
]


def _file_option(name: str, what: str) -> Any:
    return typer.Option(
        name, help=f"Write {what} to this file.", rich_help_panel=PANEL_OUTPUT, show_default=False
    )


def _written_line(paths: list[Path]) -> None:
    for p in paths:
        typer.echo(f"wrote {p}", err=True)


@app.command("map")
def map_command(
    scenario: ScenarioPath,
    quantity: Annotated[
        Quantity,
        typer.Option(
            "--quantity",
            help="Colour by time-averaged power density, or by the exposure quotient in dB "
            "against the first --limit.",
            rich_help_panel=PANEL_QUANTITY,
        ),
    ] = Quantity.density,
    limit: MapLimitOption = None,
    plane: Annotated[
        PlaneChoice | None,
        typer.Option(
            "--plane",
            help="Principal plane through --through (default xy), or the vertical plane through "
            "the first source's boresight.",
            rich_help_panel=PANEL_PLANE,
            show_default=False,
        ),
    ] = None,
    through: Annotated[
        str | None,
        typer.Option(
            "--through",
            help="A point X,Y,Z on the plane, also the map centre; default the first source [m].",
            rich_help_panel=PANEL_PLANE,
            show_default=False,
        ),
    ] = None,
    height_m: HeightOption = None,
    origin: Annotated[
        str | None,
        typer.Option(
            "--origin",
            help="An arbitrary plane: its origin X,Y,Z, the map centre (with --u and --v) [m].",
            rich_help_panel=PANEL_PLANE,
            show_default=False,
        ),
    ] = None,
    u: Annotated[
        str | None,
        typer.Option(
            "--u",
            help="First in-plane axis X,Y,Z of an arbitrary plane (normalised) [1].",
            rich_help_panel=PANEL_PLANE,
            show_default=False,
        ),
    ] = None,
    v: Annotated[
        str | None,
        typer.Option(
            "--v",
            help="Second in-plane axis X,Y,Z (made perpendicular to --u) [1].",
            rich_help_panel=PANEL_PLANE,
            show_default=False,
        ),
    ] = None,
    extent_m: ExtentOption = None,
    step_m: StepOption = None,
    pixels: PixelsOption = None,
    out: Annotated[
        Path | None,
        typer.Option(
            "--out",
            help="Folder for map-PLANE.png/.svg/.csv/.npz and zones-PLANE.geojson (created; "
            "files of the same name are replaced).",
            rich_help_panel=PANEL_OUTPUT,
            show_default=False,
        ),
    ] = None,
    png: Annotated[Path | None, _file_option("--png", "the figure as PNG")] = None,
    svg: Annotated[Path | None, _file_option("--svg", "the figure as SVG")] = None,
    csv: Annotated[Path | None, _file_option("--csv", "the grid as CSV")] = None,
    npz: Annotated[Path | None, _file_option("--npz", "the grid as NumPy .npz")] = None,
    geojson: Annotated[
        Path | None, _file_option("--geojson", "the limit zones as GeoJSON (metres)")
    ] = None,
    json_out: JsonFlag = False,
) -> None:
    """Map power density or exposure quotient on a plane, with limit contours and zones.

    The plane is a principal plane through a point (--plane, --through), the horizontal
    plane at a height (--height-m), the vertical plane through the boresight
    (--plane boresight) or any plane (--origin, --u, --v).  Writes the figure (PNG,
    SVG), the grid (CSV, NPZ) and the zone of each limit (GeoJSON in metres).
    """
    from . import maps
    from .assessment import (
        discard_staging,
        map_data,
        map_files,
        publish_output_folder,
        stage_output_folder,
    )
    from .keepout import keepout_distances
    from .outputs import atomic_write_bytes, refuse_overwriting
    from .plots import MapStyle

    singles = {"png": png, "svg": svg, "csv": csv, "npz": npz, "geojson": geojson}
    if out is None and not any(singles.values()):
        raise InputError(
            "give --out DIR or at least one of --png, --svg, --csv, --npz, --geojson",
            "argument",
            "--out",
        )
    custom = [name for name, val in (("--origin", origin), ("--u", u), ("--v", v)) if val]
    if custom and len(custom) < 3:
        missing = [n for n in ("--origin", "--u", "--v") if n not in custom]
        raise InputError(
            f"an arbitrary plane needs --origin, --u and --v; missing {', '.join(missing)}",
            "argument",
            missing[0],
        )
    if custom and (plane is not None or through is not None or height_m is not None):
        raise InputError(
            "--origin/--u/--v give the plane; drop --plane, --through and --height-m",
            "argument",
            "--origin",
        )
    if height_m is not None and plane not in (None, PlaneChoice.xy):
        raise InputError(
            "applies to the horizontal plane only (--plane xy)", "argument", "--height-m"
        )
    if height_m is not None and not (np.isfinite(height_m) and abs(height_m) <= COORDINATE_BOUND_M):
        raise InputError(
            f"must be a finite height within +-{COORDINATE_BOUND_M:g} m", "argument", "--height-m"
        )
    through_m = _parse_vector(through, "--through")
    _check_grid_numbers(extent_m, step_m, pixels)
    for path in [p for p in singles.values() if p is not None]:
        refuse_overwriting(path, [scenario])
        folder = path.parent if str(path.parent) else Path(".")
        if not folder.is_dir():
            raise InputError(f"cannot be written: folder '{folder}' does not exist", str(path))
    loaded = _load(scenario)
    ids = _check_limits(loaded, limit)
    if custom:
        origin_m, u_axis, v_axis = (
            _parse_vector(text, name)
            for text, name in ((origin, "--origin"), (u, "--u"), (v, "--v"))
        )
        assert origin_m is not None and u_axis is not None and v_axis is not None
        the_plane = maps.custom_plane(origin_m, u_axis, v_axis)
    elif plane == PlaneChoice.boresight:
        if through_m is not None:
            raise InputError("does not apply to --plane boresight", "argument", "--through")
        the_plane = maps.boresight_plane(loaded)
    else:
        point = loaded.centre_m.copy() if through_m is None else through_m
        if height_m is not None:
            point[2] = height_m
        the_plane = maps.principal_plane((plane or PlaneChoice.xy).value, point)
    style = MapStyle(quantity.value, ids[0] if quantity == Quantity.quotient else None)
    staging = stage_output_folder(out) if out is not None else None
    try:
        with _Progress() as progress:
            with maps.busy(progress, "keep-out search"):
                keepouts = keepout_distances(loaded, ids)
            run = maps.run_map(
                loaded,
                the_plane,
                keepouts,
                half_extent_m=extent_m,
                step_m=step_m,
                pixels=pixels,
                progress=progress("map"),
            )
        stem = f"map-{the_plane.kind}"
        formats = tuple(k for k, p in singles.items() if p is not None)
        if out is not None:
            formats = ("png", "svg", "csv", "npz", "geojson")
        files = map_files(run, stem, style, formats)
        written: list[Path] = []
        if staging is not None:
            for name, blob in files.items():
                atomic_write_bytes(staging / name, blob)
            written += publish_output_folder(staging, out, [scenario])
            staging = None
        for kind, single in singles.items():
            if single is None:
                continue
            name = next(n for n in files if n.endswith("." + kind))
            atomic_write_bytes(single, files[name])
            written.append(single)
    finally:
        if staging is not None:
            discard_staging(staging)
    _written_line(written)
    data = map_data(run, [str(p) for p in written])
    if json_out:
        _emit_json(data)
        return
    typer.echo(_map_text(data))
    typer.echo()
    typer.echo(caution_block(100))


def _map_text(data: dict[str, Any]) -> str:
    m = data["map"]
    s0, s1, t0, t1 = m["extent_m"]
    names = m["plane"]["axis_names"]
    lines = [
        f"Scenario: {data['scenario']}",
        f"Map on the {m['plane']['description']}: {names[0]} {s0:.2f}..{s1:.2f} m, "
        f"{names[1]} {t0:.2f}..{t1:.2f} m, step {100 * m['step_m']:.1f} cm "
        f"({m['shape'][1]} x {m['shape'][0]})",
        "",
    ]
    for e in m["limits"]:
        shapes = e["shapes"].get("with-uncertainty", e["shapes"]["model"])
        head = f"{e['limit']} ({e['limit_w_m2']:.3g} W/m2): "
        if shapes["circle"]["radius_m"] == 0:
            lines.append(head + "not reached on this plane")
            continue
        box = shapes["box"]
        keys = [k for k in box if k.endswith("_m") and k != "size_m"]
        box_text = ", ".join(f"{k[:-2]} {box[k][0]:.2f}..{box[k][1]:.2f} m" for k in keys)
        text = (
            f"zone {e['zone_area_m2']:.2f} m2; circle r {shapes['circle']['radius_m']:.2f} m "
            f"about the source; box {box_text}"
        )
        if e["clipped_at_map_edge"]:
            text += "  (CLIPPED at the map edge: widen --extent-m)"
        lines.append(head + text)
    return "\n".join(lines)


@app.command("compare")
def compare_command(
    scenario: ScenarioPath,
    limit: LimitOption = None,
    height_m: HeightOption = None,
    extent_m: ExtentOption = None,
    step_m: StepOption = None,
    pixels: PixelsOption = None,
    out: Annotated[
        Path | None,
        typer.Option(
            "--out",
            help="Folder for compare.json, compare.png and compare.svg (the side-by-side maps).",
            rich_help_panel=PANEL_OUTPUT,
            show_default=False,
        ),
    ] = None,
    json_out: JsonFlag = False,
) -> None:
    """Assess the base scenario and each [[option]], and rank them.

    Ranked by the largest keep-out distance across the limits (smaller is better), then
    by the zone area on the floor plane; with the leakage 5 cm from the enclosure and
    the worst named place of each.
    """
    from .assessment import discard_staging, publish_output_folder, stage_output_folder
    from .compare import compare_options, comparison_table
    from .outputs import atomic_write_bytes, json_text
    from .plots import figure_bytes

    if height_m is not None and not (np.isfinite(height_m) and abs(height_m) <= COORDINATE_BOUND_M):
        raise InputError(
            f"must be a finite height within +-{COORDINATE_BOUND_M:g} m", "argument", "--height-m"
        )
    _check_grid_numbers(extent_m, step_m, pixels)
    loaded = _load(scenario)
    ids = _check_limits(loaded, limit)
    if not loaded.options:
        typer.echo(
            "keepclear: note: the scenario has no [[option]]; only the base is assessed",
            err=True,
        )
    staging = stage_output_folder(out) if out is not None else None
    try:
        with _Progress() as progress:
            comparison = compare_options(
                loaded,
                ids,
                height_m=height_m,
                half_extent_m=extent_m,
                step_m=step_m,
                pixels=pixels,
                progress=progress,
            )
        data = comparison.data()
        written: list[Path] = []
        if staging is not None:
            fig = comparison.figure()
            atomic_write_bytes(staging / "compare.json", json_text(data).encode())
            atomic_write_bytes(staging / "compare.png", figure_bytes(fig, "png"))
            atomic_write_bytes(staging / "compare.svg", figure_bytes(fig, "svg"))
            written = publish_output_folder(staging, out, [scenario])
            staging = None
    finally:
        if staging is not None:
            discard_staging(staging)
    _written_line(written)
    if json_out:
        _emit_json(data)
        return
    typer.echo(comparison_table(data))
    typer.echo()
    typer.echo(caution_block(100))


@app.command("assess")
def assess_command(
    scenario: ScenarioPath,
    out: Annotated[
        Path,
        typer.Option(
            "--out",
            help="Folder for the report and every output (created; files of the same name "
            "are replaced, nothing else is touched).",
            rich_help_panel=PANEL_OUTPUT,
            show_default=False,
        ),
    ],
    limit: LimitOption = None,
    height_m: HeightOption = None,
    extent_m: ExtentOption = None,
    step_m: StepOption = None,
    pixels: PixelsOption = None,
    json_out: Annotated[
        bool,
        typer.Option(
            "--json",
            help="Print assessment.json on stdout instead of the summary.",
            rich_help_panel=PANEL_OUTPUT,
        ),
    ] = False,
    readings_csv: Annotated[
        Path | None,
        typer.Option(
            "--readings",
            help="Survey readings CSV (x_m,y_m,z_m,value,unit[,label]) to mark on the maps and "
            "compare in the report [m, and the unit given].",
            rich_help_panel=PANEL_OUTPUT,
            show_default=False,
        ),
    ] = None,
) -> None:
    """The full assessment: summary, assessment.json, maps, zones, options and report.html.

    Keep-out distance per limit, the named places, the floor-plane map (at the source
    height or --height-m) with the zones to tape (GeoJSON), a vertical map through the
    boresight, the comparison when the scenario has options, and a self-contained HTML
    report.  Everything is written to a staging folder first and moved into --out only
    when complete.
    """
    from .assessment import (
        ASSESS_FILE_NAMES,
        discard_staging,
        publish_output_folder,
        run_assessment,
        stage_output_folder,
    )
    from .outputs import atomic_write_bytes, json_text, refuse_overwriting
    from .report import summary_text

    if height_m is not None and not (np.isfinite(height_m) and abs(height_m) <= COORDINATE_BOUND_M):
        raise InputError(
            f"must be a finite height within +-{COORDINATE_BOUND_M:g} m", "argument", "--height-m"
        )
    _check_grid_numbers(extent_m, step_m, pixels)
    readings = None
    if readings_csv is not None:
        from .readings import read_readings_csv

        readings = read_readings_csv(readings_csv, "--readings")
    loaded = _load(scenario)
    ids = _check_limits(loaded, limit)
    for name in ASSESS_FILE_NAMES:
        refuse_overwriting(out / name, [scenario])
    text = Path(scenario).read_text(encoding="utf-8")
    staging = stage_output_folder(out)
    try:
        with _Progress() as progress:
            data, files = run_assessment(
                loaded,
                limit_ids=ids,
                height_m=height_m,
                half_extent_m=extent_m,
                step_m=step_m,
                pixels=pixels,
                scenario_text=text,
                progress=progress,
                readings=readings,
            )
        for name, blob in files.items():
            atomic_write_bytes(staging / name, blob)
        written = publish_output_folder(staging, out, [scenario])
        staging = None
    finally:
        if staging is not None:
            discard_staging(staging)
    if json_out:
        typer.echo(json_text(data))
        return
    report = out / "report.html"
    typer.echo(summary_text(data, [str(p) for p in written]))
    typer.echo()
    typer.echo(f"Report: {report}  (open it in a browser; print it to PDF for the file)")


def main() -> None:
    """Console-script entry point."""
    app()


if __name__ == "__main__":  # pragma: no cover
    main()
