"""Benchmark of the live panel in a real browser: time from an input event to the redrawn view, per control.

JupyterLab (tests/browser/labkit.py: temporary folders, no token) serves a notebook with an invented scenario:
an hourly cold-store compressor load regressed on outside temperature and door openings, with AR(1) errors,
diagnosed with ``%lagsight fit --period 24``. Chromium (Debian's /usr/bin/chromium, driven by Playwright) runs
it, waits for the kernel to be idle and the panel visible, then for every control measures in the page:

- a capture-phase listener on the live panel (``.lgs-panel``; the hidden static snapshot sits outside it)
  records ``event.timeStamp`` of pointer, click, key, input and change events;
- a MutationObserver on the panel's subtree records ``performance.now()`` of every mutation;
- after an action the page waits until the kernel is idle, the view the control drives has changed and the
  panel has been quiet for ``--quiet`` seconds; latency = last mutation - the triggering event.

Each action is repeated ``--repeats`` times with alternating values so each changes the state. A repetition
is "first visit" when the panel's control values after it had not been seen before, else "revisit" (the
panel caches drawn states and draws some ahead in idle time). Also timed: a drag of the max-lag slider
(pointerup to the final state), the first render (run request to the panel visible, and to its last
mutation), and the save control.

Usage: python benchmarks/bench_browser.py [--n 2000] [--repeats 15] [--settle 5] [--json PATH]
       [--quiet 0.6] [--timeout 60] [--only alpha test ...] [--verbose]
"""

from __future__ import annotations

import argparse
import json
import math
import os
import re
import statistics
import sys
import tempfile
import time
from pathlib import Path

import nbformat

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests" / "browser"))
import labkit  # noqa: E402

SCENARIO = """\
import numpy as np
import pandas as pd
import statsmodels.api as sm

# An invented cold store: hourly compressor load (kW) on outside temperature and door openings.
# The disturbance carries over from hour to hour (AR(1), coefficient 0.55).
N = {n}
rng = np.random.default_rng(2417)
hours = pd.date_range('2025-03-01', periods=N, freq='h')
outside = 8 + 6 * np.sin(2 * np.pi * (hours.hour - 9) / 24) + rng.normal(0, 1.5, N)
doors = rng.poisson(np.where((hours.hour >= 6) & (hours.hour < 20), 4.0, 0.5))
shock = rng.normal(0, 2.0, N)
carry = np.zeros(N)
for t in range(1, N):
    carry[t] = 0.55 * carry[t - 1] + shock[t]
load = 40 + 1.8 * outside + 0.9 * doors + carry
X = sm.add_constant(pd.DataFrame({{'outside_c': outside, 'door_openings': doors}}, index=hours))
fit = sm.OLS(pd.Series(load, index=hours, name='load_kw'), X).fit()
fit.params.round(3)
"""

MAGIC = "%lagsight fit --period 24"
PANEL = ".lgs-panel"
VIEWPORT = {"width": 1400, "height": 1000}

# Installed once on the live panel: the listener and the observer (see the module docstring).
PROBE_JS = """panel => {
    // a mutation counts as the awaited redraw when inside `expect` and not inside `unless`
    const probe = {events: [], mutations: [], hits: 0, expect: '.lgs-view', unless: null, panel};
    for (const type of ['pointerdown', 'pointerup', 'click', 'keydown', 'keyup', 'input', 'change'])
        panel.addEventListener(type, e => probe.events.push([type, e.timeStamp]), true);
    probe.observer = new MutationObserver(records => {
        const now = performance.now();
        probe.mutations.push(now);
        for (const r of records) {
            const el = r.target.nodeType === 1 ? r.target : r.target.parentElement;
            if (el && el.closest(probe.expect) && !(probe.unless && el.closest(probe.unless))) {
                probe.hits += 1;
                break;
            }
        }
    });
    probe.observer.observe(panel, {subtree: true, childList: true, attributes: true, characterData: true});
    // a save control may hand the file to the browser instead of writing it (a download link, clicked by code)
    probe.downloads = [];
    const click = HTMLAnchorElement.prototype.click;
    HTMLAnchorElement.prototype.click = function () {
        if (this.hasAttribute('download')) probe.downloads.push(performance.now());
        return click.call(this); };
    document.addEventListener('click', e => { const a = e.target.closest && e.target.closest('a[download]');
        if (a) probe.downloads.push(performance.now()); }, true);
    window.__lgsProbe = probe;
}"""

RESET_JS = """([expect, unless]) => { const p = window.__lgsProbe;
    p.events = []; p.mutations = []; p.downloads = []; p.hits = 0; p.expect = expect; p.unless = unless; }"""

# Resolves once the kernel is idle, the expected part of the panel changed (or a download started) and the
# panel has been quiet; `last` is the last mutation (or download).
WAIT_JS = f"""async ([quiet, timeout]) => {{
    const p = window.__lgsProbe, t0 = performance.now();
    const idle = () => {{ const w = {labkit._CURRENT};
        const k = w && w.sessionContext && w.sessionContext.session && w.sessionContext.session.kernel;
        return !!k && k.status === 'idle'; }};
    while (true) {{
        await new Promise(r => setTimeout(r, 25));
        const stamps = p.mutations.concat(p.downloads), now = performance.now();
        const last = stamps.length ? Math.max(...stamps) : null;
        const done = (p.hits > 0 || p.downloads.length > 0) && idle() && last !== null && now - last >= quiet;
        if (done || now - t0 > timeout)
            return {{done, events: p.events, last, mutations: p.mutations.length, downloads: p.downloads.length}};
    }}
}}"""

# The panel's control values (what makes a state): alpha, active buttons, slider values.
STATE_JS = """panel => {
    const q = s => panel.querySelector(s);
    const active = s => { const b = q(s + ' button.mod-active'); return b ? b.textContent.trim() : null; };
    const handle = s => { const h = q(s + ' .noUi-handle'); return h ? h.getAttribute('aria-valuenow') : null; };
    const sel = q('.lgs-alpha select');
    return JSON.stringify([sel ? sel.value : null, active('.lgs-alternative'), active('.lgs-test-toggle'),
        handle('.lgs-lag-slider'), active('.lgs-band'), handle('.lgs-lag-picker')]);
}"""

# First render: resolves with performance.now() when the cell shows a live panel of visible size, then with
# the time of the last mutation in the cell's outputs once they have been quiet.
FIRST_RENDER_JS = (
    """async ([cell, index, quiet, timeout]) => {
    const before = cell.querySelector('.lgs-panel');
    let shown = null, last = performance.now();
    const obs = new MutationObserver(() => { last = performance.now(); });
    obs.observe(cell, {subtree: true, childList: true, attributes: true, characterData: true});
    const t0 = ("""
    + labkit.RUN_CELL_JS
    + """)(index);
    while (performance.now() - t0 < timeout) {
        await new Promise(r => requestAnimationFrame(r));
        const p = cell.querySelector('.lgs-panel');
        if (shown === null && p && p !== before && p.getBoundingClientRect().height > 50
            && [...p.querySelectorAll('.lgs-view')].some(v => v.innerHTML.length > 0)) shown = performance.now();
        if (shown !== null && performance.now() - last >= quiet) break;
    }
    obs.disconnect();
    return {t0, shown, last};
}"""
)


class Bench:
    def __init__(self, page, cell, args):
        self.page, self.cell, self.args = page, cell, args
        self.panel = cell.locator(PANEL).first
        self.seen: set[str] = set()
        self.results: dict[str, dict] = {}
        self.absent: list[str] = []

    def state(self) -> str:
        return self.panel.evaluate(STATE_JS)

    def install(self) -> None:
        self.panel.evaluate(PROBE_JS)
        self.seen.add(self.state())

    def measure(self, name: str, act, *, start: str, expect: str = ".lgs-view", unless: str | None = None) -> None:
        """Run ``act()`` once and record the latency from its ``start`` event to the panel's last mutation."""
        row = self.results.setdefault(
            name, {"event": start, "latency_ms": [], "first_visit_ms": [], "revisit_ms": [], "timeouts": 0}
        )
        self.page.evaluate(RESET_JS, [expect, unless])
        act()
        out = self.page.evaluate(WAIT_JS, [self.args.quiet * 1000, self.args.timeout * 1000])
        stamps = [t for kind, t in out["events"] if kind == start]
        if not out["done"] or not stamps or out["last"] is None:
            row["timeouts"] += 1
            if self.args.verbose:
                print(f"  {name}: no redraw in time ({out['mutations']} mutations, events {out['events']})")
            return
        # the last event of its kind: a drag's pointerup, the one change of a select, the click of a button
        ms = out["last"] - stamps[-1]
        state = self.state()
        row["latency_ms"].append(ms)
        row["first_visit_ms" if state not in self.seen else "revisit_ms"].append(ms)
        self.seen.add(state)
        if self.args.verbose:
            print(f"  {name}: {ms:.0f} ms -> {state}")

    # -- the actions -----------------------------------------------------------------------------------------
    def reveal(self, selector: str, name: str):
        """The control ``selector`` in the panel, made visible (its on-demand section opened when it has one);
        None (and the control noted as absent) when the panel has no such control."""
        loc = self.panel.locator(selector)
        if loc.count() == 0:
            self.absent.append(name)
            return None
        labkit.reveal(loc.first)
        return loc.first

    def alpha(self) -> None:
        sel = self.reveal(".lgs-alpha select", "alpha")
        if sel is None:
            return
        values = sel.evaluate("s => [...s.options].map(o => o.value)")
        for _ in range(self.args.repeats):
            nxt = values[(values.index(sel.input_value()) + 1) % len(values)]
            self.measure("alpha", lambda v=nxt: sel.select_option(value=v), start="change")

    def buttons(self, name: str, selector: str) -> None:
        group = self.reveal(selector, name)
        if group is None:
            return
        labels = [b.strip() for b in group.locator("button").all_inner_texts()]
        if len(labels) < 2:
            return
        for _ in range(self.args.repeats):
            now = group.locator("button.mod-active").first.inner_text().strip()
            nxt = labels[(labels.index(now) + 1) % len(labels)]
            button = group.locator("button").nth(labels.index(nxt))
            self.measure(name, button.click, start="click")

    def keys(self, name: str, selector: str) -> None:
        """One step left, one right, ... with the arrow keys on the focused handle (right first from the minimum)."""
        handle = self.reveal(f"{selector} .noUi-handle", name)
        if handle is None:
            return
        lo, hi = (float(handle.get_attribute(a)) for a in ("aria-valuemin", "aria-valuemax"))
        if hi <= lo:
            return
        left = float(handle.get_attribute("aria-valuenow")) > lo
        for _ in range(self.args.repeats):
            key, left = ("ArrowLeft" if left else "ArrowRight"), not left
            handle.focus()
            self.measure(name, lambda k=key: self.page.keyboard.press(k), start="keydown")

    def drag(self) -> None:
        handle = self.reveal(".lgs-lag-slider .noUi-handle", "max-lag drag")
        if handle is None:
            return
        track = self.panel.locator(".lgs-lag-slider .noUi-base").first
        lo, hi = (float(handle.get_attribute(a)) for a in ("aria-valuemin", "aria-valuemax"))
        if hi <= lo:
            return
        for i in range(self.args.repeats):
            target = 0.3 if i % 2 == 0 else 0.8

            def act(target=target):
                handle.scroll_into_view_if_needed()
                hb, tb = handle.bounding_box(), track.bounding_box()
                y = hb["y"] + hb["height"] / 2
                self.page.mouse.move(hb["x"] + hb["width"] / 2, y)
                self.page.mouse.down()
                self.page.mouse.move(tb["x"] + tb["width"] * target, y, steps=10)
                self.page.mouse.up()

            self.measure("max-lag drag", act, start="pointerup")

    def settle(self, act) -> None:
        """Run ``act()`` and wait as :meth:`measure` does, recording nothing (a step between two measurements)."""
        self.page.evaluate(RESET_JS, [PANEL, None])
        act()
        self.page.evaluate(WAIT_JS, [self.args.quiet * 1000, self.args.timeout * 1000])

    def save(self) -> None:
        """The report control: the old layout's save button (a new file name each time, so the status line
        changes), or the new layout's "prepare" button (after a band flip, which sets the prepared report
        aside, so each click builds a report); latency = click to the status line's last change."""
        new = self.panel.locator(".lgs-prepare").count() > 0
        button = self.reveal(".lgs-prepare" if new else ".lgs-save", "save")
        if button is None:
            return
        path = self.panel.locator(".lgs-save-path input")
        band = self.panel.locator(".lgs-band").first
        for i in range(self.args.repeats):
            if new and i > 0 and band.count():
                self.settle(band.locator("button:not(.mod-active)").first.click)
                labkit.reveal(button)

            def act(i=i):
                if path.count():
                    path.first.fill(f"bench-report-{i % 2}.html")
                    path.first.dispatch_event("change")
                button.click()

            self.measure("save", act, start="click", expect=".lgs-save-status")


def percentile(values: list[float], q: float) -> float:
    """Nearest-rank percentile (no interpolation: with 15 samples the 95th is the largest but none)."""
    s = sorted(values)
    return s[max(0, math.ceil(q / 100 * len(s)) - 1)]


def fmt(values: list[float]) -> str:
    return f"{statistics.median(values):8.0f}" if values else f"{'-':>8}"


def run(args) -> dict:
    tmp = Path(tempfile.mkdtemp(prefix="lgs-bench-browser-"))
    server = labkit.LabServer(tmp / "jupyter", tmp / "work")
    nb = nbformat.v4.new_notebook()
    nb.cells = [
        nbformat.v4.new_code_cell(SCENARIO.format(n=args.n)),
        nbformat.v4.new_code_cell("%load_ext lagsight"),
        nbformat.v4.new_code_cell(MAGIC),
    ]
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3 (ipykernel)", "language": "python"}
    nbformat.write(nb, server.work / "bench.ipynb")
    from playwright.sync_api import sync_playwright

    out: dict = {"n": args.n, "repeats": args.repeats, "settle_s": args.settle, "quiet_s": args.quiet}
    out["load_before"] = os.getloadavg()
    server.start()
    try:
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=str(labkit.CHROMIUM), args=labkit.CHROMIUM_ARGS)
            out["chromium"] = browser.version
            page = browser.new_page(viewport=VIEWPORT)
            errors: list[str] = []
            page.on("pageerror", lambda e: errors.append(str(e)))
            labkit.open_notebook(page, server, "bench.ipynb", len(nb.cells))
            labkit.wait_kernel_idle(page)
            for i in (0, 1):
                labkit.run_cell(page, i)
                labkit.wait_kernel_idle(page)
            cell = page.locator(".jp-NotebookPanel:visible .jp-Notebook .jp-Cell").nth(2)
            handle = cell.element_handle()
            renders = {}
            for label in ("first %lagsight in the kernel", "the cell run again"):
                r = page.evaluate(FIRST_RENDER_JS, [handle, 2, args.quiet * 1000, args.timeout * 1000])
                labkit.wait_kernel_idle(page)
                renders[label] = {
                    "visible_ms": None if r["shown"] is None else r["shown"] - r["t0"],
                    "quiet_ms": r["last"] - r["t0"],
                }
            out["first_render"] = renders
            panel = cell.locator(PANEL).first
            panel.wait_for(state="visible", timeout=labkit.KERNEL_TIMEOUT)
            # the rows the panel reports (a check that the scenario ran at the size asked for)
            found = re.search(r"\bn\s*[:=]\s*([\d,]+)", panel.inner_text())
            out["panel_n"] = int(found.group(1).replace(",", "")) if found else None
            time.sleep(args.settle)
            bench = Bench(page, cell, args)
            bench.install()
            actions = {
                "alpha": bench.alpha,
                "alternative": lambda: bench.buttons("alternative", ".lgs-alternative"),
                "test": lambda: bench.buttons("test toggle", ".lgs-test-toggle"),
                "max-lag": lambda: bench.keys("max-lag slider (key)", ".lgs-lag-slider"),
                "drag": bench.drag,
                "band": lambda: bench.buttons("band toggle", ".lgs-band"),
                "lag": lambda: bench.keys("lag picker (key)", ".lgs-lag-picker"),
                "save": bench.save,
            }
            for key in args.only or actions:
                actions[key]()
            out["controls"] = bench.results
            out["absent"] = bench.absent
            out["page_errors"] = errors
            labkit.scroll_to_top(panel)
            labkit.shot_whole(panel, f"bench-browser-n{args.n}")
            browser.close()
    finally:
        server.stop()
    out["load_after"] = os.getloadavg()
    return out


def report(out: dict) -> None:
    print(f"n = {out['n']:,} (the panel says n: {out.get('panel_n')}); {out['repeats']} repeats; ", end="")
    print(f"settle {out['settle_s']} s; quiet {out['quiet_s']} s")
    print(
        f"Chromium {out.get('chromium')}; load average (1 min) before {out['load_before'][0]:.2f}, "
        f"after {out['load_after'][0]:.2f}"
    )
    for label, r in out["first_render"].items():
        vis = "-" if r["visible_ms"] is None else f"{r['visible_ms']:.0f} ms"
        print(f"first render ({label}): panel visible {vis}, outputs quiet at {r['quiet_ms']:.0f} ms")
    print()
    head = (
        f"{'control':<22} {'event':<10} {'runs':>4} {'median':>8} {'p95':>8} "
        f"{'first':>8} {'(runs)':>6} {'revisit':>8} {'(runs)':>6} {'t/o':>4}"
    )
    print(head + "\n" + "-" * len(head))
    for name, row in out["controls"].items():
        lat = row["latency_ms"]
        p95 = f"{percentile(lat, 95):8.0f}" if lat else f"{'-':>8}"
        print(
            f"{name:<22} {row['event']:<10} {len(lat):>4} {fmt(lat)} {p95} {fmt(row['first_visit_ms'])} "
            f"{len(row['first_visit_ms']):>6} {fmt(row['revisit_ms'])} {len(row['revisit_ms']):>6} {row['timeouts']:>4}"
        )
    print("(ms; latency = last mutation of the panel - the event; first = a state not seen before, revisit = seen)")
    if out.get("absent"):
        print("controls not in the panel:", ", ".join(out["absent"]))
    if out["page_errors"]:
        print("page errors:", out["page_errors"])


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=2000, help="rows of the scenario (default 2,000)")
    ap.add_argument("--repeats", type=int, default=15, help="repetitions per control (default 15)")
    ap.add_argument("--settle", type=float, default=5.0, help="seconds to wait after the first render (default 5)")
    ap.add_argument("--quiet", type=float, default=0.6, help="seconds of no mutation that end an action (0.6)")
    ap.add_argument("--timeout", type=float, default=60.0, help="seconds an action may take (default 60)")
    ap.add_argument("--only", nargs="+", help="measure these controls only (alpha alternative test max-lag drag ...)")
    ap.add_argument("--verbose", action="store_true", help="print each measurement")
    ap.add_argument("--json", type=Path, help="write the figures to this JSON file")
    args = ap.parse_args(argv)
    out = run(args)
    report(out)
    if args.json:
        args.json.parent.mkdir(parents=True, exist_ok=True)
        args.json.write_text(json.dumps(out, indent=1))


if __name__ == "__main__":
    main()
