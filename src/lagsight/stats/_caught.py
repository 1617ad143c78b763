"""Warnings from the libraries underneath become notes on a result.

numpy, scipy, statsmodels and pandas warn about what they did (a singular matrix
solved by pseudo-inverse, an overflow, a rank-deficient design); raised as Python
warnings they would reach the user as raw text from somebody else's code, or not
at all when warnings are filtered.  :func:`caught_warnings` is the one place that
collects them while lagsight computes, so the caller can attach them as notes.
Inside it numpy's floating-point errors warn (whatever ``np.seterr`` says outside),
so they are recorded instead of raising or passing silently.
"""

from __future__ import annotations

import contextlib
import os
import warnings

import numpy as np

__all__ = ["CaughtWarnings", "caught_warnings"]

_LIBRARIES = ("numpy", "scipy", "statsmodels", "pandas", "patsy", "sklearn", "matplotlib")
_MAX_CHARS = 200


def _library(record) -> str:
    """The library a warning came from: its category's package, else the file that raised it."""
    top = type(record.message).__module__.split(".")[0]
    if top in _LIBRARIES:
        return top
    parts = os.path.normpath(str(record.filename)).split(os.sep)
    for lib in _LIBRARIES:
        if lib in parts:
            return lib
    if "encountered in" in str(record.message):  # a floating-point error numpy reports for our own arithmetic
        return "numpy"
    return "lagsight" if "lagsight" in parts else "Python"


class CaughtWarnings:
    """The warnings raised inside one :func:`caught_warnings` block, in the order first seen."""

    def __init__(self) -> None:
        self._counts: dict = {}

    def add(self, record) -> None:
        text = " ".join(str(record.message).split()) or type(record.message).__name__
        if len(text) > _MAX_CHARS:
            text = text[: _MAX_CHARS - 1] + "\u2026"
        key = (_library(record), text)
        self._counts[key] = self._counts.get(key, 0) + 1

    def __bool__(self) -> bool:
        return bool(self._counts)

    def __len__(self) -> int:
        return len(self._counts)

    def notes(self, where: str = "") -> tuple:
        """One note per distinct warning: 'statsmodels warned[ where]: <message> (3 times)'."""
        at = f" {where}" if where else ""
        return tuple(
            f"{lib} warned{at}: {text}" + (f" ({k} times)" if k > 1 else "") for (lib, text), k in self._counts.items()
        )


@contextlib.contextmanager
def caught_warnings():
    """Collect every warning raised in the block (none escapes) into a :class:`CaughtWarnings`.

    Nested blocks each keep their own warnings; the outer block sees none of the inner ones.
    """
    caught = CaughtWarnings()
    with warnings.catch_warnings(record=True) as records, np.errstate(all="warn", under="ignore"):
        warnings.simplefilter("always")
        try:
            yield caught
        finally:
            for record in records:
                caught.add(record)
