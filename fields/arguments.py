"""Checks of command-line arguments and of a scenario file's text that need no numpy.

The command line refuses a bad argument before numpy, scipy, matplotlib and the models
are imported (that costs most of a second), so the checks that need only the argument,
the scenario's TOML document or the names of the limit tables live here, importing
nothing heavy.  The API (:mod:`keepclear.fields.assessment`, :mod:`.compare`,
:mod:`.scenario`) calls the same functions, so each message is written once.

Every check raises :class:`~keepclear.fields.errors.InputError` (exit status 2 through
the command line) naming the argument or the file, the value and what is allowed.
"""

from __future__ import annotations

import functools
import math
import tomllib
from collections.abc import Sequence
from importlib import resources
from pathlib import Path
from typing import Any

from .errors import InputError, ScenarioError, suggest

#: Largest coordinate accepted from arguments, as in scenario files and point files [m].
COORDINATE_BOUND_M = 1e6
#: Smallest map extent accepted [m] (a tenth of a millimetre).
SMALLEST_GRID_M = 1e-4
#: The ``--rank-by`` choices besides ``place:NAME``.
RANK_CHOICES = ("keepout", "zone-area")
#: The limit data files (``data/limits/``), in the contract's order of limit ids.
LIMIT_FILES: tuple[str, ...] = (
    "icnirp-2020.toml",
    "ieee-c95.1-2019.toml",
    "fcc-1.1310.toml",
    "sc6-2015.toml",
    "fda-1030.10.toml",
    "iec-61000-4-3.toml",
    "iec-60601-1-2.toml",
)
#: Prefix of the ids of user thresholds (``[[exposure.threshold]]``).
CUSTOM_PREFIX = "custom/"
#: Largest scenario file read [bytes].
MAX_SCENARIO_BYTES = 2_000_000


# ------------------------------------------------------------------ numbers
def check_height(height_m: float | None) -> None:
    """Refuse a floor-plane height that is not a finite number within bounds (``--height-m``)."""
    if height_m is not None and not (
        math.isfinite(height_m) and abs(height_m) <= COORDINATE_BOUND_M
    ):
        raise InputError(
            f"must be a finite height within +-{COORDINATE_BOUND_M:g} m", "argument", "--height-m"
        )


def check_grid_ranges(
    half_extent_m: float | None = None, step_m: float | None = None, pixels: int | None = None
) -> None:
    """Refuse a map extent, step or pixel count out of range, or a step and a pixel count.

    The size of the grid is checked against the memory bound by
    :func:`keepclear.fields.assessment.check_grid`, after these.

    Raises
    ------
    InputError
        Naming ``--extent-m``, ``--step-m`` or ``--pixels``.
    """
    for value, option, smallest in (
        (half_extent_m, "--extent-m", SMALLEST_GRID_M),
        (step_m, "--step-m", 0.0),
    ):
        if value is not None and not (
            math.isfinite(value) and value > 0 and smallest <= value <= COORDINATE_BOUND_M
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


def vector_from_text(text: str, option: str) -> tuple[float, float, float]:
    """Three finite numbers ``X,Y,Z`` within the coordinate bound, from one argument.

    Raises
    ------
    InputError
        Naming ``option``, with the text given and how to write a negative first value.
    """
    parts = [p.strip() for p in text.split(",")]
    try:
        xyz = [float(p) for p in parts]
    except ValueError:
        xyz = []
    if len(xyz) != 3 or not all(math.isfinite(c) for c in xyz):
        unit = "" if option in ("--u", "--v") else " in metres"
        raise InputError(
            f"expects three finite numbers X,Y,Z{unit}, got '{text}' (write {option}=-1,0,0 "
            "when the first is negative)",
            "argument",
            option,
        )
    if max(abs(c) for c in xyz) > COORDINATE_BOUND_M:
        raise InputError(
            f"coordinates must lie within +-{COORDINATE_BOUND_M:g} m, got '{text}'",
            "argument",
            option,
        )
    return xyz[0], xyz[1], xyz[2]


# ------------------------------------------------------------------ names
def check_rank_by_names(rank_by: str, point_names: Sequence[str]) -> None:
    """Refuse a ranking other than ``keepout``, ``zone-area`` or ``place:NAME`` of a point.

    Raises
    ------
    InputError
        Naming ``--rank-by`` and every ranking allowed.
    """
    if rank_by in RANK_CHOICES:
        return
    if rank_by.startswith("place:") and rank_by.removeprefix("place:") in point_names:
        return
    allowed = ", ".join([*RANK_CHOICES, *(f"place:{n}" for n in point_names)])
    raise InputError(f"{rank_by!r} is not a ranking; allowed: {allowed}", "argument", "--rank-by")


def option_error(option: str, option_names: Sequence[str]) -> InputError:
    """The error for an ``--option`` the scenario does not have."""
    names = ", ".join(repr(n) for n in option_names) or "none (no [[option]])"
    return InputError(
        f"no option named {option!r}; the scenario's options: {names}", "argument", "--option"
    )


def unknown_limit_message(limit_id: str, known: Sequence[str]) -> str:
    """What is wrong with an unknown limit id: the closest known id and all of them."""
    return f"unknown limit id {limit_id!r}{suggest(limit_id, known)}; known ids: {', '.join(known)}"


@functools.cache
def published_limit_ids() -> tuple[str, ...]:
    """The ids of the published limits, in contract order, read from the data files.

    The files are parsed as TOML and only each ``[[limit]]``'s ``id`` is taken (about
    10 ms, and no numpy); :mod:`keepclear.fields.limits` builds the whole tables, and a
    test checks that both give the same ids.
    """
    folder = resources.files("keepclear.fields") / "data" / "limits"
    ids: list[str] = []
    for name in LIMIT_FILES:
        document = tomllib.loads((folder / name).read_text(encoding="utf-8"))
        ids += [str(entry["id"]) for entry in document.get("limit", [])]
    return tuple(ids)


# ------------------------------------------------------------------ scenario text
def read_scenario_document(path: str | Path) -> dict[str, Any]:
    """A scenario file read and parsed as TOML, not yet checked as a scenario.

    Raises
    ------
    ScenarioError
        If the file is missing, a directory, unreadable, too large, not UTF-8 or not TOML.
    """
    return read_scenario_file(path)[1]


def read_scenario_file(path: str | Path) -> tuple[str, dict[str, Any]]:
    """A scenario file's text (a byte-order mark dropped) and its TOML document.

    The text is the one the document was parsed from (``assess`` copies it into its
    output folder and report: what was assessed, even if the file changes meanwhile).

    Raises
    ------
    ScenarioError
        As :func:`read_scenario_document`.
    """
    p = Path(path)
    label = str(path)
    if not p.exists():
        raise ScenarioError("no such file", label)
    if p.is_dir():
        raise ScenarioError("is a directory; give a scenario .toml file", label)
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise ScenarioError(f"cannot be read ({exc.strerror})", label) from None
    if len(raw) > MAX_SCENARIO_BYTES:
        raise ScenarioError(f"is {len(raw)} bytes; a scenario file is at most 2 MB", label)
    try:
        text = raw.decode("utf-8-sig")  # a byte-order mark (some Windows editors) is dropped
    except UnicodeDecodeError:
        raise ScenarioError("is not UTF-8 text; a scenario is a TOML text file", label) from None
    try:
        return text, tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ScenarioError(f"is not valid TOML: {exc}", label) from None
    except RecursionError:
        raise ScenarioError("is nested too deeply to be a scenario", label) from None
    except ValueError:  # an integer literal beyond Python's 4300-digit conversion limit
        raise ScenarioError(
            "is not a usable scenario: it holds an integer too long to read (over 4300 digits)",
            label,
        ) from None


def _names(document: dict[str, Any], table: str, key: str = "name") -> list[str] | None:
    """The ``key`` of every ``[[table]]`` as written, or None where one is not a plain string."""
    entries = document.get(table, [])
    if not isinstance(entries, list):
        return None
    names = [e.get(key) if isinstance(e, dict) else None for e in entries]
    return names if all(isinstance(n, str) for n in names) else None  # type: ignore[return-value]


def document_option_names(document: dict[str, Any]) -> list[str] | None:
    """The names of the scenario's options, or None where only the full reading can tell.

    None with a ``[[sweep]]`` (its options are named as they are built) or an option
    without a plain-string name (the full reading refuses it).
    """
    return None if "sweep" in document else _names(document, "option")


def document_point_names(document: dict[str, Any]) -> list[str] | None:
    """The names of the scenario's ``[[point]]`` places, or None if one is not a string."""
    return _names(document, "point")


def document_custom_limit_ids(
    document: dict[str, Any], option: str | None = None
) -> list[str] | None:
    """The ids of the user thresholds (``custom/NAME``) of the base or of one option.

    None where only the full reading can tell (a threshold without a plain-string name,
    an ``[exposure]`` that is not a table).
    """
    exposure = document.get("exposure", {})
    if option is not None:
        for entry in document.get("option", []):
            if isinstance(entry, dict) and entry.get("name") == option and "exposure" in entry:
                exposure = entry["exposure"]
    if not isinstance(exposure, dict):
        return None
    names = _names(exposure, "threshold")
    return None if names is None else [CUSTOM_PREFIX + n for n in names]
