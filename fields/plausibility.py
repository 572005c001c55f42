"""Plausibility checks: inputs that are allowed but probably not what the user meant.

A scenario can be valid and still wrong: a position typed in centimetres puts a person
84 m up, a 1 m thick "sheet" is a wall, a product-emission limit is read as a keep-out
limit.  Each check here issues a :class:`PlausibilityWarning` (a
:class:`~keepclear.antennas.base.ModelRangeWarning`, so the command line prints it after
the results) that names the key, the value and why it looks wrong.  Nothing is changed
and nothing is refused: the numbers are computed as given.  The same sentences, with the
other warnings raised while a scenario is built, go into the outputs
(:func:`input_warnings`: ``"warnings"`` in ``assessment.json`` and the ``--json`` objects,
a box in ``report.html``), where the reader of a report sees them too.

The thresholds are ours (common practice, no source): a portable 2.45 GHz set-up is
driven by magnetrons of about 0.5 to 100 kW, stands in a room or a yard well within
100 m, and is screened by sheets of millimetres to centimetres.

* a shield's metal thicker than 5 cm;
* a named place, reflector, shield, enclosure or other source more than 100 m from the
  first source (a reflector: the plane's distance; a shield or enclosure: its centre);
* a source power above 100 kW;
* a duty cycle below 1e-4;
* a product emission limit (the oven-leakage ids ``fda-1030.10/*``, 21 CFR 1030.10(c)(1):
  leakage 5 cm from an oven's external surface) used without an ``[enclosure]``.
"""

from __future__ import annotations

import contextlib
import warnings
from collections.abc import Iterable, Iterator, Sequence
from contextlib import contextmanager
from typing import Any

import numpy as np

from keepclear.antennas.base import ModelRangeWarning

from .errors import entry_path

#: Thicker shield metal than this looks like a wall, or a thickness typed in mm [m].
MAX_PLAUSIBLE_SHEET_M = 0.05
#: Objects farther from the first source than this look like a unit slip [m].
MAX_PLAUSIBLE_DISTANCE_M = 100.0
#: More power than this is beyond a portable magnetron set-up [W].
MAX_PLAUSIBLE_POWER_W = 100e3
#: A duty cycle below this looks like a percentage typed as a tiny fraction.
MIN_PLAUSIBLE_DUTY_CYCLE = 1e-4
#: Limit ids that are product emission limits, not keep-out limits.
OVEN_LEAKAGE_PREFIX = "fda-1030.10/"


class PlausibilityWarning(ModelRangeWarning):
    """A valid input that is probably not what the user meant."""


def oven_leakage_messages(limit_ids: Iterable[str], has_enclosure: bool) -> list[str]:
    """Messages for oven-leakage limits assessed without an enclosure."""
    if has_enclosure:
        return []
    return [
        f"{limit_id} is a product emission limit for microwave-oven leakage, read 5 cm from "
        "an oven's outer surface (21 CFR 1030.10(c)(1)); the scenario has no [enclosure], "
        "so it is compared here like an exposure limit, which is not what it was written for"
        for limit_id in limit_ids
        if limit_id.startswith(OVEN_LEAKAGE_PREFIX)
    ]


def plausibility_messages(scenario: Any) -> list[str]:
    """Every plausibility message for a built scenario, in a fixed order.

    Parameters
    ----------
    scenario : Scenario

    Returns
    -------
    list of str
        One sentence per finding: the key path, the value and why it looks wrong.
    """
    return _setup_messages(scenario) + oven_leakage_messages(
        scenario.limit_ids, scenario.enclosure is not None
    )


def _setup_messages(scenario: Any) -> list[str]:
    """The plausibility messages about the set-up itself (all but the limits')."""
    out: list[str] = []
    first = np.asarray(scenario.sources[0].position_m, dtype=float)
    far = MAX_PLAUSIBLE_DISTANCE_M

    def distance(point: Any) -> float:
        return float(np.linalg.norm(np.asarray(point, dtype=float) - first))

    for i, s in enumerate(scenario.sources):
        where = entry_path("source", i)
        if s.power_w > MAX_PLAUSIBLE_POWER_W:
            out.append(
                f"{where}.power_w = {s.power_w:g} W is above 100 kW, beyond a portable "
                "magnetron set-up; check the unit (W, not mW)"
            )
        if s.duty_cycle < MIN_PLAUSIBLE_DUTY_CYCLE:
            out.append(
                f"{where}.duty_cycle = {s.duty_cycle:g} is below 1e-4; a duty cycle is a "
                "fraction (0.5 for half the time), not a percentage divided twice"
            )
        if i and distance(s.position_m) > far:
            out.append(
                f"{where}.position_m is {distance(s.position_m):.0f} m from the first "
                "source; positions are in metres (not centimetres)"
            )
    from keepclear.antennas.walls import WalledAperture  # loaded already if one is in use

    for i, s in enumerate(scenario.sources):
        where = entry_path("source", i)
        if isinstance(s.radiator, WalledAperture) and s.radiator.flange_m is not None:
            out.append(
                f"{where} ({s.antenna}) has a flange_m and is too large for the wire grid "
                "of its walls and flange, so it is modelled as its aperture with the flange's "
                "edge currents: held against two full-wave solutions (an open WR-340 guide on "
                "a 0.25 x 0.20 m flange, a 0.24 x 0.18 m horn on a 0.36 x 0.27 m flange), in "
                "front it was within -2.4/+4.1 dB of them (its keep-out margin is "
                f"{s.radiator.gain_uncertainty_db:g} dB), beside and behind it carries a "
                f"back-region {s.radiator.back_margin_db:g} dB margin (the largest deficit "
                "found there, rounded up); "
                "measure before relying on it"
            )
        elif isinstance(s.radiator, WalledAperture):
            out.append(
                f"{where} ({s.antenna}) is modelled as its aperture with the rim's edge "
                "currents (it is too large for the wire grid of its walls): no full-wave "
                f"solution covers it; beside and behind it carries a back-region "
                f"{s.radiator.back_margin_db:g} dB margin (the largest deficit found on bare "
                "guides and horns), in front it was within -0.6/+2.2 dB of full wave; "
                "measure before relying on it"
            )
    for i, p in enumerate(scenario.points):
        where = entry_path("point", i)
        if distance(p.position_m) > far:
            out.append(
                f"{where}.position_m ('{p.name}') is {distance(p.position_m):.0f} m from the "
                "first source; positions are in metres (not centimetres)"
            )
    for i, r in enumerate(scenario.reflectors):
        where = entry_path("reflector", i)
        gap = abs(float(np.dot(first - np.asarray(r.point_m, float), np.asarray(r.normal))))
        if gap > far:
            out.append(f"{where} lies {gap:.0f} m from the first source; point_m is in metres")
    for i, sh in enumerate(scenario.shields):
        where = entry_path("shield", i)
        thickness = getattr(sh.spec, "thickness_m", None)
        if thickness is not None and thickness > MAX_PLAUSIBLE_SHEET_M:
            out.append(
                f"{where}.thickness_m = {thickness:g} m is thicker than 5 cm, more a wall "
                "than a sheet; thicknesses are in metres (1 mm = 0.001)"
            )
        if distance(sh.center_m) > far:
            out.append(
                f"{where} is centred {distance(sh.center_m):.0f} m from the first source; "
                "positions are in metres"
            )
    enclosure = scenario.enclosure
    if enclosure is not None:
        centre = np.asarray(enclosure.min_corner_m, float) + 0.5 * np.asarray(
            enclosure.size_m, float
        )
        if distance(centre) > far:
            out.append(
                f"the enclosure is centred {distance(centre):.0f} m from the first source; "
                "positions are in metres"
            )
        if enclosure.thickness_m > MAX_PLAUSIBLE_SHEET_M:
            out.append(
                f"enclosure wall thickness {enclosure.thickness_m:g} m is thicker than 5 cm; "
                "thicknesses are in metres"
            )
    return out


def _issue(messages: Iterable[str]) -> None:
    """Issue each distinct message once, as a :class:`PlausibilityWarning`.

    Every plausibility warning leaves from this one line, so Python's default filter
    shows a message repeated by several steps of one run once.
    """
    for message in dict.fromkeys(messages):
        warnings.warn(message, PlausibilityWarning, stacklevel=1)


def warn_implausible(
    scenario: Any, options: Iterable[Any] | None = None, *, with_base: bool = True
) -> None:
    """Issue each distinct plausibility message of a scenario and of its options once.

    An option's own findings are prefixed with its name (``option 'NAME': ...``); what it
    shares with the base (a value the option does not change) is the base's message alone.
    ``options`` defaults to the scenario's; without ``with_base`` the base's messages are
    not issued again (they were when it was loaded).
    """
    base = plausibility_messages(scenario)
    chosen = scenario.options if options is None else options
    own = [
        f"option '{o.name}': {m}"
        for o in chosen
        for m in plausibility_messages(o.scenario)
        if m not in base
    ]
    _issue([*(base if with_base else []), *own])


def warn_limits(scenario: Any, limit_ids: Iterable[str]) -> None:
    """Warn about oven-leakage ids asked for beyond the scenario's own limits.

    The scenario's ``[exposure] limits`` were checked when it was loaded
    (:func:`warn_implausible`); this covers ids given on the command line (``--limit``)
    or to an API function, with the same wording.
    """
    extra = [i for i in limit_ids if i not in scenario.limit_ids]
    _issue(oven_leakage_messages(extra, scenario.enclosure is not None))


@contextmanager
def recording_load_warnings() -> Iterator[list[str]]:
    """Record the input warnings raised while a scenario is built, then raise them again.

    The yielded list receives, once the block has finished without an exception, the
    text of each distinct warning of the :class:`UserWarning` family except the
    plausibility ones (which :func:`input_warnings` works out again from the scenario):
    a material outside its model's frequency range, a guide near its cut-off, a wide
    horn flare, a thick wire, an enclosure beyond its model's range.  Each warning is
    then issued again at its own place, so the caller's filters decide what is shown;
    the record is complete whatever they are.  A warning an inner record already holds
    (an option's, read while its scenario is built) is not recorded again by the outer
    one: each scenario keeps its own.
    """
    found: list[str] = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", UserWarning)
        yield found
    for w in caught:
        text = str(w.message)
        input_kind = issubclass(w.category, UserWarning) and not issubclass(
            w.category, PlausibilityWarning
        )
        if input_kind and not getattr(w.message, _RECORDED, False):
            if text not in found:
                found.append(text)
            with contextlib.suppress(AttributeError):  # a warning given as a plain string
                setattr(w.message, _RECORDED, True)
        warnings.warn_explicit(w.message, w.category, w.filename, w.lineno, source=w.source)


#: Attribute that marks a warning already held by a record (see recording_load_warnings).
_RECORDED = "_keepclear_recorded"


def input_warnings(
    scenario: Any, limit_ids: Sequence[str] | None = None, *, options: bool = False
) -> list[str]:
    """Every warning about a run's input, for its outputs (``"warnings"`` in the JSON).

    Parameters
    ----------
    scenario : Scenario
        The scenario as run (the base, or the option chosen with ``--option``).
    limit_ids : sequence of str, optional
        The limits assessed (default: the scenario's).
    options : bool
        Also the warnings of each of its options (an assessment that runs them all), each
        beginning "option 'NAME': ", where they are not the scenario's own.

    Returns
    -------
    list of str
        Distinct sentences in a fixed order: the warnings raised while the scenario was
        built (:func:`recording_load_warnings`) and its plausibility findings, then those
        of the options, then the oven-leakage warning of each ``fda-1030.10/*`` id assessed
        without an ``[enclosure]``.  Empty for a plausible input.
    """
    ids = scenario.limit_ids if limit_ids is None else limit_ids
    found = [*scenario.load_warnings, *_setup_messages(scenario)]
    if options:
        for option in scenario.options:
            own = [*option.scenario.load_warnings, *_setup_messages(option.scenario)]
            found += [f"option '{option.name}': {m}" for m in own if m not in found]
    found += oven_leakage_messages(ids, scenario.enclosure is not None)
    return list(dict.fromkeys(found))
