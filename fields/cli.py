"""The ``keepclear`` command line: a thin layer over :mod:`keepclear.fields.assessment`.

Each command parses its arguments, calls one function of the Python API (the
orchestrator) and prints or writes what it returns; no computation happens here.

Results go to stdout, diagnostics to stderr.  Exit status: 0 done; 2 bad input or
usage (one line on stderr naming the file, the key or argument, and what is
wrong; nothing written); 1 an unexpected fault.
"""

from __future__ import annotations

import functools
import os
import sys
import warnings
from enum import StrEnum
from pathlib import Path
from typing import Annotated, Any

import typer
from typer.core import TyperGroup

from keepclear.antennas.errors import ModelRangeWarning

from . import arguments as checks
from ._lazy import lazy_module
from .cautions import caution_block
from .errors import InputError
from .progress import Progress

# numpy and the API (and through it scipy, matplotlib, scikit-rf and the models) are
# imported when a command first uses them, never for --help or a refused argument.
np = lazy_module("numpy")
api = lazy_module("keepclear.fields.assessment")

PANEL_OUTPUT = "Output"
PANEL_POINTS = "Points"
PANEL_PLANE = "Plane"
PANEL_GRID = "Grid"
PANEL_QUANTITY = "Quantity"


#: glibc's mallopt parameters, and the values set for a run (bytes).
_M_TRIM_THRESHOLD, _M_MMAP_THRESHOLD = -1, -3
_MMAP_THRESHOLD_BYTES = 32 * 1024**2  # glibc's largest on 64-bit systems
_TRIM_THRESHOLD_BYTES = 256 * 1024**2


@functools.cache
def _keep_freed_memory() -> None:
    """Let glibc's allocator reuse freed blocks instead of handing them back each time.

    The field kernels work in chunks whose temporaries are a few hundred kilobytes to a
    few megabytes.  With glibc's default thresholds each is mapped afresh and returned
    to the system when freed, and every new mapping is paid for page by page: the
    outgoing-wave table of the demo horn took 7 s that way and 3 s with the blocks kept
    (measured on the 2-core test machine).  A process that runs NEC-2 first happens to
    get the larger thresholds from its big frees; this sets them for every run.  Only
    speed changes, and a run keeps up to 256 MiB of freed memory for reuse.  Elsewhere
    than glibc this does nothing.  Once per process (every command run in it shares it).
    """
    if not sys.platform.startswith("linux"):
        return
    import ctypes

    try:
        libc = ctypes.CDLL("libc.so.6")
        libc.mallopt(_M_MMAP_THRESHOLD, _MMAP_THRESHOLD_BYTES)
        libc.mallopt(_M_TRIM_THRESHOLD, _TRIM_THRESHOLD_BYTES)
    except (OSError, AttributeError):  # not glibc: nothing to tune
        return


class _Group(TyperGroup):
    """Map every input error to exit 2 with one line on stderr; faults to exit 1."""

    def main(self, args: Any = None, prog_name: str | None = None, **extra: Any) -> Any:  # noqa: D102
        extra.pop("standalone_mode", None)
        _PENDING_WARNINGS.clear()
        _keep_freed_memory()
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
        from importlib import metadata

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
    typer.Argument(help="Scenario file (TOML).", metavar="SCENARIO", show_default=False),
]
JsonFlag = Annotated[
    bool,
    typer.Option(
        "--json", help="Print one JSON object instead of a table.", rich_help_panel=PANEL_OUTPUT
    ),
]
LimitOption = Annotated[
    list[str] | None,
    typer.Option(
        "--limit",
        metavar="ID",
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
        metavar="ID",
        help="A limit id to contour (repeat for more; default: the scenario's [exposure] "
        "limits). With --quantity quotient the first is the colour scale's reference.",
        rich_help_panel=PANEL_QUANTITY,
        show_default=False,
    ),
]
OptionOption = Annotated[
    str | None,
    typer.Option(
        "--option",
        metavar="NAME",
        help="Assess this [[option]] (or sweep value) of the scenario instead of the base; "
        "see `keepclear compare` for the names.",
        rich_help_panel=PANEL_QUANTITY,
        show_default=False,
    ),
]
SweepOption = Annotated[
    list[str] | None,
    typer.Option(
        "--sweep",
        metavar="KEY=V1,V2",
        help="One more option per value of one key of a source or object, e.g. "
        "source.feed.power_w=900,40,9 (repeat for more; as [[sweep]] in a scenario).",
        rich_help_panel=PANEL_QUANTITY,
        show_default=False,
    ),
]
RankByOption = Annotated[
    str,
    typer.Option(
        "--rank-by",
        metavar="ORDER",
        help="Rank the options by: keepout (the largest keep-out distance, the default), "
        "zone-area (the zone on the horizontal plane) or place:NAME (the power density at a "
        "[[point]]); ties within the stated tolerances keep the scenario's order.",
        show_default=False,
        rich_help_panel=PANEL_QUANTITY,
    ),
]
HeightOption = Annotated[
    float | None,
    typer.Option(
        "--height-m",
        metavar="METRES",
        help="Height of the horizontal plane of the maps and zones; default the first "
        "source's height (files map-source-height.*, zones-source-height.geojson; at a "
        "given height named after it, e.g. map-z1.70m.*) [m].",
        rich_help_panel=PANEL_PLANE,
        show_default=False,
    ),
]
CompareHeightOption = Annotated[
    float | None,
    typer.Option(
        "--height-m",
        metavar="METRES",
        help="Height of the horizontal plane on which the options' zones are compared; "
        "default the first source's height [m].",
        rich_help_panel=PANEL_PLANE,
        show_default=False,
    ),
]
ExtentOption = Annotated[
    float | None,
    typer.Option(
        "--extent-m",
        metavar="METRES",
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
        metavar="METRES",
        help="Sample spacing of the map [m].",
        rich_help_panel=PANEL_GRID,
        show_default=False,
    ),
]
PixelsOption = Annotated[
    int | None,
    typer.Option(
        "--pixels",
        metavar="N",
        help="Samples along a side of the map (instead of --step-m; default 241) [count].",
        rich_help_panel=PANEL_GRID,
        show_default=False,
    ),
]


def _vector_option(name: str, help_text: str, panel: str = PANEL_PLANE) -> Any:
    return typer.Option(
        name, help=help_text, metavar="X,Y,Z", rich_help_panel=panel, show_default=False
    )


def _file_option(name: str, what: str) -> Any:
    return typer.Option(
        name,
        help=f"Write {what} to this file.",
        metavar="FILE",
        rich_help_panel=PANEL_OUTPUT,
        show_default=False,
    )


def _out_option(help_text: str) -> Any:
    return typer.Option(
        "--out", help=help_text, metavar="DIR", rich_help_panel=PANEL_OUTPUT, show_default=False
    )


# ------------------------------------------------------------------ helpers
def _emit_json(data: dict[str, Any]) -> None:
    from .outputs import json_text

    typer.echo(json_text(data))


def _print_with_caution(text: str) -> None:
    typer.echo(text)
    typer.echo()
    typer.echo(caution_block(100))


def _precheck(
    path: Path,
    *,
    limit: list[str] | None = None,
    option: str | None = None,
    rank_by: str | None = None,
    sweep: list[str] | None = None,
    text: list[str] | None = None,
) -> dict[str, Any]:
    """The scenario's TOML document, with what can be refused without numpy refused.

    ``text``, when given, receives the file's text, the one the document was parsed from.

    A missing or unreadable file, a TOML syntax error, an unknown ``--option`` or
    ``--limit`` id, a ``--rank-by`` naming no place, and a malformed ``--sweep`` or one
    whose key names no table or entry of the scenario are refused here, with the messages
    of the full checks, before numpy and the models are imported.  Whatever only the full
    reading can tell is left to it (a key the entry does not take, an impossible value).
    """
    file_text, document = checks.read_scenario_file(path)
    if text is not None:
        text.append(file_text)
    if option is not None:
        names = checks.document_option_names(document)
        if names is not None and option not in names:
            raise checks.option_error(option, names)
    if limit:
        custom = checks.document_custom_limit_ids(document, option)
        if custom is not None:
            known = (*checks.published_limit_ids(), *custom)
            for limit_id in limit:
                if limit_id not in known:
                    message = checks.unknown_limit_message(limit_id, known)
                    raise InputError(message, "argument", "--limit")
    if rank_by is not None:
        points = checks.document_point_names(document)
        if points is not None:
            checks.check_rank_by_names(rank_by, points)
    if sweep:
        from .sweep import check_sweep_key, parse_sweep_argument

        for spec in sweep:
            key, _ = parse_sweep_argument(spec)
            check_sweep_key(document, key, ("argument", "--sweep"))
    return document


def _check_sweeps(
    path: Path,
    document: dict[str, Any],
    sweep: list[str] | None,
    limit: list[str] | None = None,
    rank_by: str | None = None,
) -> None:
    """Refuse a ``--sweep`` the scenario cannot take before its models are solved.

    A key its entry does not take, or a value that makes an impossible scenario, is told
    only by reading the scenario as changed; :func:`~keepclear.fields.scenario.check_sweeps`
    reads it with point sources standing in for the wire grids to be solved (under a second,
    where the full reading took a second, and half a minute on a new horn's first run).
    ``--limit`` and ``--rank-by`` are checked on the scenario first, as after the full
    reading.
    """
    if not sweep:
        return
    from .scenario import Scenario, check_sweeps
    from .sweep import parse_sweep_argument

    def check_base(base: Scenario) -> None:
        if limit:
            api.select_limits(base, limit)
        if rank_by is not None:
            from .compare import check_rank_by

            check_rank_by(base, rank_by)

    try:
        check_sweeps(document, path, [parse_sweep_argument(spec) for spec in sweep], check_base)
    except InputError:
        raise
    except Exception:  # noqa: BLE001 - not for this check to judge: the full reading will
        return


def _load(path: Path, document: dict[str, Any] | None = None):  # noqa: ANN202
    if document is None:  # file and syntax errors refused before numpy is imported
        document = checks.read_scenario_document(path)
    from .scenario import load_scenario

    # The first run of a new guide, horn or box solves it with NEC-2 (up to half a minute
    # for the demo horn): a terminal shows that it is busy; later runs read it back.
    with Progress() as progress:
        stage = progress("solving the source models (kept for the next runs)")
        if stage is None:
            return load_scenario(path, document)
        with stage.busy():
            return load_scenario(path, document)


def _written_line(paths: list[Path]) -> None:
    for p in paths:
        typer.echo(f"wrote {p}", err=True)


# ------------------------------------------------------------------ limits
@app.command("limits")
def limits_command(
    frequency_hz: Annotated[
        float,
        typer.Option(
            "--frequency-hz",
            metavar="HZ",
            help="Frequency at which to evaluate the limits; default 2.45e9 [Hz].",
            min=1.0,
            show_default=False,
        ),
    ] = 2.45e9,
    json_out: JsonFlag = False,
) -> None:
    """List every known exposure limit at a frequency, with its source."""
    data = api.limits(frequency_hz).to_dict()
    if json_out:
        _emit_json(data)
        return
    from .report_text import limits_table

    _print_with_caution(limits_table(data))


# ------------------------------------------------------------------- probe
@app.command("probe")
def probe_command(
    scenario: ScenarioPath,
    at: Annotated[
        list[str] | None,
        _vector_option(
            "--at",
            "A point; repeat for more (write --at=-0.5,0,1 when the first value is negative) [m].",
            PANEL_POINTS,
        ),
    ] = None,
    points: Annotated[
        Path | None,
        typer.Option(
            "--points",
            metavar="FILE",
            help="CSV of points with header x_m,y_m,z_m [m].",
            rich_help_panel=PANEL_POINTS,
            show_default=False,
        ),
    ] = None,
    csv_out: Annotated[Path | None, _file_option("--csv", "the results as CSV")] = None,
    limit: LimitOption = None,
    option: OptionOption = None,
    json_out: JsonFlag = False,
) -> None:
    """Fields, power density and exposure quotients at points.

    Without --at or --points, the scenario's named [[point]] places are probed.
    """
    at_m = [checks.vector_from_text(t, "--at") for t in at or ()]
    document = _precheck(scenario, limit=limit, option=option)
    from .outputs import atomic_write_bytes, probe_csv_bytes, read_points_csv, refuse_overwriting

    if csv_out is not None:
        refuse_overwriting(csv_out, [scenario] + ([points] if points else []))
    given = [np.asarray(at_m, dtype=float)] if at_m else []
    loaded = _load(scenario, document)
    if points is not None:
        given.append(read_points_csv(points))
    result = api.probe(loaded, np.vstack(given) if given else None, limits=limit, option=option)
    if csv_out is not None:
        columns = (
            result.e_v_m,
            result.h_a_m,
            result.power_density_w_m2,
            result.peak_power_density_w_m2,
        )
        atomic_write_bytes(csv_out, probe_csv_bytes(result.points_m, columns))
        if not json_out:
            typer.echo(f"wrote {result.points_m.shape[0]} points to {csv_out}", err=True)
            if not (at and points is None):
                return
    if json_out:
        _emit_json(result.to_dict())
    else:
        _print_probe(result.to_dict(), result.scenario)


def _sources_block(scenario: Any) -> str:
    """The sources described (peak gain, direction, EIRP, far-field distance), for text."""
    from .describe import describe_sources, sources_text

    lines = sources_text(describe_sources(scenario), scenario.frequency_hz)
    return "\n".join(["Sources:", *lines])


def _print_probe(data: dict[str, Any], scenario: Any = None) -> None:
    from .report_text import probe_table

    text = probe_table(data, scenario)
    if scenario is not None:
        head, _, rest = text.partition("\n\n")
        text = head + "\n" + _sources_block(scenario) + "\n\n" + rest
    for p in data["points"]:
        if "name" in p:
            x, y, z = p["position_m"]
            heading = f"Point ({x:g}, {y:g}, {z:g}) m"
            text = text.replace(heading, f"{p['name']}: {heading[0].lower()}{heading[1:]}", 1)
    _print_with_caution(text)


# ----------------------------------------------------------------- keepout
@app.command("keepout")
def keepout_command(
    scenario: ScenarioPath,
    limit: LimitOption = None,
    option: OptionOption = None,
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
    document = _precheck(scenario, limit=limit, option=option)  # before the API is imported
    loaded = _load(scenario, document)
    result = api.keepout(loaded, limits=limit, option=option)
    data = result.to_dict()
    if json_out:
        _emit_json(data)
        return
    from .describe import sources_text
    from .report_text import keepout_table

    text = keepout_table(data, result.scenario, screening=screening)
    head, _, rest = text.partition("\n\n")
    described = sources_text(data["sources"], data["frequency_hz"])
    text = head + "\n" + "\n".join(["Sources:", *described]) + "\n\n" + rest
    if data.get("enclosure"):
        from .report_text import enclosure_lines

        text += "\n\n" + "\n".join(enclosure_lines(data["enclosure"]))
    if "uncertainty" in data:
        from .report_text import uncertainty_lines

        text += "\n\n" + uncertainty_lines(data)
    _print_with_caution(text)


# ----------------------------------------------------------------- readings
@app.command("readings")
def readings_command(
    scenario: ScenarioPath,
    csv_in: Annotated[
        Path,
        typer.Option(
            "--csv",
            metavar="FILE",
            help="Survey readings: header x_m,y_m,z_m,value,unit[,label]; unit one of W/m2, "
            "mW/cm2, V/m, A/m [m, and the unit given].",
            show_default=False,
        ),
    ],
    limit: LimitOption = None,
    json_out: JsonFlag = False,
) -> None:
    """Survey-meter readings against the model: ratio, flags, limits, a suggested margin.

    A meter averages over a second or more, far longer than a mains cycle, so each
    reading is compared with the time-averaged prediction (duty cycle applied).  A
    reading more than 3 dB above the prediction is flagged as under-predicted.
    """
    document = _precheck(scenario, limit=limit)  # before the API is imported
    loaded = _load(scenario, document)
    data = api.readings(loaded, csv_in, limits=limit).to_dict()
    if json_out:
        _emit_json(data)
        return
    from .report_text import readings_table

    _print_with_caution(readings_table(data))


# ------------------------------------------------------- maps, compare, assess
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


def _staged(out: Path | None, scenario: Path) -> Any:
    """The output folder's staging context (:func:`staged_output_folder`), or nothing."""
    import contextlib

    from .outputs import staged_output_folder

    return contextlib.nullcontext() if out is None else staged_output_folder(out, [scenario])


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
    option: OptionOption = None,
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
        _vector_option(
            "--through",
            "A point on the plane, also the map centre; default the first source [m].",
        ),
    ] = None,
    height_m: HeightOption = None,
    origin: Annotated[
        str | None,
        _vector_option(
            "--origin",
            "An arbitrary plane: its origin, the map centre (with --u and --v) [m].",
        ),
    ] = None,
    u: Annotated[
        str | None,
        _vector_option("--u", "First in-plane axis of an arbitrary plane (normalised) [1]."),
    ] = None,
    v: Annotated[
        str | None,
        _vector_option("--v", "Second in-plane axis (made perpendicular to --u) [1]."),
    ] = None,
    extent_m: ExtentOption = None,
    step_m: StepOption = None,
    pixels: PixelsOption = None,
    out: Annotated[
        Path | None,
        _out_option(
            "Folder for map-PLANE.png/.svg/.csv/.npz and zones-PLANE.geojson (created; "
            "files of the same name are replaced)."
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
    checks.check_height(height_m)
    through_m = None if through is None else checks.vector_from_text(through, "--through")
    axes = (
        [
            checks.vector_from_text(text, name)
            for text, name in ((origin, "--origin"), (u, "--u"), (v, "--v"))
        ]  # type: ignore[arg-type]
        if custom
        else []
    )
    checks.check_grid_ranges(extent_m, step_m, pixels)
    document = _precheck(scenario, limit=limit, option=option)  # before the API is imported
    from . import maps
    from .outputs import atomic_write_bytes, refuse_overwriting
    from .plots import MapStyle

    grid = api.GridSettings(extent_m, step_m, pixels)
    for path in [p for p in singles.values() if p is not None]:
        refuse_overwriting(path, [scenario])
        folder = path.parent if str(path.parent) else Path(".")
        if not folder.is_dir():
            raise InputError(f"cannot be written: folder '{folder}' does not exist", str(path))
    loaded = _load(scenario, document)
    loaded = api.select_option(loaded, option)
    ids = api.select_limits(loaded, limit)
    if custom:
        the_plane = maps.custom_plane(*(np.asarray(axis, dtype=float) for axis in axes))
    else:
        the_plane = api.map_plane(
            loaded,
            (plane or PlaneChoice.xy).value,
            through_m=None if through_m is None else np.asarray(through_m, dtype=float),
            height_m=height_m,
        )
    style = MapStyle(quantity.value, ids[0] if quantity == Quantity.quotient else None)
    formats = tuple(k for k, p in singles.items() if p is not None)
    if out is not None:
        formats = ("png", "svg", "csv", "npz", "geojson")
    with _staged(out, scenario) as staged:
        with Progress() as progress:
            fmap = api.field_map(loaded, the_plane, limits=ids, grid=grid, progress=progress)
        files = api.map_files(fmap.run, f"map-{the_plane.file_stem}", style, formats)
        if staged is not None:
            for name, blob in files.items():
                staged.write(name, blob)
    written: list[Path] = [] if staged is None else list(staged.published)
    for kind, single in singles.items():
        if single is not None:
            atomic_write_bytes(single, next(b for n, b in files.items() if n.endswith("." + kind)))
            written.append(single)
    _written_line(written)
    data = api.FieldMap(fmap.run, tuple(str(p) for p in written)).to_dict()
    if json_out:
        _emit_json(data)
        return
    _print_with_caution(_map_text(data, loaded))


def _map_text(data: dict[str, Any], scenario: Any = None) -> str:
    from .report_text import density_text

    m = data["map"]
    s0, s1, t0, t1 = m["extent_m"]
    names = m["plane"]["axis_names"]
    lines = [
        f"Scenario: {data['scenario']}",
        f"Map on the {m['plane']['description']}: {names[0]} {s0:.2f}..{s1:.2f} m, "
        f"{names[1]} {t0:.2f}..{t1:.2f} m, step {100 * m['step_m']:.1f} cm "
        f"({m['shape'][1]} x {m['shape'][0]})",
    ]
    if scenario is not None:
        lines.append(_sources_block(scenario))
    lines.append("")
    for e in m["limits"]:
        shapes = e["shapes"].get("with-uncertainty", e["shapes"]["model"])
        head = f"{e['limit']} ({density_text(e['limit_w_m2'])}): "
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
    height_m: CompareHeightOption = None,
    extent_m: ExtentOption = None,
    step_m: StepOption = None,
    pixels: PixelsOption = None,
    rank_by: RankByOption = "keepout",
    sweep: SweepOption = None,
    out: Annotated[
        Path | None,
        _out_option(
            "Folder for compare.json, compare.png and compare.svg (the side-by-side maps)."
        ),
    ] = None,
    json_out: JsonFlag = False,
) -> None:
    """Assess the base scenario and each [[option]], and rank them.

    Ranked (--rank-by keepout, the default) by the largest keep-out distance across the
    limits (smaller is better), then by the zone area on the horizontal plane at the
    source height; or by that zone area first (zone-area), or by the power density at a
    named place (place:NAME).  With the value at every named place and its change in dB
    against the base, the leakage 5 cm from the enclosure and the worst named place.
    """
    checks.check_height(height_m)
    checks.check_grid_ranges(extent_m, step_m, pixels)
    document = _precheck(scenario, limit=limit, rank_by=rank_by, sweep=sweep)
    _check_sweeps(scenario, document, sweep, limit, rank_by)
    from .compare import check_rank_by, comparison_table
    from .outputs import json_text
    from .plots import figure_bytes

    grid = api.GridSettings(extent_m, step_m, pixels)
    loaded = _load(scenario, document)
    ids = api.select_limits(loaded, limit)
    check_rank_by(loaded, rank_by)
    loaded = api.with_sweeps(loaded, sweep)
    if not loaded.options:
        typer.echo(
            "keepclear: note: the scenario has no [[option]]; only the base is assessed",
            err=True,
        )
    with _staged(out, scenario) as staged:
        with Progress() as progress:
            result = api.compare(
                loaded, ids, height_m=height_m, grid=grid, rank_by=rank_by, progress=progress
            )
        data = result.to_dict()
        if staged is not None:
            fig = result.figure()
            staged.write("compare.json", json_text(data).encode())
            staged.write("compare.png", figure_bytes(fig, "png"))
            staged.write("compare.svg", figure_bytes(fig, "svg"))
    _written_line([] if staged is None else staged.published)
    if json_out:
        _emit_json(data)
        return
    text = comparison_table(data)
    head, _, rest = text.partition("\n\n")
    _print_with_caution(head + "\n" + "\n".join(_compare_sources_lines(result)) + "\n\n" + rest)


def _compare_sources_lines(result: Any) -> list[str]:
    """The base's sources described, and each option's where they differ from the base's."""
    from .describe import describe_sources, sources_text

    variants = result.comparison.variants
    base = next(v for v in variants if v.is_base)
    f = base.scenario.frequency_hz
    described = describe_sources(base.scenario)
    lines = ["Sources of the base:", *sources_text(described, f)]
    for v in variants:
        if v.is_base:
            continue
        own = describe_sources(v.scenario)
        if own != described:
            lines += [f"Sources of option {v.name}:", *sources_text(own, f)]
    return lines


@app.command("assess")
def assess_command(
    scenario: ScenarioPath,
    out: Annotated[
        Path,
        _out_option(
            "Folder for the report and every output (created; files of the same name "
            "are replaced, nothing else is touched)."
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
    rank_by: RankByOption = "keepout",
    sweep: SweepOption = None,
    readings_csv: Annotated[
        Path | None,
        typer.Option(
            "--readings",
            metavar="FILE",
            help="Survey readings CSV (x_m,y_m,z_m,value,unit[,label]) to mark on the maps and "
            "compare in the report [m, and the unit given].",
            rich_help_panel=PANEL_OUTPUT,
            show_default=False,
        ),
    ] = None,
) -> None:
    """The full assessment: summary, assessment.json, maps, zones, options and report.html.

    Keep-out distance per limit, the sources described, the named places, the map of
    the horizontal plane at the source height (files map-source-height.*; or at
    --height-m, e.g. map-z1.70m.*) with its zones (GeoJSON), with a floor in the
    scenario also the zones just above the floor and at head height, a vertical map
    through the boresight, the comparison when the scenario has options (or --sweep),
    and a self-contained HTML report.  Everything is written to a staging folder first
    and moved into --out only when complete.
    """
    checks.check_height(height_m)
    checks.check_grid_ranges(extent_m, step_m, pixels)
    written: list[str] = []  # the file's text as read: the copy in the report is what ran
    document = _precheck(scenario, limit=limit, rank_by=rank_by, sweep=sweep, text=written)
    readings = None
    if readings_csv is not None:
        from .readings import read_readings_csv

        readings = read_readings_csv(readings_csv, "--readings")
    _check_sweeps(scenario, document, sweep, limit, rank_by)
    from .outputs import json_text
    from .report import summary_text

    grid = api.GridSettings(extent_m, step_m, pixels)
    from .compare import check_rank_by

    loaded = _load(scenario, document)
    ids = api.select_limits(loaded, limit)
    check_rank_by(loaded, rank_by)
    loaded = api.with_sweeps(loaded, sweep)
    api.refuse_assessment_overwrites(out, [scenario], height_m)
    (text,) = written
    with Progress() as progress:
        result = api.assess(
            loaded,
            out,
            limits=ids,
            height_m=height_m,
            grid=grid,
            scenario_text=text,
            readings=readings,
            rank_by=rank_by,
            progress=progress,
        )
    if json_out:
        typer.echo(json_text(result.to_dict()))
        return
    report = out / "report.html"
    typer.echo(summary_text(result.to_dict(), [str(p) for p in result.written]))
    typer.echo()
    typer.echo(f"Report: {report}  (open it in a browser; print it to PDF for the file)")


#: Variables that set the BLAS library's thread count; any of them set is the user's choice.
_BLAS_THREAD_VARIABLES = (
    "OPENBLAS_NUM_THREADS",
    "GOTO_NUM_THREADS",
    "OMP_NUM_THREADS",
    "MKL_NUM_THREADS",
)


def _one_blas_thread() -> None:
    """Let the BLAS library run on the calling thread only, unless the user chose otherwise.

    The field kernels call BLAS for many small products (a chunk of a few dozen points
    against a few hundred segments near a source).  With a thread per core BLAS hands
    each to every core and waits for the slowest, which costs more than the product,
    and much more while other programs keep the cores busy: on the 2-core test machine
    with other jobs running, the demo horn's field at 20,000 points within 0.4 m took
    15.6 s with two BLAS threads and 3.0 s with one (and 1.6 s against 1.8 s for
    200,000 points over 6 m).  Set before numpy is loaded (the command line loads it on
    first use), so it holds for the whole run; the results do not depend on it.
    """
    if not any(os.environ.get(name) for name in _BLAS_THREAD_VARIABLES):
        os.environ["OPENBLAS_NUM_THREADS"] = "1"
        os.environ["MKL_NUM_THREADS"] = "1"


def main() -> None:
    """Console-script entry point."""
    _one_blas_thread()
    app()


if __name__ == "__main__":  # pragma: no cover
    main()
