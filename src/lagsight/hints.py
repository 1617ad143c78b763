"""Hints in the syntax of where the user is: the one place that writes an option into a sentence.

Every piece of advice that names an option ("sort with order='index'", "pass exog=") is written
through :func:`option_hint`, which renders the option as a keyword argument (the Python API), as a
``%lagsight`` flag (the magic) or as a ``lagsight report`` flag (the command line).  The entry point
states its syntax once with :func:`hint_syntax` around its call to ``diagnose``; the diagnosis keeps
it (``Diagnosis.hint_syntax``) so that views and re-assessments write later hints the same way.  The
default is the Python API.  This is presentation: nothing in :mod:`lagsight.stats` uses it.
"""

from __future__ import annotations

import contextlib
import contextvars

__all__ = [
    "HINT_SYNTAXES",
    "hint_syntax",
    "current_hint_syntax",
    "option_hint",
    "sort_hint",
    "option_flags",
    "check_hint_syntax",
]

#: where a user can be: the Python API, the ``%lagsight`` magic, the ``lagsight`` command line
HINT_SYNTAXES = ("api", "magic", "cli")

_CURRENT: contextvars.ContextVar[str] = contextvars.ContextVar("lagsight_hint_syntax", default="api")

# option -> (magic flag, CLI flag); None where that entry point has no such option (the API form is then
# written, since that is the only way to set it).  Magic flags are those of lagsight.magic, CLI flags those
# of lagsight.cli.
_FLAGS = {
    "order": ("--order", "--time"),
    "time": ("--order", "--time"),
    "exog": ("--X", "--x"),
    "predictors": ("--X", "--x"),
    "endog": ("--y", "--y"),
    "response": ("--y", "--y"),
    "groups": ("--groups", "--groups"),
    "period": ("--period", None),
    "max_lag": ("--max-lag", None),
    "bg_max_lag": ("--bg-max-lag", None),
    "alpha": ("--alpha", "--alpha"),
    "alternative": ("--alternative", "--alternative"),
    "power": ("--power", None),
}

# values of 'order' that the command line writes as a column for --time
_CLI_ORDER = {"index": "<time column>", "time": "<time column>"}


def check_hint_syntax(syntax) -> str:
    """``syntax`` when it is one of :data:`HINT_SYNTAXES`, else a ValueError."""
    if syntax not in HINT_SYNTAXES:
        raise ValueError(f"'hint_syntax' must be one of {', '.join(map(repr, HINT_SYNTAXES))} (got {syntax!r})")
    return syntax


@contextlib.contextmanager
def hint_syntax(syntax: str):
    """Within the block, hints are written in ``syntax`` ('api', 'magic' or 'cli')."""
    token = _CURRENT.set(check_hint_syntax(syntax))
    try:
        yield syntax
    finally:
        _CURRENT.reset(token)


def current_hint_syntax() -> str:
    """The syntax hints are written in here ('api' unless an entry point said otherwise)."""
    return _CURRENT.get()


def option_hint(option: str, value=None, *, syntax: str | None = None) -> str:
    """An option as the user would type it where they are.

    ``option_hint('order', 'index')`` is ``order='index'`` in the API, ``--order index`` in the magic
    and ``--time <time column>`` on the command line; without a value the option alone
    (``exog=``, ``--X``, ``--x``).  A flag (``power``) takes no value in the magic.  ``syntax``
    defaults to :func:`current_hint_syntax`.
    """
    syntax = current_hint_syntax() if syntax is None else check_hint_syntax(syntax)
    if option not in _FLAGS:
        raise ValueError(f"'option' must be one of {', '.join(map(repr, _FLAGS))} (got {option!r})")
    magic, cli = _FLAGS[option]
    flag = {"magic": magic, "cli": cli}.get(syntax)
    if flag is None:  # the API, or an option this entry point does not have
        return f"{option}=" if value is None else f"{option}={value!r}"
    if value is None or value is True:
        return flag
    if syntax == "cli" and option in ("order", "time"):
        value = _CLI_ORDER.get(str(value), value)
    text = str(value)
    if " " in text and not text.startswith("<"):
        text = f'"{text}"'
    return f"{flag} {text}"


def option_flags(syntax: str) -> dict:
    """Option -> the flag that sets it in ``syntax`` ('magic' or 'cli'), for the options that entry point has
    (the magic uses it to name its own flags in the library's error messages)."""
    if check_hint_syntax(syntax) == "api":
        return {name: f"{name}=" for name in _FLAGS}
    column = 0 if syntax == "magic" else 1
    return {name: flags[column] for name, flags in _FLAGS.items() if flags[column] is not None}


def sort_hint(*, syntax: str | None = None) -> str:
    """How to sort the rows by time where the user is: "order='index' or order='<time column>'",
    "--order index or --order <time column>", or "--time <time column>"."""
    by_index = option_hint("order", "index", syntax=syntax)
    by_column = option_hint("order", "<time column>", syntax=syntax)
    return by_index if by_index == by_column else f"{by_index} or {by_column}"
