"""Helpers for driving the real command line in-process and checking its answers strictly."""

from __future__ import annotations

import json
import math
from functools import cache
from importlib import resources
from typing import Any

from jsonschema import Draft202012Validator
from typer.testing import CliRunner

from keepclear.fields.cli import app

runner = CliRunner()


def run(*args: str):
    """Invoke ``keepclear ARGS`` in-process; returns click's Result (stdout, stderr separate)."""
    return runner.invoke(app, [str(a) for a in args])


#: Options that make a command write files: such runs are never shared.
_WRITES = ("--out", "--csv", "--npz", "--png", "--svg", "--geojson")
_ONCE: dict[tuple[str, ...], Any] = {}


def run_once(*args: str):
    """:func:`run`, shared by every test of the session that runs the same command.

    For commands that only print (``probe``, ``keepout``, ``compare`` with ``--json``):
    the golden test and the checks of every bundled scenario run the same heavy commands,
    and one run feeds them all.  The result is the same whichever test runs first.
    """
    key = tuple(str(a) for a in args)
    assert not any(k.split("=", 1)[0] in _WRITES for k in key), f"writes files: {key}"
    if key not in _ONCE:
        _ONCE[key] = run(*key)
    return _ONCE[key]


def _reject_constant(name: str) -> Any:
    raise ValueError(f"non-finite JSON constant {name} in output")


def strict_json(text: str) -> Any:
    """Parse exactly one JSON document; NaN, Infinity and -Infinity are refused."""
    data = json.loads(text, parse_constant=_reject_constant)
    assert_finite(data)
    return data


def assert_finite(obj: Any, where: str = "$") -> None:
    """Every number in a parsed JSON tree is finite (a float overflow like 1e999 is caught too)."""
    if isinstance(obj, dict):
        for k, v in obj.items():
            assert_finite(v, f"{where}.{k}")
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            assert_finite(v, f"{where}[{i}]")
    elif isinstance(obj, float):
        assert math.isfinite(obj), f"non-finite number at {where}: {obj!r}"


def assert_clean_exit(result, allowed=(0, 2)) -> None:
    """Exit 0 or 2 only, never a traceback; exit 2 has exactly one stderr line and no stdout."""
    text = (result.stdout or "") + (result.stderr or "")
    assert result.exit_code in allowed, (result.exit_code, result.stderr, repr(result.exception))
    assert "Traceback" not in text, text
    if result.exit_code == 2:
        lines = [ln for ln in result.stderr.splitlines() if ln.strip()]
        assert len(lines) == 1, result.stderr
        assert lines[0].startswith("keepclear: "), lines[0]
        assert result.stdout == "", result.stdout


def one_error_line(result) -> str:
    """The single stderr line of an exit-2 run."""
    assert result.exit_code == 2, (result.exit_code, result.stdout, result.stderr)
    assert_clean_exit(result, allowed=(2,))
    return result.stderr.strip()


@cache
def schema(name: str) -> dict[str, Any]:
    """A packaged JSON Schema, ``fields/schemas/<name>.schema.json``."""
    path = resources.files("keepclear.fields") / "schemas" / f"{name}.schema.json"
    return json.loads(path.read_text(encoding="utf-8"))


def validator(name: str) -> Draft202012Validator:
    """A draft 2020-12 validator for a packaged schema."""
    return Draft202012Validator(schema(name))


def validate(name: str, data: Any) -> None:
    """Raise ``jsonschema.ValidationError`` (the best match) if ``data`` does not fit ``name``."""
    validator(name).validate(data)
