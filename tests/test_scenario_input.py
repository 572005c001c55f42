"""Scenario input: random, broken and oversized scenario files are refused cleanly or run."""

from __future__ import annotations

import datetime as dt
import json
import math

import hypothesis.strategies as st
import pytest
from hypothesis import given, note, settings

from ._cli import assert_clean_exit, one_error_line, run, strict_json
from ._fuzz_strategies import (
    EXPECTED_PLAUSIBILITY_WARNING,
    FUNCTION_FIXTURE,
    RAW_TEXTS,
    _keepout_is_bounded,
    at_points,
    check_keepout,
    check_map,
    check_probe,
    mutated_documents,
    toml_document,
    valid_documents,
)
from ._hypothesis import examples

# ------------------------------------------------------------
# Fuzzing with random and broken input (hypothesis). What is checked, and against
# what, is listed in tests/_fuzz_strategies.py.


# ---------------------------------------------------------------------- tests
@EXPECTED_PLAUSIBILITY_WARNING
@settings(max_examples=examples(20, long=350), suppress_health_check=FUNCTION_FIXTURE)
@given(data=st.data())
def test_mutated_scenarios(tmp_path, data):
    doc = data.draw(mutated_documents(), label="scenario")
    path = tmp_path / "fuzz.toml"
    text = toml_document(doc)
    path.write_text(text, encoding="utf-8")
    note(text)
    points = data.draw(at_points(doc), label="points")
    probe = check_probe(path, points)
    if _keepout_is_bounded(path):
        keepout = check_keepout(path)
        # Both load the same file the same way: both succeed or both refuse it.
        assert probe.exit_code == keepout.exit_code, (probe.stderr, keepout.stderr)
        if data.draw(st.integers(0, 3), label="map too") == 0:
            out = tmp_path / "map"
            out.mkdir(exist_ok=True)
            for old in out.iterdir():
                old.unlink()
            check_map(path, out, [])


@EXPECTED_PLAUSIBILITY_WARNING
@settings(max_examples=examples(6, long=100), suppress_health_check=FUNCTION_FIXTURE)
@given(doc=valid_documents())
def test_valid_scenarios_run(tmp_path, doc):
    """Generated valid scenarios mostly load; those that do give finite, schema-valid JSON."""
    path = tmp_path / "valid.toml"
    path.write_text(toml_document(doc), encoding="utf-8")
    note(toml_document(doc))
    probe = check_probe(path, [[0.3, -0.2, 0.1], doc["source"][0]["position_m"]])
    if probe.exit_code == 2:
        # Refusals of generated valid input must be physical, e.g. a waveguide below cutoff
        # at a random frequency or a limit not published there, never a key or type error.
        line = probe.stderr
        assert "is not a known" not in line and "must be a" not in line, line
    if _keepout_is_bounded(path):
        check_keepout(path)


@EXPECTED_PLAUSIBILITY_WARNING
@settings(max_examples=examples(60), suppress_health_check=FUNCTION_FIXTURE)
@given(case=RAW_TEXTS)
def test_raw_junk_files(tmp_path, case):
    label, raw = case
    path = tmp_path / "junk.toml"
    path.write_bytes(raw)
    note(f"{label}: {raw[:200]!r}")
    for command in (["probe", path, "--at", "1,0,0", "--json"], ["keepout", path, "--json"]):
        result = run(*command)
        assert_clean_exit(result)
        if result.exit_code == 0:
            strict_json(result.stdout)


@EXPECTED_PLAUSIBILITY_WARNING
@pytest.mark.parametrize(
    "name",
    ["x" * 1_900_000, "\U0001f4a5" * 400_000, "line1\nline2\u2028line3\x85line4"],
    ids=["1.9 MB name", "1.6 MB of emoji", "line separators"],
)
def test_very_long_and_odd_strings(tmp_path, name):
    path = tmp_path / "long.toml"
    doc = {"name": name, "source": [{"antenna": "isotropic", "power_w": 1.0}]}
    path.write_text(toml_document(doc), encoding="utf-8")
    result = run("keepout", path, "--json")
    assert_clean_exit(result)
    if result.exit_code == 0:
        assert strict_json(result.stdout)["scenario"] == name


def test_a_byte_order_mark_is_read_as_utf_8(tmp_path):
    # Some Windows editors start a UTF-8 file with a byte-order mark (U+FEFF, Unicode
    # Standard sec. 23.8, from memory); TOML 1.0 has no BOM, so it is dropped before
    # parsing: the same answer as the file without it.
    text = (
        'name = "BOM test"\n[[source]]\nantenna = "isotropic"\npower_w = 10.0\n'
        "position_m = [0.0, 0.0, 1.0]\n"
    )
    plain, marked = tmp_path / "plain.toml", tmp_path / "marked.toml"
    plain.write_text(text, encoding="utf-8")
    marked.write_bytes(b"\xef\xbb\xbf" + text.encode("utf-8"))
    a, b = run("keepout", plain, "--json"), run("keepout", marked, "--json")
    assert b.exit_code == 0, b.stderr
    assert strict_json(b.stdout)["keepout"] == strict_json(a.stdout)["keepout"]


def test_the_text_read_is_the_text_parsed(tmp_path):
    """read_scenario_file gives the text the document came from, byte-order mark dropped
    (assess copies that text into its report: what was assessed)."""
    from keepclear.fields.arguments import read_scenario_file

    text = 'name = "copy test"\n[[source]]\nantenna = "isotropic"\npower_w = 10.0\n'
    marked = tmp_path / "marked.toml"
    marked.write_bytes(b"\xef\xbb\xbf" + text.encode("utf-8"))
    read, document = read_scenario_file(marked)
    assert read == text
    assert document["name"] == "copy test" and document["source"][0]["power_w"] == 10.0


@EXPECTED_PLAUSIBILITY_WARNING
def test_file_over_2_mb_is_refused(tmp_path):
    path = tmp_path / "big.toml"
    path.write_text(toml_document({"name": "x" * 2_100_000, "source": []}), encoding="utf-8")
    result = run("keepout", path)
    assert_clean_exit(result, allowed=(2,))
    assert "2 MB" in result.stderr


@EXPECTED_PLAUSIBILITY_WARNING
def test_toml_writer_round_trips():
    # The writer must produce TOML that tomllib reads back as the same document; otherwise the
    # fuzzer would only ever test the TOML parser.
    import tomllib

    doc = {
        "name": 'q"uote\\ \n\t\x7f \U0001f4a5',
        "frequency_hz": -0.0,
        "n": 10**30,
        "source": [{"power_w": 5e-324, "position_m": [1e308, -1.5, 0]}, {"a": {"b": [True]}}],
        "when": dt.datetime(1979, 5, 27, 7, 32, tzinfo=dt.UTC),
    }
    assert tomllib.loads(toml_document(doc)) == doc
    assert json.dumps(tomllib.loads(toml_document({"x": math.nan}))) == '{"x": NaN}'


# ------------------------------------------------------------
# Numerical and file-system edges (singular points, band edges, bounds, atomic outputs).
# What is checked, and against what, is listed in tests/_edge_cases.py.


# ------------------------------------------------------------ source counts
def test_no_source_is_refused(write_scenario):
    for text in (
        'name = "empty"\n',
        "source = []\n",
        "[exposure]\nlimits = ['icnirp-2020/occupational']\n",
    ):
        line = one_error_line(run("keepout", write_scenario(text), "--json"))
        assert "source" in line and "at least one [[source]]" in line


def test_more_than_200_sources_is_refused(write_scenario):
    text = '[[source]]\nantenna = "isotropic"\npower_w = 1.0\n' * 201
    assert "at most 200" in one_error_line(run("keepout", write_scenario(text)))


def test_a_misspelt_required_key_is_named_as_such(write_scenario):
    # A required key missing beside a key of the table that looks like it: the message names
    # the misspelling, not only the missing key (common practice, no source).
    text = (
        '[[source]]\nantenna = "isotropic"\npower_w = 1.0\nposition_m = [0.0, 0.0, 1.0]\n'
        "[[shield]]\ncenter_m = [1.0, 0.0, 1.0]\nnormal = [1.0, 0.0, 0.0]\nwidth_m = 1.0\n"
        'height_m = 1.0\ntype = "sheet"\nmetal = "aluminium"\nthikness_m = 0.001\n'
    )
    line = one_error_line(run("keepout", write_scenario(text)))
    assert "shield.1.thickness_m" in line and "'thikness_m'" in line
    # Without a look-alike, the plain message.
    line = one_error_line(run("keepout", write_scenario(text.replace("thikness_m", "colour"))))
    assert "shield.1.thickness_m: is required here" in line and "misspelling" not in line
    # Real keys that only look alike (pitch_m for a missing width_m) are not named.
    opening = text.replace("thikness_m", "thickness_m") + (
        "[enclosure]\ncenter_m = [0.0, 0.0, 1.0]\nsize_m = [1.2, 0.6, 0.5]\n"
        'metal = "mild-steel"\nthickness_m = 0.002\n[[enclosure.opening]]\nface = "-y"\n'
        'type = "mesh-window"\nheight_m = 0.2\npitch_m = 0.003\nhole_diameter_m = 0.0015\n'
        "depth_m = 0.001\n"
    )
    line = one_error_line(run("keepout", write_scenario(opening)))
    assert "enclosure.opening.1.width_m: is required here" in line and "'pitch_m'" not in line
