"""The exception hierarchy for input errors.

Every error a user can cause by what they wrote (a scenario file, a command-line
argument) is a :class:`InputError` (defined in :mod:`keepclear.antennas.errors`, so the
radiator models raise it too: :class:`ModelInputError` is one).  The command line maps
it to exit status 2 and prints its one-line message on stderr; anything else is an
unexpected fault (exit 1).
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable

from keepclear.antennas.errors import InputError, ModelInputError, one_line


class ScenarioError(InputError):
    """A scenario file is unreadable, has an unknown key, or a value out of range."""


class LimitError(InputError):
    """An unknown limit id, or a frequency outside a limit's published band."""


class ResourceError(InputError):
    """A request that would exceed a resource bound (memory, grid size) or an unwritable output."""


__all__ = [
    "InputError",
    "LimitError",
    "ModelInputError",
    "ResourceError",
    "ScenarioError",
    "one_line",
]


def suggest(word: str, choices: Iterable[str]) -> str:
    """Return ``" (did you mean 'x'?)"`` for the closest choice, or ``""``."""
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""
