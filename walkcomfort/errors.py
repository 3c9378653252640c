"""Error and warning classes shared by every stage.

A user-facing error says *what* was wrong, *where* (file, line or row) and *how
to fix it*; the CLI prints ``str(error)`` as one line and exits with code 2.
"""

from __future__ import annotations

import os


class WalkcomfortError(Exception):
    """Base of every error walkcomfort raises on purpose.

    Parameters
    ----------
    what : str
        What was wrong, including the value received and what is allowed.
    where : str or os.PathLike, optional
        The place: a file, optionally with ``:line`` / ``row N`` / ``[table] key``.
    fix : str, optional
        How the user can fix it.
    """

    def __init__(self, what: str, where: str | os.PathLike | None = None, fix: str | None = None):
        self.what = str(what)
        self.where = None if where is None else str(where)
        self.fix = fix
        super().__init__(self.one_line())

    def one_line(self) -> str:
        text = self.what.rstrip(".")
        if self.where:
            text = f"{self.where}: {text}"
        text = f"{text}. Fix: {self.fix.rstrip('.')}." if self.fix else f"{text}."
        # one line, always: collapse any newline a caller slipped in
        return " ".join(text.split())

    def __str__(self) -> str:  # pragma: no cover - trivial
        return self.one_line()


class InputError(WalkcomfortError, ValueError):
    """A file, manifest, option or value given by the user cannot be used."""


class NotFittedError(WalkcomfortError, RuntimeError):
    """A model was asked to predict before it was fitted."""


class DataQualityWarning(UserWarning):
    """Data were usable but something about them deserves a look (gaps, clamps, ...)."""


class ValidityRangeWarning(DataQualityWarning):
    """Inputs fell outside a published model's validity range; rows are flagged."""


def where(path: str | os.PathLike, line: int | None = None, row: int | None = None) -> str:
    """Format a location for :class:`WalkcomfortError` (``file:line`` or ``file row N``)."""
    text = os.fspath(path)
    if line is not None:
        text = f"{text}:{line}"
    elif row is not None:
        text = f"{text} row {row}"
    return text
