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
        The key path inside the file (``source.2.power_w``) or the option name.
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


class ModelInputError(InputError, ValueError):
    """A source model was given parameters it cannot represent.

    An :class:`~keepclear.antennas.errors.InputError` whose key is the model parameter:
    the message names the parameter, the value and what is allowed; the scenario loader
    relocates it to the file and key path, and raised at run time it is still bad input
    (exit status 2 on the command line).

    Parameters
    ----------
    parameter : str
        The model parameter (the scenario key where they coincide).
    message : str
        What is wrong and what is allowed.
    """

    def __init__(self, parameter: str, message: str) -> None:
        super().__init__(message, None, parameter)
        self.parameter = parameter

    def located(self, source: str | None = None, key: str | None = None) -> InputError:
        """An :class:`InputError` with the file and/or key filled in where still missing."""
        return InputError(self.message, self.source or source, self.key or key)


class ModelRangeWarning(UserWarning):
    """A model is used close to (but not past) the edge of its validity."""


__all__ = ["InputError", "ModelInputError", "ModelRangeWarning", "one_line"]
