"""``diagnose``: from a fitted model (or residuals) to a full Diagnosis.

Runs the order guard, the test battery (or the per-group battery for panels),
the remedies when correlation is found, optionally the power curve, and writes
the verdict.  Everything the notebook panel and the magic show comes from here.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field

import pandas as pd

from .battery_run import DW, BatterySettings, LeadPlan, failure_reason, run_battery
from .formats import format_count, format_pvalue, format_statistic
from .groups import GroupSummary, run_groups
from .hints import current_hint_syntax, hint_syntax
from .inputs import ResidualData, as_residual_data
from .order import OrderReport, check_order, infer_seasonal_period
from .stats._arrays import check_alpha, check_choice, check_flag, check_optional_int, check_period
from .stats._caught import caught_warnings
from .stats.bounds import dw_bounds
from .stats.correlogram import Correlogram
from .stats.durbin_watson import DurbinWatsonDistribution
from .stats.power import PowerCurve, dw_power
from .stats.remedies import InferenceComparison, compare_inference
from .stats.results import check_alternative, tail_pvalue
from .verdict import Verdict, write_verdict

__all__ = ["Diagnosis", "diagnose"]


@dataclass(frozen=True, eq=False)
class Diagnosis:
    """Everything lagsight found about one model's residuals.

    Attributes
    ----------
    tests : dict
        Test name -> result object (statistic, pvalue, alternative, df, method, notes).
    errors : dict
        Test name -> why that test could not run.
    notes : tuple of str
        Findings as sentences, order-guard warnings among them.
    verdict : Verdict
        Plain language: what was found, how strong, what to do, the cautions.
    """

    data: ResidualData
    order: OrderReport
    tests: dict
    errors: dict
    verdict: Verdict
    alpha: float
    alternative: str
    correlogram: Correlogram | None = None
    distribution: DurbinWatsonDistribution | None = field(default=None, repr=False)
    remedies: InferenceComparison | None = None
    power: PowerCurve | None = None
    groups: GroupSummary | None = None
    period: int | None = None
    lagged_response: str | None = None
    notes: tuple = ()
    #: which test leads the verdict, fixed from the model's kind (see lagsight.battery_run.lead_plan)
    plan: LeadPlan | None = None
    #: the syntax hints are written in: 'api', 'magic' or 'cli' (see lagsight.hints), set by the entry point
    hint_syntax: str = "api"

    # -- views ---------------------------------------------------------------
    @property
    def n(self) -> int:
        return self.data.n

    @property
    def shuffled(self) -> bool:
        """True when the rows tested are not in time order (a shuffle that was not sorted away)."""
        return bool(self.order.flags.get("shuffled")) and not self.order.flags.get("sorted")

    @property
    def test_notes(self) -> tuple:
        """The notes of the individual tests, each as 'test name: note'."""
        return tuple(f"{name}: {note}" for name, res in self.tests.items() for note in res.notes)

    def to_frame(self) -> pd.DataFrame:
        """The test table: one row per test."""
        rows = []
        for name, res in self.tests.items():
            p = res.pvalue
            rows.append(
                {
                    "test": name,
                    "statistic": res.statistic,
                    "pvalue": p,
                    "alternative": res.alternative,
                    "df": ", ".join(f"{d:g}" for d in res.df) if res.df else "",
                    "method": res.method,
                    "reading": self.verdict.reading(name, p),
                }
            )
        for name, msg in self.errors.items():
            rows.append(
                {
                    "test": name,
                    "statistic": math.nan,
                    "pvalue": math.nan,
                    "alternative": "",
                    "df": "",
                    "method": "",
                    "reading": f"not run: {msg}",
                }
            )
        return pd.DataFrame(rows, columns=["test", "statistic", "pvalue", "alternative", "df", "method", "reading"])

    def reassess(self, *, alpha: float | None = None, alternative: str | None = None) -> Diagnosis:
        """The same diagnosis at another alpha or alternative, without recomputing distributions."""
        alpha = self.alpha if alpha is None else check_alpha(alpha)
        alternative = self.alternative if alternative is None else check_alternative(alternative)
        tests = dict(self.tests)
        for name, res in self.tests.items():
            changes: dict = {}
            if hasattr(res, "lower_tail") and not math.isnan(res.pvalue):
                toward_positive, toward_negative = res.lower_tail, res.upper_tail
                if getattr(res, "large_means_positive", False):
                    toward_positive, toward_negative = toward_negative, toward_positive
                changes.update(
                    pvalue=tail_pvalue(toward_positive, toward_negative, alternative), alternative=alternative
                )
            bounds = getattr(res, "bounds", None)
            if bounds is not None:  # the bounds are for one level: draw them again at this one
                if bounds.alpha != alpha:
                    bounds = dw_bounds(bounds.n, bounds.k_prime, alpha=alpha, has_constant=bounds.has_constant)
                changes.update(
                    bounds=bounds, bounds_decision=bounds.decision(res.statistic, alternative), alternative=alternative
                )
            if changes:
                tests[name] = dataclasses.replace(res, **changes)
        remedies = self.remedies
        groups = None if self.groups is None else self.groups.at_level(alpha, alternative)
        correlogram = None if self.correlogram is None else self.correlogram.at_alpha(alpha)
        new = dataclasses.replace(
            self, tests=tests, alpha=alpha, alternative=alternative, groups=groups, correlogram=correlogram
        )
        verdict = _verdict(new, remedies)
        if verdict.finding == "evidence" and remedies is None:
            remedies = _remedies(self.data, alpha)
            verdict = _verdict(new, remedies)
        elif remedies is not None and remedies.alpha != alpha:
            remedies = remedies.at_alpha(alpha)
            verdict = _verdict(new, remedies)
        return dataclasses.replace(new, verdict=verdict, remedies=remedies)

    def __str__(self) -> str:
        lines = [
            f"lagsight diagnosis: {self.data.source}",
            f"tested in {self.order.order_used}, n = {format_count(self.n)}",
            "",
        ]
        lines.append(str(self.verdict))
        lines.append("")
        rows = [
            (row["test"], format_statistic(row["statistic"]), format_pvalue(row["pvalue"]), row["reading"])
            for row in self.to_frame().to_dict("records")
        ]
        table = pd.DataFrame(rows, columns=["test", "statistic", "p-value", "reading"])
        lines.append(table.to_string(index=False))
        if self.notes:
            lines.append("")
            lines += [f"note: {n}" for n in self.notes]
        if self.test_notes:
            lines.append("")
            lines += [f"test note, {n}" for n in self.test_notes]
        return "\n".join(lines)

    __repr__ = __str__

    # -- notebook display (glue in lagsight.display and lagsight.panel) --------------
    def _repr_mimebundle_(self, include=None, exclude=None):
        from .display import mimebundle

        return mimebundle(self, include=include, exclude=exclude)

    def _ipython_display_(self):
        from .display import show

        show(self)

    def save_html(self, path, *, overwrite: bool = False, **view_options):
        """Write a standalone HTML report (no network needed) and return its path.

        An existing file is replaced only with ``overwrite=True`` (else FileExistsError).
        """
        from .render.html import save_html

        return save_html(self, path, overwrite=overwrite, **view_options)

    def panel(self, **options):
        """The interactive panel (:class:`lagsight.panel.DiagnosisPanel`) for this diagnosis."""
        from .panel import DiagnosisPanel

        return DiagnosisPanel(self, **options)


def _remedies(data: ResidualData, alpha: float, notes: list | None = None):
    """The corrections table, or None; why there is none goes into ``notes`` when given."""
    if data.endog is None or data.exog is None:
        return None
    with caught_warnings() as caught:
        try:
            fixes = compare_inference(
                data.endog, data.exog, names=list(data.exog_names) if data.exog_names else None, alpha=alpha
            )
        except Exception as err:
            fixes = None
            if notes is not None:
                notes.append(f"No corrected inference: {failure_reason(err)}.")
    if notes is not None:
        notes += [f"Corrected inference: {note}" for note in caught.notes()]
    return fixes


def _verdict(d: Diagnosis, remedies) -> Verdict:
    with hint_syntax(d.hint_syntax):
        return _write(d, remedies)


def _write(d: Diagnosis, remedies) -> Verdict:
    return write_verdict(
        d.tests,
        d.plan,
        alpha=d.alpha,
        alternative=d.alternative,
        errors=d.errors,
        order_warnings=d.order.warnings,
        shuffled=d.shuffled,
        lagged_response=d.lagged_response,
        remedies=remedies,
        period=d.period,
        groups=d.groups,
    )


def diagnose(
    model,
    *,
    exog=None,
    endog=None,
    response=None,
    predictors=None,
    groups=None,
    order: str = "auto",
    time=None,
    alpha: float = 0.05,
    alternative: str = "positive",
    max_lag: int | None = None,
    bg_max_lag: int | None = None,
    period: int | None = None,
    remedies: bool | str = "auto",
    power: bool = False,
) -> Diagnosis:
    """Diagnose serial correlation in a model's residuals.

    Parameters
    ----------
    model
        A statsmodels regression or ARIMA/SARIMAX result, a scikit-learn
        regressor (with its X as ``exog`` and y as ``endog``), residuals (array or
        Series, optionally with their design ``exog``), or a DataFrame with
        ``response`` and ``predictors``.
    groups : str or array, optional
        Group labels (a column name for DataFrames): the battery runs within each group.
    order : {'auto', 'keep', 'index'} or column name
        Order in which residuals are tested (see :func:`lagsight.order.check_order`).
    time : str or array, optional
        Time stamps (a column name for DataFrames, or one value per row) that the
        order check and ``order='time'`` use.
    alpha, alternative
        Level and direction ('positive', 'negative', 'two-sided').
    max_lag, bg_max_lag, period
        Highest lag of the correlogram and Ljung-Box test, highest lag of the
        Breusch-Godfrey test, seasonal period s (0 turns the seasonal test off);
        inferred from the index frequency when omitted.
    remedies : 'auto', True or False
        Corrected inference: when correlation is found ('auto'), always, or never.
    power : bool
        Also simulate the power of the exact DW test against AR(1) errors.
    """
    alpha = check_alpha(alpha)
    check_alternative(alternative)
    max_lag = check_optional_int(max_lag, "max_lag", minimum=1)
    bg_max_lag = check_optional_int(bg_max_lag, "bg_max_lag", minimum=1)
    period = check_period(period)
    check_choice(remedies, "remedies", ("auto", True, False))
    power = check_flag(power, "power")
    # the libraries underneath warn as they compute: those warnings become notes, none escapes
    with caught_warnings() as caught:
        d = _diagnose(
            model,
            exog=exog,
            endog=endog,
            response=response,
            predictors=predictors,
            groups=groups,
            order=order,
            time=time,
            alpha=alpha,
            alternative=alternative,
            max_lag=max_lag,
            bg_max_lag=bg_max_lag,
            period=period,
            remedies=remedies,
            power=power,
        )
    if caught:
        d = dataclasses.replace(d, notes=d.notes + caught.notes())
    return d


def _diagnose(
    model,
    *,
    exog,
    endog,
    response,
    predictors,
    groups,
    order,
    time,
    alpha,
    alternative,
    max_lag,
    bg_max_lag,
    period,
    remedies,
    power,
) -> Diagnosis:
    data = as_residual_data(
        model, exog=exog, endog=endog, response=response, predictors=predictors, groups=groups, time=time
    )
    report = check_order(data, order=order)
    data = report.apply(data)
    if period is None:
        period = infer_seasonal_period(data.index)
    settings = BatterySettings(
        alpha=alpha, alternative=alternative, max_lag=max_lag, bg_max_lag=bg_max_lag, period=period or None
    )
    notes = list(data.notes) + list(report.warnings)
    group_summary = None
    if data.groups is not None and pd.Series(data.groups).nunique() > 1:
        group_summary = run_groups(data, settings)
        notes += list(group_summary.notes)
        # the pooled series is still tested, but never across group boundaries for DW
    elif data.groups is not None:
        label = pd.Series(data.groups).iloc[0]
        notes.append(f"'groups' gives every row the same label ({label!r}), so the rows were tested as one series.")
    run = run_battery(data, settings)
    notes += list(run.notes)
    tests = dict(run.tests)
    if group_summary is not None and DW in tests:
        notes.append(
            "With groups, read the per-group table and the pooled within-group d; the "
            "whole-series tests below run across group boundaries."
        )
    d = Diagnosis(
        data=data,
        order=report,
        tests=tests,
        errors=dict(run.errors),
        verdict=None,  # type: ignore[arg-type]
        alpha=alpha,
        alternative=alternative,
        correlogram=run.correlogram,
        distribution=run.distribution,
        groups=group_summary,
        period=run.period,
        lagged_response=run.lagged_response,
        notes=tuple(notes),
        plan=run.plan,
        hint_syntax=current_hint_syntax(),
    )
    verdict = _verdict(d, None)
    fixes = None
    if remedies is True and verdict.finding == "cannot judge":
        notes.append("No corrected inference: the input is degenerate (see the verdict).")
    elif remedies is True or (remedies == "auto" and verdict.finding == "evidence"):
        fixes = _remedies(data, alpha, notes)
        if fixes is None and remedies is True and (data.endog is None or data.exog is None):
            notes.append("Corrected inference needs the response and the design (a fitted regression).")
        verdict = _verdict(d, fixes)
    curve = None
    if power and verdict.finding == "cannot judge":
        notes.append("No power curve: the input is degenerate (see the verdict).")
    elif power:
        if data.exog is None:
            notes.append("The power curve needs the design matrix.")
        else:
            with caught_warnings() as caught:
                try:
                    curve = dw_power(data.exog, alpha=alpha, alternative=alternative)
                except Exception as err:
                    notes.append(f"No power curve: {failure_reason(err)}.")
            notes += [f"Power curve: {note}" for note in caught.notes()]
    return dataclasses.replace(d, verdict=verdict, remedies=fixes, power=curve, notes=tuple(notes))
