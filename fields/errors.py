"""The exception hierarchy for input errors.

Every error a user can cause by what they wrote (a scenario file, a command-line
argument) is a :class:`InputError`.  The command line maps it to exit status 2 and
prints its one-line message on stderr; anything else is an unexpected fault (exit 1).
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable

from keepclear.antennas.base import ModelInputError


def one_line(text: str) -> str:
    """``text`` as one printable line: line breaks and other unprintable characters escaped.

    File names, keys and values come from the user and may hold a newline (or a Unicode
    line separator); the error must still be the one line the command line promises.
    """
    if text.isprintable():
        return text
    return "".join(
        ch if ch.isprintable() else ch.encode("unicode_escape").decode("ascii") for ch in text
    )


class InputError(Exception):
    """Bad input from the user: one line that names where, what and what is allowed.

    Parameters
    ----------
    message : str
        What is wrong and what is allowed.
    source : str, optional
        The file (or ``"argument"``) the input came from.
    key : str, optional
        The key path inside the file (``source[1].power_w``) or the option name.
    """

    def __init__(self, message: str, source: str | None = None, key: str | None = None) -> None:
        super().__init__(message)
        self.message = message
        self.source = source
        self.key = key

    def __str__(self) -> str:
        where = ": ".join(part for part in (self.source, self.key) if part)
        return one_line(f"{where}: {self.message}" if where else self.message)

    def located(self, source: str | None = None, key: str | None = None) -> InputError:
        """Return a copy with the file and/or key filled in where still missing."""
        return type(self)(self.message, self.source or source, self.key or key)


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
