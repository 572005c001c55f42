"""Sweeps: one key of one source or object set to each of a list of values, as options.

A sweep saves writing one ``[[option]]`` per value: the same magnetron at its rated
power and with its anode current cut to a few per cent, a shield of three thicknesses,
a table at three distances.  In a scenario::

    [[sweep]]
    key = "source.magnetron.power_w"   # what to vary
    values = [900.0, 40.0, 9.0]        # one option per value
    name = "anode power"               # optional label of the options (default: the key)

or on the command line, ``compare --sweep source.magnetron.power_w=900,40,9``.

The key is a dotted path into the scenario file:

* ``source.<id>.<key>`` a key of the source with that ``id`` (a source without ``id``
  is ``source1``, ``source2``, ... in file order);
* ``shield.<id or number>.<key>``, ``reflector.<number>.<key>``,
  ``point.<name or number>.<key>`` (numbers count from 1 in file order);
* ``enclosure.<key>``;
* a top-level key such as ``frequency_hz`` or ``reflections``.

Messages name an entry the same way, counting from 1 (``source.2.power_w``,
``reflector.1``), so a path in a message is a key a sweep can take.

Each value makes the scenario file as written with that one key replaced, read and
checked as any scenario (an impossible value is refused naming the sweep and the value;
a key the entry does not take is refused on the sweep's ``key``, with the closest key and
those allowed), and becomes an option named ``"<name> = <value>"``.  Sweeps follow the
``[[option]]`` tables, in file order.
"""

from __future__ import annotations

import copy
import math
import tomllib
from collections.abc import Callable
from typing import Any

from .errors import InputError, ScenarioError, UnknownKeyError, closest, entry_path

#: Tables a sweep may address, with how their entries are named.
SWEEP_TABLES = ("source", "shield", "reflector", "point", "enclosure")
#: Top-level keys a sweep may set directly.
SWEEP_TOP_KEYS = ("frequency_hz", "reflections")
#: At most this many values in one sweep (each becomes an assessed option).
MAX_SWEEP_VALUES = 50


def value_text(value: Any) -> str:
    """A sweep value as it reads in an option name (``900``, ``0.001``, ``[0, 0, 1]``)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return f"{value:g}"
    if isinstance(value, list):
        return "[" + ", ".join(value_text(v) for v in value) + "]"
    return str(value)


def _entry_index(entries: list[Any], table: str, selector: str) -> int | None:
    """Index of the ``[[table]]`` entry named by ``selector`` (id, name or 1-based number)."""
    for i, entry in enumerate(entries):
        if not isinstance(entry, dict):
            continue
        names = [entry.get("id"), entry.get("name")]
        if table == "source" and entry.get("id") is None:
            names.append(f"source{i + 1}")
        if selector in names:
            return i
    if selector.isdigit() and 1 <= int(selector) <= len(entries):
        return int(selector) - 1
    return None


def _target(
    document: dict[str, Any], key: str
) -> tuple[Callable[[dict[str, Any], Any], None], str, str]:
    """The setter of ``key``, the path the scenario loader names that key by, and the entry.

    The path is the one the loader's messages use (``source.1.duty_cycle``); the entry is
    the table the key belongs to as the user wrote it (``source 'feed'``, ``reflector.2``).
    """
    parts = key.split(".")
    allowed = (
        "source.<id>.<key>, shield.<id or number>.<key>, reflector.<number>.<key>, "
        "point.<name or number>.<key>, enclosure.<key>, " + ", ".join(SWEEP_TOP_KEYS)
    )
    if len(parts) == 1:
        if key not in SWEEP_TOP_KEYS:
            raise ValueError(f"'{key}' is not a key a sweep can vary; allowed: {allowed}")

        def top(doc: dict[str, Any], value: Any) -> None:
            doc[key] = value

        return top, key, "the scenario's top level"
    table = parts[0]
    if table not in SWEEP_TABLES:
        hint = ""
        number = table.removeprefix("source")
        if number.isdigit() and len(parts) >= 2:  # an unnamed source's id, source2, as a table
            rest = ".".join(parts[1:])
            hint = f" (did you mean 'source.{int(number)}.{rest}'?)"
        raise ValueError(
            f"'{key}' starts with '{table}', not a table a sweep can vary{hint}; allowed: {allowed}"
        )
    if table == "enclosure":
        if len(parts) != 2 or not isinstance(document.get("enclosure"), dict):
            raise ValueError(
                f"'{key}': the scenario has no [enclosure], or the path is not enclosure.<key>"
            )
        leaf = parts[1]

        def enclosure(doc: dict[str, Any], value: Any) -> None:
            doc["enclosure"][leaf] = value

        return enclosure, key, "[enclosure]"
    if len(parts) < 3:
        raise ValueError(f"'{key}' must be {table}.<which>.<key>; allowed: {allowed}")
    selector, leaf = ".".join(parts[1:-1]), parts[-1]
    entries = document.get(table)
    if isinstance(entries, dict):
        entries = [entries]
    if not isinstance(entries, list) or not entries:
        raise ValueError(f"'{key}': the scenario has no [[{table}]]")
    index = _entry_index(entries, table, selector)
    if index is None:
        raise ValueError(f"'{key}': no [[{table}]] is named or numbered '{selector}'")

    def entry(doc: dict[str, Any], value: Any) -> None:
        items = doc[table]
        if isinstance(items, dict):
            doc[table] = items = [items]
        items[index][leaf] = value

    named = selector if selector.isdigit() else f"'{selector}'"
    return entry, f"{entry_path(table, index)}.{leaf}", f"[[{table}]] {named}"


def check_sweep_key(document: dict[str, Any], key: str, where: tuple[str, str]) -> None:
    """Refuse a sweep ``key`` that names no table or entry of ``document``.

    The check :func:`expand_sweep` makes first, with its message, without building a
    scenario (so the command line refuses it before numpy and the models are imported).
    A key the entry does not take, or an impossible value, is told by building.

    Raises
    ------
    ScenarioError
        Located as :func:`expand_sweep` locates it (``where``: the file or
        ``"argument"``, and the sweep's key path).
    """
    source, path = where
    try:
        _target(document, key)
    except ValueError as exc:
        raise ScenarioError(
            str(exc), source, path if source == "argument" else f"{path}.key"
        ) from None


def _unknown_key_message(key: str, exc: UnknownKeyError, entry: str) -> str:
    """The sweep's key names a key its table does not take: which, the closest, the list."""
    prefix = key[: len(key) - len(exc.word)]
    close = closest(exc.word, exc.allowed)
    hint = f" (did you mean '{prefix}{close}'?)" if close else ""
    if exc.reason:
        hint += f" ({exc.reason})"
    return f"'{key}': {entry} takes no key '{exc.word}'{hint}; allowed there: " + ", ".join(
        exc.allowed
    )


def expand_sweep(
    document: dict[str, Any],
    key: str,
    values: list[Any],
    label: str | None,
    build: Callable[[dict[str, Any]], Any],
    where: tuple[str, str],
) -> list[tuple[str, str, Any]]:
    """The options of one sweep: ``(name, description, scenario)`` per value.

    Parameters
    ----------
    document : dict
        The scenario file as parsed.
    key : str
        The dotted path of the key to vary (module notes).
    values : list
        The values, one option each.
    label : str or None
        The options' name prefix (default: ``key``).
    build : callable
        Builds a scenario from a document (without options or sweeps).
    where : (str, str)
        The file and the key path of the sweep, for messages.

    Raises
    ------
    ScenarioError
        If the key names nothing, the list is empty or too long, or a value makes an
        impossible scenario (the message names the value).
    """
    source, path = where

    def at(sub: str) -> str:
        # A command-line sweep is one argument: its parts are not keys of their own.
        return path if source == "argument" else f"{path}.{sub}"

    if not values:
        raise ScenarioError("must list at least one value", source, at("values"))
    if len(values) > MAX_SWEEP_VALUES:
        raise ScenarioError(
            f"lists {len(values)} values; a sweep takes at most {MAX_SWEEP_VALUES}",
            source,
            at("values"),
        )
    try:
        setter, key_path, entry = _target(document, key)
    except ValueError as exc:
        raise ScenarioError(str(exc), source, at("key")) from None
    base = {k: v for k, v in document.items() if k not in ("option", "sweep")}
    name = label or key
    out = []
    for value in values:
        doc = copy.deepcopy(base)
        setter(doc, copy.deepcopy(value))
        try:
            scenario = build(doc)
        except InputError as exc:
            if isinstance(exc, UnknownKeyError) and exc.key == key_path:
                # The key is wrong, not the value: say so on the sweep's key.
                raise ScenarioError(
                    _unknown_key_message(key, exc, entry), source, at("key")
                ) from None
            detail = f"{exc.key}: {exc.message}" if exc.key else exc.message
            raise ScenarioError(
                f"the value {value_text(value)} makes an impossible scenario: {detail}",
                source,
                at("values"),
            ) from None
        out.append((f"{name} = {value_text(value)}", f"{key} set to {value_text(value)}", scenario))
    return out


def parse_sweep_argument(text: str) -> tuple[str, list[Any]]:
    """``KEY=V1,V2,...`` from the command line into the key and the values.

    Each value is read as a TOML value (``900``, ``0.5``, ``"metal"``, ``[0, 0, 1]``); a
    bare word is a string.  Commas inside brackets belong to the value.

    Raises
    ------
    InputError
        Naming ``--sweep`` and what is allowed.
    """
    key, sep, rest = text.partition("=")
    key = key.strip()
    if not sep or not key or not rest.strip():
        raise InputError(
            f"{text!r} is not KEY=V1,V2,... (for example source.feed.power_w=900,40,9)",
            "argument",
            "--sweep",
        )
    pieces, depth, current = [], 0, []
    for ch in rest:
        if ch == "[":
            depth += 1
        elif ch == "]":
            depth -= 1
        if ch == "," and depth == 0:
            pieces.append("".join(current))
            current = []
        else:
            current.append(ch)
    pieces.append("".join(current))
    values = []
    for piece in pieces:
        piece = piece.strip()
        if not piece:
            raise InputError(f"{text!r} has an empty value", "argument", "--sweep")
        try:
            value = tomllib.loads(f"v = {piece}")["v"]
        except tomllib.TOMLDecodeError:
            value = piece
        if isinstance(value, float) and not math.isfinite(value):
            raise InputError(f"{piece!r} is not a finite number", "argument", "--sweep")
        values.append(value)
    return key, values
