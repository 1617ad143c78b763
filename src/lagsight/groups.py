"""Panels: the battery within each group, a pooled within-group Durbin-Watson, BH adjustment.

Differences are never taken across a group boundary.  Each group is tested in
its own time order (the order guard sorts groups into blocks first).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy.stats import f_oneway
from statsmodels.stats.multitest import multipletests

from .battery_run import BG, DW, LB, RUNS, BatterySettings, failure_reason, run_battery, strength
from .formats import format_count, format_p, format_statistic
from .inputs import ResidualData
from .stats._arrays import unit_columns, unit_scale
from .stats._caught import caught_warnings
from .stats.durbin_watson import DurbinWatsonDistribution, dw_statistic
from .stats.results import tail_pvalue

__all__ = ["GroupSummary", "MIN_GROUP_SIZE", "run_groups"]

#: groups with fewer observations are skipped and listed
MIN_GROUP_SIZE = 3
#: columns of the per-group table (before the adjustment adds dw_p_adjusted and finding)
_COLUMNS = ("group", "n", "dw", "rho_hat", "dw_pvalue", "bg_pvalue", "lb_pvalue", "runs_pvalue", "errors")


@dataclass(frozen=True, eq=False)
class GroupSummary:
    """Per-group results and the pooled within-group statistic.

    ``table`` has one row per tested group, sorted by strength of evidence
    (smallest Durbin-Watson p-value first), with Benjamini-Hochberg adjusted
    p-values.  ``skipped`` maps group labels to the reason they were skipped.
    """

    table: pd.DataFrame
    pooled_dw: float
    pooled_pvalue: float
    naive_dw: float
    n_groups: int
    skipped: dict = field(default_factory=dict)
    method: str = ""
    notes: tuple = ()
    alpha: float = 0.05
    alternative: str = "positive"
    #: P(d <= pooled d) under the null, for the pooled p-value at another alternative
    pooled_lower_tail: float = math.nan
    #: group label -> one-sided probabilities (DW lower, DW upper, runs lower, runs upper)
    tails: dict = field(default_factory=dict, repr=False)

    def at_level(self, alpha: float, alternative: str) -> GroupSummary:
        """The same groups judged at another alpha and alternative (no test is run again)."""
        table = self.table.copy()
        if len(table):
            tails = np.array([self.tails.get(g, (math.nan,) * 4) for g in table["group"]], dtype=float)
            table["dw_pvalue"] = [_p(lo, up, alternative) for lo, up in tails[:, :2]]
            table["runs_pvalue"] = [_p(lo, up, alternative) for lo, up in tails[:, 2:]]
            table = _adjust(table, alpha)
        pooled = _p(self.pooled_lower_tail, 1 - self.pooled_lower_tail, alternative)
        return dataclasses.replace(self, table=table, pooled_pvalue=pooled, alpha=alpha, alternative=alternative)

    @property
    def n_tested(self) -> int:
        """Groups in the table (tested); the pooled statistic is taken over these."""
        return int(len(self.table))

    def __str__(self) -> str:
        head = (
            f"{format_count(self.n_groups)} groups ({format_count(self.n_tested)} tested, "
            f"{format_count(len(self.skipped))} skipped); pooled within-group d = {format_statistic(self.pooled_dw)} "
            f"({format_p(self.pooled_pvalue)}); stacked d across boundaries = {format_statistic(self.naive_dw)}"
        )
        lines = [head, self.table.to_string(max_rows=20)]
        if self.skipped:
            lines.append(f"skipped: {', '.join(f'{k} ({v})' for k, v in self.skipped.items())}")
        return "\n".join(lines)


def _p(lower: float, upper: float, alternative: str) -> float:
    return math.nan if math.isnan(lower) or math.isnan(upper) else tail_pvalue(lower, upper, alternative)


def _tails(res) -> tuple[float, float]:
    return (getattr(res, "lower_tail", math.nan), getattr(res, "upper_tail", math.nan)) if res else (math.nan,) * 2


def _adjust(table: pd.DataFrame, alpha: float) -> pd.DataFrame:
    """Benjamini-Hochberg adjusted DW p-values, the finding at ``alpha``, strongest evidence first."""
    p = table["dw_pvalue"].to_numpy(float)
    ok = ~np.isnan(p)
    adj = np.full(p.shape, np.nan)
    if ok.any():
        adj[ok] = multipletests(p[ok], method="fdr_bh")[1]
    table["dw_p_adjusted"] = adj
    table["finding"] = [strength(q, alpha) for q in adj]
    return table.sort_values(["dw_p_adjusted", "dw_pvalue"], na_position="last").reset_index(drop=True)


def _row(label, part: ResidualData, settings: BatterySettings) -> dict:
    run = run_battery(part, settings)
    row = {"group": label, "n": part.n}
    dw = run.tests.get(DW)
    row["dw"] = dw.statistic if dw is not None else math.nan
    row["rho_hat"] = 1 - row["dw"] / 2 if dw is not None else math.nan
    row["dw_pvalue"] = dw.pvalue if dw is not None else math.nan
    bg = run.tests.get(BG)
    row["bg_pvalue"] = bg.pvalue if bg is not None else math.nan
    lb = run.tests.get(LB)
    row["lb_pvalue"] = lb.pvalue if lb is not None else math.nan
    runs = run.tests.get(RUNS)
    row["runs_pvalue"] = runs.pvalue if runs is not None else math.nan
    row["errors"] = "; ".join(f"{k}: {v}" for k, v in run.errors.items() if k != "Correlogram")
    row["tails"] = (*_tails(dw), *_tails(runs))
    row["warned"] = run.warned_notes
    return row


def _warning_notes(warned: dict) -> list[str]:
    """One note per library warning, naming the groups it came from (the first five)."""
    out = []
    for note, labels in warned.items():
        shown = ", ".join(map(str, labels[:5])) + (", \u2026" if len(labels) > 5 else "")
        out.append(f"In {format_count(len(labels))} group(s) ({shown}), {note}")
    return out


def _group_level_note(e: np.ndarray, blocks) -> str | None:
    """Say so when residual means differ between groups (one-way ANOVA F test, p < 0.001).

    Group levels left in the residuals of a pooled model make every
    within-group statistic look autocorrelated.
    """
    if len(blocks) < 2:
        return None
    p = f_oneway(*[e[b] for b in blocks]).pvalue
    if p < 1e-3:
        return (
            f"Residual means differ between groups (one-way ANOVA {format_p(p)}): the pooled model leaves "
            "group levels in the residuals, which shows up as "
            "autocorrelation within groups. Add group effects to the model, or fit one model per group and "
            "screen them together."
        )
    return None


def run_groups(data: ResidualData, settings: BatterySettings) -> GroupSummary:
    """The battery within each group of ``data`` (which must carry ``groups``)."""
    labels = pd.Series(data.groups)
    codes, uniques = pd.factorize(labels, sort=False)
    blocks = [np.flatnonzero(codes == g) for g in range(len(uniques))]
    light = BatterySettings(
        alpha=settings.alpha,
        alternative=settings.alternative,
        bg_max_lag=settings.bg_max_lag,
        period=None,
        lb_lag=settings.lb_lag,
        correlogram=False,
    )
    rows: list = []
    skipped: dict = {}
    warned: dict[str, list] = {}  # note -> labels of the groups it came from
    for g, rows_g in enumerate(blocks):
        label = uniques[g]
        if rows_g.size < MIN_GROUP_SIZE:
            skipped[label] = f"{rows_g.size} observation(s), fewer than {MIN_GROUP_SIZE}"
            continue
        part = data.subset(rows_g)
        if part.exog is not None:
            # columns that are zero throughout the group (other groups' dummies) carry nothing
            used = np.any(part.exog != 0, axis=0)
            names = None if part.exog_names is None else tuple(nm for nm, u in zip(part.exog_names, used) if u)
            part = part.replace(exog=part.exog[:, used], exog_names=names)
            if not used.any() or part.n - np.linalg.matrix_rank(unit_columns(part.exog)) < 3:
                part = part.replace(exog=None, exog_names=None)
        try:
            with caught_warnings() as caught:
                rows.append(_row(label, part, light))
        except Exception as err:  # the group is listed as skipped with its reason; the others go on
            skipped[label] = failure_reason(err)
        for note in caught.notes():
            warned.setdefault(note, []).append(label)
    tails = {row["group"]: row.pop("tails") for row in rows}
    for row in rows:
        for note in row.pop("warned"):
            warned.setdefault(note, []).append(row["group"])
    table = pd.DataFrame(rows, columns=_COLUMNS) if not rows else pd.DataFrame(rows)
    notes = _warning_notes(warned)
    if len(table):
        table = _adjust(table, settings.alpha)
        notes.append("Adjusted p-values control the false discovery rate across groups (Benjamini-Hochberg).")
    # pooled within-group statistic, exact for the pooled design, over the groups in the table
    in_table = {row["group"] for row in rows}
    tested = [b for g, b in enumerate(blocks) if uniques[g] in in_table]
    pooled_dw = pooled_p = pooled_lower = math.nan
    e = unit_scale(data.resid)  # d is scale-free; unit size keeps the sums finite near 1e200 and 1e-200
    num = sum(float(np.sum(np.diff(e[b]) ** 2)) for b in tested)
    den = float(sum(np.dot(e[b], e[b]) for b in tested))
    if den > 0:
        pooled_dw = num / den
    method = "pooled within-group d; no exact p-value without a design"
    if data.exog is not None and tested and data.dw_applicable:
        rows_all = np.concatenate(tested)
        X = data.exog[rows_all]
        local = []
        start = 0
        for b in tested:
            local.append(np.arange(start, start + b.size))
            start += b.size
        try:
            with caught_warnings() as caught:
                dist = DurbinWatsonDistribution(X, blocks=local)
                pooled_lower = dist.cdf(pooled_dw)
            pooled_p = tail_pvalue(pooled_lower, 1 - pooled_lower, settings.alternative)
            method = "pooled within-group d, exact p-value for the pooled design (Imhof inversion)"
        except Exception as err:
            notes.append(f"No exact p-value for the pooled statistic: {failure_reason(err)}")
        notes += [f"Pooled statistic: {note}" for note in caught.notes()]
    naive = dw_statistic(e) if data.n > 1 else math.nan
    level_note = _group_level_note(e, tested)
    if level_note:
        notes.append(level_note)
    if skipped:
        notes.append(f"{format_count(len(skipped))} group(s) skipped (listed under the group table).")
    return GroupSummary(
        table=table,
        pooled_dw=pooled_dw,
        pooled_pvalue=pooled_p,
        naive_dw=naive,
        n_groups=len(blocks),
        skipped=skipped,
        method=method,
        notes=tuple(notes),
        alpha=settings.alpha,
        alternative=settings.alternative,
        pooled_lower_tail=pooled_lower,
        tails=tails,
    )
