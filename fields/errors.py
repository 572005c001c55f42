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


class UnknownKeyError(ScenarioError):
    """A key the table does not take: ``word``, with the keys ``allowed`` there.

    ``reason`` says why when the key is known elsewhere (a key of another antenna kind).
    """

    def __init__(
        self,
        message: str,
        source: str | None = None,
        key: str | None = None,
        *,
        word: str = "",
        allowed: Iterable[str] = (),
        reason: str = "",
    ) -> None:
        super().__init__(message, source, key)
        self.word = word
        self.allowed = tuple(allowed)
        self.reason = reason

    def located(self, source: str | None = None, key: str | None = None) -> UnknownKeyError:
        """Return a copy with the file and/or key filled in where still missing."""
        return UnknownKeyError(
            self.message,
            self.source or source,
            self.key or key,
            word=self.word,
            allowed=self.allowed,
            reason=self.reason,
        )


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
    "UnknownKeyError",
    "closest",
    "entry_path",
    "one_line",
]


def entry_path(table: str, index: int) -> str:
    """How messages name entry ``index`` (from 0) of ``[[table]]``: ``source.1`` is the first.

    Entries count from 1 in file order, as the key paths of a sweep do
    (``reflector.1.material``), so a message's path can be used as a sweep key.
    """
    return f"{table}.{index + 1}"


def closest(word: str, choices: Iterable[str], cutoff: float = 0.6) -> str | None:
    """The choice closest to ``word`` (a likely misspelling of it), or None.

    ``cutoff`` is the least :class:`difflib.SequenceMatcher` ratio of a match.
    """
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=cutoff)
    return close[0] if close else None


def suggest(word: str, choices: Iterable[str]) -> str:
    """Return ``" (did you mean 'x'?)"`` for the closest choice, or ``""``."""
    close = closest(word, choices)
    return f" (did you mean '{close}'?)" if close else ""
