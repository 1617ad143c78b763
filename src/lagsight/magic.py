"""IPython magics: ``%lagsight`` (diagnose a model) and ``%lagsight_bounds`` (dL and dU).

Nothing is registered at import; ``%load_ext lagsight`` calls
:func:`load_ipython_extension`.  A user mistake (an unknown name, an object
lagsight cannot diagnose, a bad option value) raises ``UsageError``, which
IPython shows as one line without a traceback.
"""

from __future__ import annotations

from IPython.core.error import UsageError
from IPython.core.magic import Magics, line_magic, magics_class
from IPython.core.magic_arguments import argument, magic_arguments, parse_argstring

from .hints import option_flags

__all__ = ["LagsightMagics", "load_ipython_extension", "unload_ipython_extension"]

_ALTERNATIVES = ("positive", "negative", "two-sided")


def _first_line(err: BaseException) -> str:
    text = str(err).strip()
    return text.splitlines()[0] if text else type(err).__name__


def _unquote(text: str | None) -> str | None:
    if text is not None and len(text) >= 2 and text[0] == text[-1] and text[0] in "'\"":
        return text[1:-1]
    return text


#: API argument -> the magic option that sets it, so an error raised by the library's checks
#: (the one place for input rules) names what the user typed; the flags are lagsight.hints' (one table)
_OPTION_OF = option_flags("magic")


def _usage(err: BaseException, names: dict = _OPTION_OF) -> UsageError:
    """The library's one-line message, with API argument names replaced by the magic's options."""
    text = _first_line(err)
    for arg, option in names.items():
        text = text.replace(f"'{arg}'", option)
    return UsageError(text)


def _parse(magic, line: str):
    """The magic's arguments, or a UsageError for a line that cannot be split (an unclosed quote)."""
    try:
        return parse_argstring(magic, line)
    except ValueError as err:  # shlex's 'No closing quotation' and the like
        raise UsageError(f'the line cannot be read: {_first_line(err)} (quote names with spaces: "a b")') from None


@magics_class
class LagsightMagics(Magics):
    """The lagsight magics."""

    def _evaluate(self, expr: str, what: str):
        expr = expr.strip()
        if not expr:
            raise UsageError(f"{what} is missing")
        try:
            shell = self.shell
            assert shell is not None  # a registered magic always has its shell
            return eval(expr, shell.user_global_ns, shell.user_ns)  # the user's own expression
        except NameError as err:
            name = getattr(err, "name", None)
            detail = f"name {name!r} is not defined" if name else _first_line(err)
            raise UsageError(f"{what} {expr!r}: {detail} in this session") from None
        except SyntaxError as err:
            raise UsageError(f"{what} {expr!r} is not a Python expression ({err.msg})") from None
        except Exception as err:  # the user's expression failed: report it in one line
            raise UsageError(
                f"{what} {expr!r} could not be evaluated: {type(err).__name__}: {_first_line(err)}"
            ) from None

    @magic_arguments()
    @argument(
        "expr",
        nargs="*",
        help="The model or residuals: a name or expression from the notebook. Left out: the fitted model the "
        "previous cell showed or assigned, else the only fitted model in the session.",
    )
    @argument("--max-lag", type=int, metavar="N", help="Highest lag of the correlogram and the Ljung-Box test.")
    @argument("--bg-max-lag", type=int, metavar="P", help="Highest lag of the Breusch-Godfrey test.")
    @argument("--alpha", type=float, metavar="A", help="Significance level, in (0, 1). Default 0.05.")
    @argument("--alternative", choices=_ALTERNATIVES, help="Direction of the alternative. Default positive.")
    @argument(
        "--order",
        metavar="HOW",
        help="Row order to test in: keep (as given), index (sort by the index) or a column name "
        "(sort by that column). Default: keep, with a warning when the rows look out of order.",
    )
    @argument("--groups", metavar="COLUMN", help="Column with group labels: test within each group.")
    @argument(
        "--period",
        type=int,
        metavar="S",
        help="Seasonal period for the seasonal Durbin-Watson test; 0 turns it off. Default: from the index frequency.",
    )
    @argument(
        "--X",
        dest="X",
        metavar="EXPR",
        help="The design: X for a scikit-learn estimator, the regressors (exog) for residuals, or "
        "comma-separated predictor columns for a DataFrame.",
    )
    @argument(
        "--y",
        dest="y",
        metavar="EXPR",
        help="The response: y for a scikit-learn estimator, or the response column for a DataFrame.",
    )
    @argument("--power", action="store_true", help="Also simulate the power of the exact Durbin-Watson test.")
    @argument("--static", action="store_true", help="Static output only (no widgets).")
    @argument(
        "--quiet",
        action="store_true",
        help="Show only the verdict and the sentence to paste (the notes stay on the returned Diagnosis).",
    )
    @line_magic
    def lagsight(self, line: str = ""):
        """Diagnose serial correlation in a model's residuals and show the interactive panel.

        Returns the Diagnosis, so ``d = %lagsight model`` keeps it; end the line
        with ``;`` to show nothing.  EXPR may be a fitted statsmodels regression or
        ARIMA/SARIMAX result, a fitted scikit-learn regressor (with --X and --y),
        residuals (with --X for their design), or a DataFrame (with --y and --X
        naming columns).

        Examples
        --------
        ::

            %load_ext lagsight
            %lagsight                              # the model the previous cell fitted
            %lagsight fit                          # statsmodels results: the full panel
            d = %lagsight fit --alpha 0.01 --alternative two-sided
            %lagsight fit --order date --max-lag 30  # sort rows by the 'date' column first
            %lagsight fit --groups store --static  # test within each store, static output
            %lagsight fit --period 12              # monthly data: seasonal lag 12
            %lagsight reg --X X_test --y y_test    # a scikit-learn regressor
            %lagsight frame --y sales --X price,promo
            %lagsight fit --quiet                  # one verdict line and the sentence to paste
        """
        line = line.strip()
        silent = line.endswith(";")
        args = _parse(self.lagsight, line.rstrip(";"))
        expr = " ".join(args.expr)
        options = self._options(args)
        took = None
        if expr:
            model = self._evaluate(expr, "model")
        else:
            expr, model, took = self._pick_model()
        self._design(model, args, options)
        from .diagnosis import diagnose
        from .display import set_preferences, silence_in_cell
        from .hints import hint_syntax

        try:  # library warnings never escape diagnose: they become notes on the Diagnosis
            with hint_syntax("magic"):  # advice names the magic's options (--order index, --X)
                diag = diagnose(model, **options)
        except (TypeError, ValueError) as err:
            raise _usage(err) from None
        if took is not None:
            import dataclasses

            diag = dataclasses.replace(diag, notes=(f"%lagsight took {expr}: {took}.", *diag.notes))
        mode = "quiet" if args.quiet else ("static" if args.static else "panel")
        set_preferences(diag, mode=mode, name=expr)
        if silent:
            silence_in_cell(diag, self.shell)
        return diag

    def _pick_model(self) -> tuple[str, object, str]:
        """(name, model, why) for ``%lagsight`` with no argument: the fitted model the previous cell showed
        or assigned, else the only fitted model in the session; a UsageError listing them when there are
        several, or saying there is none."""
        import ast

        from .inputs import is_fitted_model

        shell = self.shell
        assert shell is not None  # a registered magic always has its shell
        ns, hidden = shell.user_ns, getattr(shell, "user_ns_hidden", {})
        found = {}
        for name, value in list(ns.items()):
            if name.startswith("_") or name in hidden:
                continue
            if is_fitted_model(value):
                found[name] = value
        # while a cell runs it is the last entry of In: the one before it is the previous cell
        inputs = ns.get("In", [])
        inputs = inputs if isinstance(inputs, list) else []
        previous = len(inputs) - 2
        out = ns.get("Out", {})
        if previous > 0 and isinstance(out, dict) and is_fitted_model(out.get(previous)):
            return f"Out[{previous}]", out[previous], f"the result cell [{previous}] showed"
        source = inputs[previous] if previous > 0 else ""
        try:
            tree = ast.parse(source)
        except SyntaxError:
            tree = ast.parse("")
        assigned = [
            node.id
            for node in ast.walk(tree)
            if isinstance(node, ast.Name) and isinstance(node.ctx, ast.Store) and node.id in found
        ]
        if len(set(assigned)) == 1:
            return assigned[0], found[assigned[0]], f"the fitted model cell [{previous}] assigned"
        if len(set(assigned)) > 1:
            names = ", ".join(sorted(set(assigned)))
            raise UsageError(
                f"cell [{previous}] assigned several fitted models ({names}): name one, e.g. %lagsight {assigned[-1]}"
            )
        if len(found) == 1:
            name = next(iter(found))
            return name, found[name], "the only fitted model in this session"
        if not found:
            raise UsageError("no fitted model in this session: give the model to diagnose, e.g. %lagsight fit")
        names = ", ".join(sorted(found))
        raise UsageError(
            f"several fitted models in this session ({names}): name one, e.g. %lagsight {sorted(found)[0]}"
        )

    def _options(self, args) -> dict:
        if args.static and args.quiet:
            raise UsageError("choose one of --static and --quiet")
        # values are checked by diagnose itself (the one place for input rules); see _usage
        options = {
            "alpha": args.alpha,
            "alternative": args.alternative,
            "max_lag": args.max_lag,
            "bg_max_lag": args.bg_max_lag,
            "period": args.period,
            "order": _unquote(args.order),
            "groups": _unquote(args.groups),
            "power": True if args.power else None,
        }
        return {k: v for k, v in options.items() if v is not None}

    def _design(self, model, args, options) -> None:
        """Route --X / --y to what ``diagnose`` expects for this kind of model."""
        import numpy as np
        import pandas as pd

        X, y = _unquote(args.X), _unquote(args.y)
        if isinstance(model, pd.DataFrame):
            if y is None:
                raise UsageError("a DataFrame needs --y (the response column) and --X (predictor columns)")
            if X is None:
                raise UsageError("a DataFrame needs --X: the predictor columns, separated by commas")
            from .inputs import typed_column, typed_columns

            options["response"] = typed_column(y, model.columns)
            try:
                options["predictors"] = typed_columns(X, model.columns, "--X")
            except ValueError as err:
                raise UsageError(_first_line(err)) from None
        elif isinstance(model, (np.ndarray, list, tuple, pd.Series)):
            if y is not None:
                raise UsageError("--y does not apply to residuals (use --X for their design matrix)")
            if X is not None:
                options["exog"] = self._evaluate(X, "--X")
        elif X is not None or y is not None:
            if X is not None:
                options["exog"] = self._evaluate(X, "--X")
            if y is not None:
                options["endog"] = self._evaluate(y, "--y")

    @magic_arguments()
    @argument("n", type=int, help="Number of observations.")
    @argument("k", type=int, help="Number of regressors, not counting the constant (k').")
    @argument("--alpha", type=float, default=0.05, metavar="A", help="Level of the one-sided test. Default 0.05.")
    @argument("--no-constant", action="store_true", help="The model has no constant term.")
    @line_magic
    def lagsight_bounds(self, line: str = ""):
        """Durbin-Watson bounds dL and dU for n observations and k' regressors, as a table and the 0-4 scale.

        Returns the bounds view (its ``bounds`` attribute holds dL and dU).

        Examples
        --------
        ::

            %lagsight_bounds 50 3
            %lagsight_bounds 120 2 --alpha 0.01
            %lagsight_bounds 40 1 --no-constant
        """
        args = _parse(self.lagsight_bounds, line.strip().rstrip(";"))
        from .display import BoundsView
        from .stats.bounds import dw_bounds

        try:
            bounds = dw_bounds(args.n, args.k, alpha=args.alpha, has_constant=not args.no_constant)
        except (TypeError, ValueError) as err:
            raise _usage(err, {"n": "N", "k_prime": "K", "alpha": "--alpha"}) from None
        return BoundsView(bounds)


def load_ipython_extension(ipython) -> None:
    """Register the lagsight magics (called by ``%load_ext lagsight``).

    The figure and panel modules (matplotlib, ipywidgets) are imported here,
    once, so the first ``%lagsight`` does not pay for those imports.
    """
    import importlib

    for name in ("lagsight.render.figures", "lagsight.panel"):
        importlib.import_module(name)
    ipython.register_magics(LagsightMagics)


def unload_ipython_extension(ipython) -> None:
    """Nothing to undo beyond what IPython does itself."""
