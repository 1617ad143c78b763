"""Real-browser tests: the live panel in JupyterLab, and the saved notebook wherever it is shared.

Chromium is Debian's (``/usr/bin/chromium``, installed by ``.ci/run``) driven by Python Playwright; the browser
bundles of Playwright are never downloaded. Every server started here is stopped by its PID.

Sharing cases (issue 4, "Sharing must work"), each for a notebook executed headless by nbclient (widget state
stored, as ``jupyter nbconvert --execute`` writes it) and for the same notebook run and saved in JupyterLab
with default settings (no widget state):

(a) ``jupyter nbconvert --to html``, opened offline (every non-file request blocked);
(b) opened in JupyterLab with no kernel, untrusted and trusted;
(c) shown by a viewer that renders only text/html and images.

Screenshots go to ``benchmarks/out/screenshots/``.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
import sys
import time
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent))
from labkit import (  # noqa: E402, I001  (importing labkit puts tests/notebooks on the path)
    CHROMIUM,
    LabServer,
    blank_areas,
    cell_at,
    choose_no_kernel,
    live_notebook,
    open_notebook,
    running,
    run_live_notebook,
    save,
    shot,
    visible_box,
    wait_kernel_idle,
)

import nbtools  # noqa: E402, I001  (after labkit, which put tests/notebooks on the path)

if not CHROMIUM.exists():
    pytest.skip(f"{CHROMIUM} is missing (.ci/run installs Debian's chromium)", allow_module_level=True)

import nbformat  # noqa: E402
from bs4 import BeautifulSoup  # noqa: E402

VIEWPORT = {"width": 1400, "height": 1000}
LAB_VIEWPORT = {"width": 1400, "height": 3200}  # tall: Lab scrolls inside the page, so a tall panel fits whole
CHANGE_TIMEOUT = 30_000  # ms for a view to redraw after a control moved
PANEL_OUTPUT_BUDGET = 300_000  # bytes of saved output for one panel (issue 4, "Speed and size")
CELL_OUTPUTS = ".jp-Cell-outputArea > .jp-OutputArea-child > .jp-OutputArea-output"


_live_notebook, _shot = live_notebook, shot


# -- fixtures ----------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def lab(tmp_path_factory):
    root = tmp_path_factory.mktemp("lab")
    with running(LabServer(root / "jupyter", root / "work")) as server:
        yield server


@pytest.fixture(scope="module")
def live(lab, browser):
    """The live notebook open in Lab, every cell run, the kernel idle."""
    page = browser.new_page(viewport=LAB_VIEWPORT)
    errors = []
    page.on("pageerror", lambda e: errors.append(str(e)))
    try:
        run = run_live_notebook(page, lab)
        yield {"page": page, "errors": errors, **run}
    finally:
        page.close()


@pytest.fixture(scope="module")
def lab_saved(live, lab):
    """The live notebook saved from Lab with default settings (after the tests above used the panel)."""
    page = live["page"]
    save(page)
    path = lab.work / live["source"].name
    return path


_cell = cell_at


_VIEWS_JS = "el => [...el.querySelectorAll('.lgs-view')].map(v => v.innerHTML).join('\\n')"


def _wait_changed(locator, before: str, what: str, js: str = "el => el.innerHTML") -> str:
    """Poll ``js`` on the element (found afresh each time: Lab replaces an output's node when it updates)
    until it differs from ``before``; return the new value."""
    deadline = time.monotonic() + CHANGE_TIMEOUT / 1000
    while True:
        after = locator.evaluate(js) if locator.count() else before
        if after != before:
            return after
        assert time.monotonic() < deadline, f"{what} did not change in {CHANGE_TIMEOUT / 1000:.0f} s"
        locator.page.wait_for_timeout(100)


def _wait_snapshot(cell, selector: str, text: str, *, html: bool = False) -> None:
    """Wait until the element ``selector`` in the cell holds ``text`` (in its markup with ``html``)."""
    cell.page.wait_for_function(
        """([cell, selector, text, html]) => { const el = cell.querySelector(selector);
            return !!el && (html ? el.innerHTML : el.textContent).includes(text); }""",
        arg=[cell.element_handle(), selector, text, html],
        timeout=CHANGE_TIMEOUT,
    )


# -- (live) the panel in JupyterLab ------------------------------------------------------------------------


def test_live_panel_shows_once_with_its_views(live):
    page, cell, panel = live["page"], live["cell"], live["panel"]
    assert visible_box(panel) is not None
    for cls in ("lgs-lag-slider", "lgs-test-toggle"):
        assert visible_box(panel.locator(f".{cls}")) is not None, f"the panel has no visible .{cls}"
    # the static snapshot is in the cell's outputs but hidden while the widget renders: no duplicate
    snapshot = cell.locator(".lgs-snapshot")
    assert snapshot.count() == 1
    assert not snapshot.first.is_visible(), "the static snapshot shows next to the live panel"
    assert not blank_areas(page, CELL_OUTPUTS), blank_areas(page, CELL_OUTPUTS)
    assert not live["errors"], f"page errors: {live['errors']}"
    _shot(cell, "lab-live-1-panel")


def test_live_lag_slider_redraws_views_and_snapshot(live):
    page, cell, panel = live["page"], live["cell"], live["panel"]
    handle = panel.locator(".lgs-lag-slider .noUi-handle").first
    track = panel.locator(".lgs-lag-slider .noUi-base").first
    lo, hi, now = (float(handle.get_attribute(a)) for a in ("aria-valuemin", "aria-valuemax", "aria-valuenow"))
    assert hi > lo, "the lag slider has a single position"
    target = lo + (hi - lo) * (0.25 if now > lo + (hi - lo) / 2 else 0.85)
    views, snapshot = panel.evaluate(_VIEWS_JS), cell.locator(".lgs-snapshot").first.inner_html()
    handle.scroll_into_view_if_needed()
    hb, tb = handle.bounding_box(), track.bounding_box()
    page.mouse.move(hb["x"] + hb["width"] / 2, hb["y"] + hb["height"] / 2)
    page.mouse.down()
    page.mouse.move(tb["x"] + tb["width"] * (target - lo) / (hi - lo), hb["y"] + hb["height"] / 2, steps=12)
    page.mouse.up()
    moved = float(handle.get_attribute("aria-valuenow"))
    assert moved != now, "dragging the lag slider did not move it"
    _wait_changed(panel, views, "the panel's views after the lag slider moved", _VIEWS_JS)
    # the snapshot follows through its display id, so a saved notebook shows the current state
    _wait_changed(cell.locator(".lgs-snapshot").first, snapshot, "the static snapshot after the slider moved")
    wait_kernel_idle(page)
    _shot(cell, "lab-live-2-after-lag-slider")


def test_live_test_toggle_switches_the_view(live):
    page, cell, panel = live["page"], live["cell"], live["panel"]
    toggle = panel.locator(".lgs-test-toggle").first
    buttons = toggle.locator("button")
    assert buttons.count() >= 2, "the test toggle offers fewer than two tests"
    active = toggle.locator("button.mod-active").first.inner_text().strip()
    label = toggle.locator("button:not(.mod-active)").first.inner_text().strip()
    choice = toggle.get_by_role("button", name=label, exact=True)
    view = panel.locator(".lgs-test-view").first
    before = view.inner_html()
    choice.click()
    page.wait_for_function(
        "b => b.classList.contains('mod-active')", arg=choice.element_handle(), timeout=CHANGE_TIMEOUT
    )
    after = _wait_changed(view, before, f"the test view after choosing {label}")
    assert label and label != active
    assert label in re.sub(r"<[^>]+>", " ", after), f"the test view does not name {label}"
    live["chosen test"] = label
    # the snapshot is refreshed a moment after the change (panel.SNAPSHOT_DELAY): wait until it leads with
    # the chosen test, so the notebook saved next holds the current state
    _wait_snapshot(cell, ".lgs-snapshot tr.lgs-focus", label)
    wait_kernel_idle(page)
    _shot(cell, "lab-live-3-after-test-toggle")


def test_live_alpha_selector_updates_the_views_and_snapshot(live):
    page, cell, panel = live["page"], live["cell"], live["panel"]
    picker = panel.locator(".lgs-alpha select").first
    before = picker.input_value()
    options = [o.strip() for o in picker.locator("option").all_inner_texts()]
    label = next(o for o in options if o != before)  # the menu offers other levels
    views = panel.evaluate(_VIEWS_JS)
    picker.select_option(label=label)
    after = _wait_changed(panel, views, f"the panel's views after choosing alpha {label}", _VIEWS_JS)
    assert f"α:</b> {label}" in after, f"the views do not say alpha {label}"
    # the stored copy follows a moment later (panel.SNAPSHOT_DELAY); the notebook saved next must hold it
    _wait_snapshot(cell, ".lgs-snapshot", f"α:</b> {label}", html=True)
    live["chosen alpha"] = label
    wait_kernel_idle(page)
    _shot(cell, "lab-live-4-after-alpha")


def test_lab_saved_notebook_keeps_the_snapshot(lab_saved, live):
    nb = nbformat.read(lab_saved, as_version=4)
    for i in live["cells"]:
        outs = nb.cells[i].outputs
        snaps = [o for o in outs if "lgs-snapshot" in _html(o)]
        assert len(snaps) == 1, f"cell {i}: {len(snaps)} snapshots saved"
        for name, selector in nbtools.MARKERS.items():
            assert _soup(_html(snaps[0])).select(selector), f"the saved snapshot has no {name}"
        assert any(nbtools.WIDGET_VIEW in o.get("data", {}) for o in outs)
        if i == live["cells"][0] and "chosen test" in live:
            # the snapshot was kept current through its display id: it leads with the test chosen in the panel
            focus = _soup(_html(snaps[0])).select_one(f"{nbtools.MARKERS['test table']} tr.lgs-focus")
            assert focus is not None and live["chosen test"] in focus.get_text(" "), (
                f"the saved snapshot does not lead with {live['chosen test']}, the test chosen in the panel"
            )
        if i == live["cells"][0] and "chosen alpha" in live:
            assert f"α:</b> {live['chosen alpha']}" in _html(snaps[0]), (
                f"the saved snapshot is not at alpha {live['chosen alpha']}, the level chosen in the panel"
            )
        size = len(json.dumps(outs))
        assert size <= PANEL_OUTPUT_BUDGET, f"cell {i}: {size:,} bytes saved for one panel"


# -- the shared notebook -----------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def saved(lab_saved, tmp_path_factory):
    """The saved notebooks: as nbclient executed it, and as JupyterLab saved it."""
    source, _ = _live_notebook()
    executed = nbtools.executed_notebook(source, tmp_path_factory.getbasetemp())
    errors = nbtools.cell_errors(nbformat.read(executed, as_version=4))
    assert not errors, f"{source.name} raised under nbclient: " + "; ".join(errors)
    return {"nbclient": executed, "lab": lab_saved}


def _html(out) -> str:
    value = out.get("data", {}).get("text/html", "")
    return "".join(value) if isinstance(value, list) else value


def _soup(text: str):
    return BeautifulSoup(text, "html.parser")


def _offline_page(browser):
    """A page that may load file: and data: URLs only; returns (page, blocked URLs)."""
    context = browser.new_context(viewport=VIEWPORT)
    blocked = []

    def route(r):
        if r.request.url.startswith(("file:", "data:", "blob:")):
            r.continue_()
        else:
            blocked.append(r.request.url)
            r.abort()

    context.route("**/*", route)
    return context.new_page(), blocked


def _assert_diagnosis_visible(scope, n: int, where: str) -> None:
    """The verdict, the scale figure and the test table of ``n`` diagnoses are visible in ``scope``."""
    for name, selector in nbtools.MARKERS.items():
        found = scope.locator(selector)
        seen = sum(1 for k in range(found.count()) if visible_box(found.nth(k)) is not None)
        assert seen >= n, f"{where}: {seen} visible {name} ({selector}) for {n} diagnoses"
    figure = scope.locator(f"{nbtools.MARKERS['scale figure']} :is(svg, img)")
    assert visible_box(figure) is not None, f"{where}: the scale figure has no visible drawing"
    table = scope.locator(nbtools.MARKERS["test table"]).first
    assert "Durbin-Watson" in table.inner_text(), f"{where}: the test table does not list Durbin-Watson"
    assert table.locator("tr").count() >= 3, f"{where}: the test table has fewer than two tests"
    assert scope.locator(nbtools.MARKERS["verdict"]).first.inner_text().strip(), f"{where}: empty verdict"


@pytest.mark.parametrize("origin", ["nbclient", "lab"])
def test_nbconvert_html_offline(saved, origin, browser, tmp_path):
    path = saved[origin]
    nb = nbformat.read(path, as_version=4)
    n = len(nbtools.shown_panels(nb))
    env = nbtools.jupyter_env(tmp_path / "jupyter")
    html = nbtools.nbconvert_html(path, tmp_path / "html", env)
    page, blocked = _offline_page(browser)
    try:
        page.goto(html.as_uri(), wait_until="load")
        page.wait_for_timeout(500)  # let the (blocked) widget loader give up
        _assert_diagnosis_visible(page, n, f"nbconvert HTML of the {origin} notebook")
        blank = blank_areas(page, ".jp-OutputArea-output")
        assert not blank, f"blank output areas in the nbconvert HTML of the {origin} notebook: {blank}"
        _shot(
            page.locator(nbtools.MARKERS["verdict"]).first.locator(
                "xpath=ancestor::div[contains(@class,'jp-Cell')][1]"
            ),
            f"nbconvert-offline-{origin}",
        )
        _shot(page, f"nbconvert-offline-{origin}-page", full_page=True)
    finally:
        page.context.close()
    if origin == "nbclient":
        # the stored widget state makes nbconvert load the widget renderer from the internet: blocked here
        assert blocked, "nbconvert's HTML asked for nothing online; the widget fallback was not exercised"


@pytest.fixture(scope="module")
def lab_no_kernel(tmp_path_factory):
    """A second Lab that offers no kernel and has its own notebook-signing secret (so nothing is trusted)."""
    root = tmp_path_factory.mktemp("lab-no-kernel")
    with running(LabServer(root / "jupyter", root / "work", kernels=False)) as server:
        yield server


@pytest.mark.parametrize("trusted", [False, True], ids=["untrusted", "trusted"])
@pytest.mark.parametrize("origin", ["nbclient", "lab"])
def test_lab_without_kernel(saved, origin, trusted, lab_no_kernel, browser):
    src = saved[origin]
    name = f"{origin}-{'trusted' if trusted else 'untrusted'}-{src.name}"
    dest = lab_no_kernel.work / name
    shutil.copy(src, dest)
    if trusted:
        proc = subprocess.run(
            [sys.executable, "-m", "nbformat.sign", str(dest)],
            env=lab_no_kernel.env,
            capture_output=True,
            text=True,
            timeout=60,
        )
        assert proc.returncode == 0, proc.stderr
    nb = nbformat.read(dest, as_version=4)
    page = browser.new_page(viewport=LAB_VIEWPORT)
    try:
        open_notebook(page, lab_no_kernel, name, len(nb.cells))
        choose_no_kernel(page)
        page.wait_for_timeout(1000)  # the widget manager settles (it finds no kernel)
        cells_trusted = page.evaluate(
            "() => window.jupyterapp.shell.currentWidget.content.widgets"
            ".filter(c => c.model.type === 'code').map(c => c.model.trusted)"
        )
        assert all(cells_trusted) == trusted, f"expected trusted={trusted}, cells say {cells_trusted}"
        for i in nbtools.shown_panels(nb):
            cell = _cell(page, i)
            cell.scroll_into_view_if_needed()
            _assert_diagnosis_visible(
                cell, 1, f"cell {i} of the {origin} notebook in Lab, no kernel, {'trusted' if trusted else 'untrusted'}"
            )
        blank = blank_areas(page, CELL_OUTPUTS)
        assert not blank, f"blank outputs in Lab without kernel: {blank}"
        first = nbtools.shown_panels(nb)[0]
        _shot(_cell(page, first), f"lab-no-kernel-{origin}-{'trusted' if trusted else 'untrusted'}")
    finally:
        page.close()


@pytest.mark.parametrize("styles", ["kept", "stripped"])
@pytest.mark.parametrize("origin", ["nbclient", "lab"])
def test_html_and_images_only_viewer(saved, origin, styles, browser, tmp_path):
    nb = nbformat.read(saved[origin], as_version=4)
    n = len(nbtools.shown_panels(nb))
    text = nbtools.strip_scripts(nbtools.html_only_page(nb, f"{origin} notebook"))
    if styles == "stripped":
        # a stricter viewer that also drops <style> elements: the plain-text fallback must show
        text = re.sub(r"<style\b.*?</style\s*>", "", text, flags=re.S | re.I)
    page_path = tmp_path / f"viewer-{origin}-{styles}.html"
    page_path.write_text(text, encoding="utf-8")
    page, blocked = _offline_page(browser)
    try:
        page.goto(page_path.as_uri(), wait_until="load")
        _assert_diagnosis_visible(page, n, f"text/html-only view of the {origin} notebook ({styles} styles)")
        if styles == "stripped":
            assert visible_box(page.locator(".lgs-root pre.lgs-text")) is not None, (
                "with styles stripped the plain-text version of the diagnosis does not show"
            )
        else:
            assert page.locator(".lgs-root pre.lgs-text").first.is_hidden(), (
                "the plain-text fallback shows although the stylesheet is there"
            )
        blank = blank_areas(page, ".viewer-output")
        assert not blank, f"blank outputs for a text/html-only viewer: {blank}"
        assert not blocked, f"the diagnosis asked for network resources: {blocked}"
        _shot(page, f"html-only-{origin}-styles-{styles}", full_page=True)
    finally:
        page.context.close()
