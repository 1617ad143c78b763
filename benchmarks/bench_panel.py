"""Benchmark of the notebook experience at n = 10^5: magic to first render, callbacks, output size.

Prints
- the time from ``%lagsight fit`` to the complete first render (diagnose, the
  panel with every figure, and the static snapshot), with its parts;
- the time of each widget callback (slider, toggles, selectors), first visit and
  revisit; the snapshot refresh is timed apart (a live kernel defers it);
- the alpha/alternative callbacks again on a panel that had idle time to draw
  those views ahead, with the idle work it did;
- the size of one panel's saved output: the snapshot output, the widget output
  and the widget state (the HTML values the notebook stores).

Usage: python benchmarks/bench_panel.py [--quick]   (--quick: n = 10^4)
"""

from __future__ import annotations

import asyncio
import json
import sys
import time

import numpy as np
from bench_diagnose import single
from IPython.core.interactiveshell import InteractiveShell
from IPython.utils.capture import capture_output

import lagsight.display as glue
from lagsight.battery_run import BG, DW, LB, RUNS, SEASONAL
from lagsight.panel import PREFETCH_DELAY, DiagnosisPanel


def model(n: int, k: int = 5, seed: int = 0):
    """The same hourly AR(1) regression that bench_diagnose.py times."""
    return single(n, k, np.random.default_rng(seed))


def timed(fn):
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def main(quick: bool = False) -> None:
    n = 10**4 if quick else 10**5
    ip = InteractiveShell.instance()
    ip.run_line_magic("load_ext", "lagsight.magic")
    ip.user_ns["fit"] = model(n)
    shown = {}
    real_show = glue.show

    def show_live(diag, **kw):  # what a live kernel does: snapshot + widget
        kw["widgets"] = True
        shown["panel"] = real_show(diag, **kw)
        return shown["panel"]

    glue.show = show_live
    try:
        with capture_output() as cap:
            t0 = time.perf_counter()
            result = ip.run_cell("%lagsight fit", store_history=True)
            first = time.perf_counter() - t0
    finally:
        glue.show = real_show
    if result.error_in_exec is not None:
        raise result.error_in_exec
    panel = shown["panel"]
    diag = panel.base
    print(f"n = {n:,}, k = 5")
    print(f"{'magic to first complete render':<44} {first:8.3f} s   (target <= 1.5 s; first use of this design)")
    from lagsight import diagnose

    t_diag = timed(lambda: diagnose(ip.user_ns["fit"]))
    fresh = {}
    t_panel = timed(lambda: fresh.setdefault("p", DiagnosisPanel(diag)))
    t_snap = timed(lambda: fresh["p"].snapshot())
    print(f"{'  diagnose() alone (repeated)':<44} {t_diag:8.3f} s")
    print(f"{'  a panel with every figure (warm caches)':<44} {t_panel:8.3f} s")
    print(f"{'  its static snapshot (figures reused)':<44} {t_snap:8.3f} s")

    moves = [
        ("max-lag slider", lambda v: setattr(panel.lag_slider, "value", v), [10, 20, 30, 15, 25, 10]),
        ("band toggle", lambda v: setattr(panel.band_toggle, "value", v), ["bartlett", "white", "bartlett"]),
        ("lag picker", lambda v: setattr(panel.lag_picker, "value", v), [2, 3, 4, 2]),
        (
            "test toggle",
            lambda v: setattr(panel.test_toggle, "value", v),
            [t for t in (BG, LB, SEASONAL, RUNS, DW) if t in panel.test_toggle.options],
        ),
        *_level_moves(panel),
    ]
    print(
        "\ncallback time (ms) per move, as in a live kernel: the snapshot refresh runs "
        f"{panel.snapshot_delay:g} s later, timed apart"
    )
    print(f"{'':<16} {'moves':<40} {'max':>6}   snapshot refresh max   (target <= 100 ms)")
    lines = []

    async def run_moves():
        for name, move, values in moves:
            times, snaps = [], []
            for v in values:
                times.append(timed(lambda v=v, move=move: move(v)) * 1e3)
                await asyncio.sleep(panel.snapshot_delay + 0.05)  # let the deferred refresh run
                snaps.append(panel.timings.get("snapshot", 0.0) * 1e3)
            lines.append(f"{name:<16} {' '.join(f'{t:6.0f}' for t in times):<40} {max(times):6.0f}   {max(snaps):6.0f}")

    with capture_output():  # the snapshot updates go to the (captured) display
        asyncio.run(run_moves())
    print("\n".join(lines))

    # the same alpha/alternative moves on a new panel, after it had idle time to draw them ahead
    ahead = DiagnosisPanel(diag, prefetch_delay=None)  # its idle steps are driven and timed here
    steps, ready, drawn = [], {}, {}

    async def idle_then_moves():
        ahead.show()
        drawn["at show"] = ahead.renders
        await asyncio.sleep(PREFETCH_DELAY)
        while True:
            t0 = time.perf_counter()
            more = ahead.prefetch_step()
            steps.append(time.perf_counter() - t0)
            if "alphas" not in ready and _alphas_ready(ahead):
                ready["alphas"] = sum(steps)
            if not more:
                break
            await asyncio.sleep(0)
        return [
            [timed(lambda v=v, move=move: move(v)) * 1e3 for v in values]
            for name, move, values in [(n_, m, v) for n_, m, v in _level_moves(ahead)]
        ]

    with capture_output():
        level_times = asyncio.run(idle_then_moves())
    figures = ahead.renders - drawn["at show"]
    print(
        f"\nafter {PREFETCH_DELAY:g} s of quiet a shown panel draws the alpha/alternative views ahead, "
        f"one figure per loop step:\n  {len(steps) - 1} steps ({figures} figures, the rest re-assessments) in "
        f"{sum(steps):.2f} s of idle time, longest step {max(steps) * 1e3:.0f} ms (the longest a front-end "
        f"message waits);\n  every alpha at the current alternative ready "
        f"{PREFETCH_DELAY + ready.get('alphas', sum(steps)):.2f} s after the panel is shown"
    )
    for (name, _, _), times in zip(_level_moves(ahead), level_times):
        print(f"{name:<16} {' '.join(f'{t:6.0f}' for t in times):<40} {max(times):6.0f}")

    snap, widget = cap.outputs[0], cap.outputs[1]
    out_bytes = len(json.dumps({"data": snap.data}).encode()) + len(json.dumps({"data": widget.data}).encode())
    state = sum(len(json.dumps(w.get_state()).encode()) for w in _widgets(panel.widget))
    print(f"\n{'saved output of one panel (snapshot + widget)':<44} {out_bytes / 1024:8.1f} KB   (target <= 300 KB)")
    print(f"{'widget state stored with it':<44} {state / 1024:8.1f} KB")
    print(f"{'  total':<44} {(out_bytes + state) / 1024:8.1f} KB")


def _alphas_ready(panel) -> bool:
    """Every alpha on offer is drawn at the panel's current alternative."""
    for _, alpha in panel.alpha_picker.options:
        diag = panel._diagnoses.get((alpha, panel.alternative))
        if diag is None or not all(panel._cached(name, diag) for name in ("scale", "correlogram")):
            return False
    return True


def _level_moves(panel):
    return [
        (
            "alternative",
            lambda v: setattr(panel.alternative_picker, "value", v),
            ["two-sided", "negative", "positive", "two-sided"],
        ),
        ("alpha", lambda v: setattr(panel.alpha_picker, "value", v), [0.01, 0.1, 0.05, 0.01]),
    ]


def _widgets(widget):
    yield widget
    for child in getattr(widget, "children", ()):
        yield from _widgets(child)


if __name__ == "__main__":
    main(quick="--quick" in sys.argv)
