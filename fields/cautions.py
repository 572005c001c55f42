"""The caution every human-facing output ends with.

Short and plain: an estimate is not a measurement, and the hazards around a
magnetron set-up go beyond the radiated field.
"""

from __future__ import annotations

#: Lines of the caution, in the order they are printed.
CAUTION_LINES: tuple[str, ...] = (
    "These figures are an estimate from models, not a measurement: verify with a calibrated "
    "RF survey meter before anyone relies on them.",
    "Magnetron power supplies carry lethal high voltage, also after switch-off (charged "
    "capacitors).",
    "Magnetron ceramics may contain toxic beryllium oxide: never break, grind or handle "
    "broken ones.",
    "People with implanted medical devices (pacemakers, defibrillators, neurostimulators, "
    "insulin pumps) need separate, stricter advice.",
    "Local codes and licensed RF-safety practice take precedence over this tool.",
)

#: The caution as one paragraph.
CAUTION_TEXT: str = " ".join(CAUTION_LINES)


def caution_block(width: int = 0) -> str:
    """The caution as a plain-text block headed ``CAUTION``.

    Parameters
    ----------
    width : int
        Wrap to this many columns (0: one line per item).
    """
    import textwrap

    lines = ["CAUTION"]
    for item in CAUTION_LINES:
        if width:
            lines += textwrap.wrap(item, width, initial_indent="- ", subsequent_indent="  ")
        else:
            lines.append(f"- {item}")
    return "\n".join(lines)
