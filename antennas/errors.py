"""The base of every input error: one line that names where, what and what is allowed.

It lives here, at the bottom of the import graph, so that the radiator models
(:mod:`keepclear.antennas`) and everything above them (:mod:`keepclear.fields`, which
re-exports it from :mod:`keepclear.fields.errors`) raise the same kind of error, and the
command line maps every one of them to exit status 2, whenever it is raised.
"""

from __future__ import annotations


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


__all__ = ["InputError", "one_line"]
