"""``screen``: a light battery over many models at once, ranked by strength of evidence.

Each model gets the exact Durbin-Watson p-value for its own design, the
Breusch-Godfrey and Ljung-Box p-values and its main finding in words; the
Durbin-Watson p-values are then adjusted across models (Benjamini-Hochberg).
Inputs are turned into plain arrays in this process, and the tests can run on
any :class:`concurrent.futures.Executor` (a process pool, or a
dask.distributed client's executor) in chunks of models.
"""

from __future__ import annotations

import concurrent.futures as cf
import math
import os
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from statsmodels.stats.multitest import multipletests

from .battery_run import BG, DW, LB, BatterySettings, failure_reason, ljung_box_lag, run_battery, strength
from .formats import format_count, format_level
from .hints import sort_hint
from .inputs import ResidualData, as_residual_data, frame_column, unlabelled, unlabelled_note
from .order import check_order, infer_bg_order, infer_seasonal_period
from .stats._arrays import (
    check_alpha,
    check_alternative,
    check_flag,
    check_label,
    check_labels,
    check_optional_int,
    check_order_arg,
)
from .stats._caught import caught_warnings
from .stats.tall import one_blas_thread
from .verdict import write_verdict

__all__ = ["ScreenResult", "screen"]

#: columns of :attr:`ScreenResult.table`, in order
COLUMNS = (
    "model",
    "status",
    "n",
    "rank",
    "dw",
    "dw_pvalue",
    "dw_p_adjusted",
    "strength",
    "bg_pvalue",
    "lb_pvalue",
    "finding",
    "dw_method",
    "order",
    "not_run",
    "notes",
)
_SHOWN = ["model", "n", "dw", "dw_pvalue", "dw_p_adjusted", "strength", "finding", "status"]
_MAX_CHUNK = 25  # models per chunk at most: small enough to balance the load at the end


@dataclass(frozen=True, eq=False)
class ScreenResult:
    """Results of :func:`screen`.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per model (failed ones included, with their reason in
        ``status``), sorted by strength of evidence: Benjamini-Hochberg
        adjusted Durbin-Watson p-value, then the raw p-value; failures last.
    failed : dict
        Model name -> why it could not be screened.
    method : str
        How the p-values were obtained and adjusted.
    """

    table: pd.DataFrame
    failed: dict
    method: str
    alpha: float
    alternative: str
    notes: tuple = field(default_factory=tuple)

    @property
    def flagged(self) -> list:
        """Names of the models whose adjusted Durbin-Watson p-value is below ``alpha``."""
        return self.table.loc[self.table["dw_p_adjusted"] < self.alpha, "model"].tolist()

    def to_frame(self) -> pd.DataFrame:
        """A copy of :attr:`table`."""
        return self.table.copy()

    def __str__(self) -> str:
        ok = len(self.table) - len(self.failed)
        head = (
            f"lagsight screen: {format_count(len(self.table))} models, {format_count(ok)} screened, "
            f"{format_count(len(self.failed))} failed; {format_count(len(self.flagged))} with evidence at "
            f"\u03b1 = {format_level(self.alpha)} after adjustment "
            f"(alternative: {self.alternative})"
        )
        shown = self.table[_SHOWN].to_string(
            index=False, max_rows=20, max_colwidth=70, float_format=lambda v: f"{v:.4g}"
        )
        lines = [head, shown, f"method: {self.method}"]
        lines += [f"note: {n}" for n in self.notes]
        return "\n".join(lines)

    __repr__ = __str__

    def _repr_html_(self) -> str:
        head = str(self).splitlines()[0]
        return f"<p>{head}</p>" + self.table.to_html(index=False, max_rows=50, float_format=lambda v: f"{v:.4g}")


# ---------------------------------------------------------------------------- worker side
def _finding_words(verdict) -> str:
    """The main finding in words: the first sentence of the verdict's headline."""
    head = verdict.headline
    cut = head.find(". ")
    return head if cut < 0 else head[: cut + 1]


def _light_battery(item: dict, alpha: float, alternative: str) -> dict:
    """Durbin-Watson, Breusch-Godfrey and Ljung-Box for one model given as plain arrays."""
    n = int(item["resid"].shape[0])
    data = ResidualData(
        resid=item["resid"],
        index=pd.RangeIndex(n),
        exog=item["exog"],
        exog_names=item["exog_names"],
        has_constant=item["has_constant"],
        endog=item["endog"],
        arma_df=item["arma_df"],
        dw_applicable=item["dw_applicable"],
    )
    settings = BatterySettings(
        alpha=alpha,
        alternative=alternative,
        bg_max_lag=item["bg_max_lag"],
        lb_lag=item["lb_lag"],
        period=None,
        correlogram=False,
    )
    with caught_warnings() as caught:
        run = run_battery(data, settings)
        verdict = write_verdict(
            run.tests,
            run.plan,
            alpha=alpha,
            alternative=alternative,
            errors=run.errors,
            shuffled=item["shuffled"],
            lagged_response=run.lagged_response,
        )
    warned = [*run.warned_notes, *caught.notes()]
    dw, bg, lb = (run.tests.get(name) for name in (DW, BG, LB))
    k = dw.rank if dw is not None and dw.rank is not None else (None if data.exog is None else data.exog.shape[1])
    return {
        "n": n,
        "rank": k,
        "dw": math.nan if dw is None else dw.statistic,
        "dw_pvalue": math.nan if dw is None else dw.pvalue,
        "bg_pvalue": math.nan if bg is None else bg.pvalue,
        "lb_pvalue": math.nan if lb is None else lb.pvalue,
        "finding": _finding_words(verdict),
        "dw_method": "" if dw is None else dw.method,
        "not_run": "; ".join(f"{name}: {why}" for name, why in run.errors.items()),
        "warned": " ".join(warned),
    }


def _run_chunk(items: list, alpha: float, alternative: str) -> list:
    """Screen a chunk of models; a model that raises gives its reason instead of a row."""
    out: list[tuple[int, Any]] = []
    with one_blas_thread():  # the parallelism is across models
        for item in items:
            try:
                out.append((item["pos"], _light_battery(item, alpha, alternative)))
            except Exception as err:  # isolate the model: the rest of the chunk goes on
                out.append((item["pos"], failure_reason(err, with_kind=True)))
    return out


# ---------------------------------------------------------------------------- parent side
def _plain(data: ResidualData, report, pos: int) -> dict:
    """What is shipped to a worker: arrays and numbers, never the fitted model or the frame."""
    period = infer_seasonal_period(data.index)
    shuffled = bool(report.flags.get("shuffled")) and not report.flags.get("sorted")
    return {
        "pos": pos,
        "resid": data.resid,
        "exog": data.exog,
        "endog": data.endog,
        "exog_names": data.exog_names,
        "has_constant": data.has_constant,
        "arma_df": data.arma_df,
        "dw_applicable": data.dw_applicable,
        "bg_max_lag": infer_bg_order(data.index),
        "lb_lag": ljung_box_lag(data.n, period, leading=data.exog is None or not data.dw_applicable),
        "shuffled": shuffled,
    }


def _prepare(pos: int, kwargs: dict, order) -> tuple[dict, dict]:
    """Convert one model in this process: (item for a worker, columns kept here)."""
    with caught_warnings() as caught:
        data = as_residual_data(**kwargs)
        report = check_order(data, order=order)
        data = report.apply(data)
        item = _plain(data, report, pos)
    meta = {
        "order": report.order_used,
        "notes": " ".join(data.notes + tuple(report.warnings) + caught.notes()),
        "shuffled": item["shuffled"],
    }
    return item, meta


def _specs(models, exog, response, predictors, groups, order):
    """(names, notes, build) for every accepted form of ``models``.

    ``build(i)`` gives the :func:`as_residual_data` arguments of model ``i``;
    it runs lazily, chunk by chunk, so a bad entry fails alone.
    """
    notes = []
    exog_for = exog.get if isinstance(exog, Mapping) else (lambda _name: exog)
    if isinstance(models, pd.DataFrame):
        columns = list(models.columns)
        if groups is None:
            if response is not None or predictors is not None:
                raise TypeError(
                    "'response' and 'predictors' need groups= when 'models' is a DataFrame "
                    "(one OLS per group); without groups each column is a residual series"
                )
            if order not in ("auto", "keep", "index"):
                raise ValueError(
                    f"'order' must be 'auto', 'keep' or 'index' when each column is a residual "
                    f"series (time goes in the index) (got {order!r})"
                )
            return columns, notes, lambda i: {"model": models.iloc[:, i], "exog": exog_for(columns[i])}
        if response is None or predictors is None:
            raise TypeError(
                f"a DataFrame with groups= needs response= and predictors= (got response="
                f"{response!r}, predictors={predictors!r})"
            )
        if exog is not None:
            raise TypeError(
                "'exog' does not apply to a DataFrame with groups= (got "
                f"{type(exog).__name__}); the design is built from 'predictors'"
            )
        if order not in ("auto", "keep", "index") and order not in columns:
            raise ValueError(f"'order': column {order!r} is not in the DataFrame (columns: {columns})")
        response = check_label(response, "response")
        preds = check_labels(predictors, "predictors")
        for arg, col in [("response", response)] + [("predictors", c) for c in preds]:
            frame_column(models, col, arg)  # present and named once
        if isinstance(groups, str):
            labels = frame_column(models, groups, "groups").to_numpy()
        else:
            labels = np.asarray(groups)
            if labels.shape != (len(models),):
                raise ValueError(
                    f"'groups' must be a column name or have one label per row ({len(models)}) "
                    f"(got shape {labels.shape})"
                )
        missing = int(unlabelled(labels).sum())
        if missing:
            notes.append(unlabelled_note(missing))
        labels = pd.Series(labels)
        blocks = labels.groupby(labels, sort=False, dropna=True).indices
        names = list(blocks)
        return (
            names,
            notes,
            lambda i: {"model": models.iloc[blocks[names[i]]], "response": response, "predictors": preds},
        )
    if isinstance(models, Mapping):
        if groups is not None:
            raise TypeError(
                "'groups' applies when 'models' is a DataFrame (got a mapping); give one entry per model instead"
            )
        names = list(models)

        def build(i):
            name, value = names[i], models[names[i]]
            if isinstance(value, Mapping):
                if "model" not in value:
                    raise TypeError(f"a dict entry needs a 'model' key (got keys {list(value)})")
                return dict(value)
            if isinstance(value, pd.DataFrame):
                return {"model": value, "response": response, "predictors": predictors}
            if isinstance(exog, Mapping) or isinstance(value, (np.ndarray, list, pd.Series)):
                return {"model": value, "exog": exog_for(name)}
            return {"model": value}  # a fitted model brings its own design

        return names, notes, build
    raise TypeError(
        f"'models' must be a mapping of names to models or residuals, or a DataFrame (got {type(models).__name__})"
    )


def _default_chunksize(n_models: int, executor) -> int:
    workers = getattr(executor, "_max_workers", None) or os.cpu_count() or 1
    return int(max(1, min(_MAX_CHUNK, math.ceil(n_models / (8 * workers)))))


def screen(
    models,
    *,
    exog=None,
    response=None,
    predictors=None,
    groups=None,
    order="auto",
    alpha: float = 0.05,
    alternative: str = "positive",
    executor=None,
    chunksize=None,
    progress: bool = True,
) -> ScreenResult:
    """Screen many models for serially correlated residuals and rank them.

    Parameters
    ----------
    models : mapping or DataFrame
        Names -> anything :func:`lagsight.diagnose` accepts (a fitted model, a
        residual series, a DataFrame with ``response``/``predictors``, or a dict
        of :func:`~lagsight.as_residual_data` arguments such as
        ``{"model": est, "exog": X, "endog": y}``); or a DataFrame with ``groups`` and
        ``response``/``predictors`` (one OLS per group); or a DataFrame whose
        columns are residual series.
    exog : array-like or mapping, optional
        Design of residual series: one shared by all, or name -> design.
    response, predictors, groups : str, list of str, str or array
        For a DataFrame: the OLS fitted within each group (``groups`` is a
        column name or one label per row).
    order : {'auto', 'keep', 'index'} or column name
        Order each model is tested in (see :func:`lagsight.check_order`).
    alpha, alternative
        Level and direction ('positive', 'negative', 'two-sided').
    executor : concurrent.futures.Executor, optional
        Where the tests run (default: here, one model after the other).
    chunksize : int, optional
        Models sent per task (default: at most 25, about 8 tasks per worker).
    progress : bool
        Show a progress bar (tqdm; a widget in notebooks).

    Returns
    -------
    ScreenResult
        ``table`` columns: model, status, n, k, dw, dw_pvalue, dw_p_adjusted,
        strength, bg_pvalue, lb_pvalue, finding, dw_method, order, not_run, notes.

    Notes
    -----
    Models are converted here and only arrays travel to the executor.  A model
    that cannot be converted or tested is listed with its reason; the others
    finish.
    """
    alpha = check_alpha(alpha)
    check_alternative(alternative)
    check_order_arg(order)
    chunksize = check_optional_int(chunksize, "chunksize", minimum=1)
    progress = check_flag(progress, "progress")
    if executor is not None and not isinstance(executor, cf.Executor):
        raise TypeError(f"'executor' must be a concurrent.futures.Executor (got {type(executor).__name__})")
    names, notes, build = _specs(models, exog, response, predictors, groups, order)
    if not names:
        raise ValueError("'models' must hold at least one model (got 0)")
    size = int(chunksize) if chunksize is not None else _default_chunksize(len(names), executor)
    rows: list = [None] * len(names)
    metas: list = [{}] * len(names)
    failed_at: dict = {}
    from tqdm.auto import tqdm

    bar = tqdm(total=len(names), desc="lagsight screen", unit="model", disable=not progress)
    window = 2 * (getattr(executor, "_max_workers", None) or os.cpu_count() or 1) + 2
    pending: dict = {}

    def collect(done):
        for fut in done:
            positions = pending.pop(fut)
            try:
                results = fut.result()
            except Exception as err:  # the whole chunk was lost (a worker died, say): its models fail
                results = [(p, f"worker error: {failure_reason(err, with_kind=True)}") for p in positions]
            for p, res in results:
                if isinstance(res, str):
                    failed_at[p] = res
                else:
                    rows[p] = res
            bar.update(len(positions))

    try:
        chunk: list = []
        for pos in range(len(names)):
            try:
                item, metas[pos] = _prepare(pos, build(pos), order)
                chunk.append(item)
            except Exception as err:  # conversion failed: skip this model, keep its reason
                failed_at[pos] = failure_reason(err, with_kind=True)
                bar.update(1)
            if len(chunk) == size or (pos == len(names) - 1 and chunk):
                fut = _submit(executor, chunk, alpha, alternative)
                pending[fut] = [it["pos"] for it in chunk]
                chunk = []
                if executor is None or len(pending) >= window:
                    done, _ = cf.wait(list(pending), return_when=cf.FIRST_COMPLETED)
                    collect(done)
        while pending:
            done, _ = cf.wait(list(pending), return_when=cf.FIRST_COMPLETED)
            collect(done)
    finally:
        for fut in pending:
            fut.cancel()
        bar.close()
    return _assemble(names, rows, metas, failed_at, notes, alpha, alternative)


def _submit(executor, chunk, alpha, alternative) -> cf.Future:
    """Send a chunk; in this process when there is no executor.  A refused chunk fails its models."""
    if executor is not None:
        try:
            return executor.submit(_run_chunk, chunk, alpha, alternative)
        except Exception as err:  # e.g. a broken pool, or a cluster that went away
            fut: cf.Future = cf.Future()
            fut.set_exception(err)
            return fut
    fut = cf.Future()
    fut.set_result(_run_chunk(chunk, alpha, alternative))
    return fut


def _assemble(names, rows, metas, failed_at, notes, alpha, alternative) -> ScreenResult:
    records = []
    for pos, name in enumerate(names):
        outcome = {"status": f"failed: {failed_at[pos]}"} if pos in failed_at else dict(rows[pos])
        warned = outcome.pop("warned", "")
        record = {"model": name, "status": "ok", **metas[pos], **outcome}
        if warned:  # library warnings raised while testing this model
            record["notes"] = " ".join(filter(None, [record.get("notes", ""), warned]))
        records.append(record)
    table = pd.DataFrame.from_records(records, columns=[c for c in COLUMNS if c not in ("dw_p_adjusted", "strength")])
    table = table.astype(
        {"dw": float, "dw_pvalue": float, "bg_pvalue": float, "lb_pvalue": float, "n": "Int64", "rank": "Int64"}
    )
    for col in ("finding", "dw_method", "order", "not_run", "notes"):
        table[col] = pd.Series([v if isinstance(v, str) else "" for v in table[col]], dtype=str)
    p = table["dw_pvalue"].to_numpy(float)
    ok = ~np.isnan(p)
    adj = np.full(p.shape, np.nan)
    if ok.any():
        adj[ok] = multipletests(p[ok], method="fdr_bh")[1]
    table.insert(table.columns.get_loc("dw_pvalue") + 1, "dw_p_adjusted", adj)
    table.insert(table.columns.get_loc("dw_p_adjusted") + 1, "strength", [strength(q, alpha) for q in adj])
    is_failed = table["status"] != "ok"
    table = (
        table.assign(_failed=is_failed.to_numpy())
        .sort_values(["_failed", "dw_p_adjusted", "dw_pvalue", "bg_pvalue"], na_position="last", kind="stable")
        .drop(columns="_failed")
        .reset_index(drop=True)
    )
    failed = {names[pos]: why for pos, why in sorted(failed_at.items())}
    notes = list(notes)
    notes.append(
        f"Adjusted p-values control the false discovery rate across the {int(ok.sum())} models with "
        "an exact Durbin-Watson p-value (Benjamini-Hochberg)."
    )
    no_p = int((~ok & ~is_failed.to_numpy()).sum())
    if no_p:
        notes.append(
            f"{no_p} model(s) have no exact Durbin-Watson p-value (no design matrix, or an ARIMA-type "
            "model): they are left out of the adjustment and sorted after the others; read their "
            "finding, which uses Breusch-Godfrey and Ljung-Box."
        )
    unordered = sum(bool(metas[pos].get("shuffled")) for pos in range(len(names)) if pos not in failed_at)
    if unordered:
        notes.append(
            f"{format_count(unordered)} model(s) have rows that are not in time order: their tests are not "
            f"meaningful until sorted ({sort_hint()})."
        )
    if failed:
        notes.append(f"{format_count(len(failed))} model(s) could not be screened: see 'failed' and the status column.")
    methods = sorted({m for m in table["dw_method"] if m})
    method = (
        f"Durbin-Watson p-value for each model's own design ({'; '.join(methods) or 'none computed'}); "
        "Breusch-Godfrey LM and Ljung-Box Q against chi-square; Benjamini-Hochberg adjustment of the "
        f"Durbin-Watson p-values across models; strength read from the adjusted p at \u03b1 = {format_level(alpha)}; "
        "finding reads each model on its own, from its smallest unadjusted p-value."
    )
    return ScreenResult(
        table=table, failed=failed, method=method, alpha=alpha, alternative=alternative, notes=tuple(notes)
    )
