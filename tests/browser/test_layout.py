"""Layout of the live panel in JupyterLab, at two window sizes and in the light and dark themes.

Checked in Chromium with the page helpers of labkit.py, on the visible open parts of the panel (each
on-demand section opened in turn when the panel has them):

(a) no two visible text boxes overlap by more than 1 px (DOM text: a Range's client rects per text node; SVG
    ``text``: bounding boxes);
(b) no visible text renders below 10 px (DOM: computed font size; SVG: font size x the SVG's screen scale);
(c) nothing is clipped: no element scrolls sideways or sticks out of its container;
(d) at 1280 x 1000, with the panel's top at the top of the notebook area, the verdict, the 0-4 scale and the
    correlogram are all in that first view;
(e) headline and section text reach a contrast ratio of 4.5 against their background in both themes (WCAG 2.x
    "contrast (minimum)", level AA for normal text: the 4.5:1 threshold and the relative-luminance formula are
    the W3C's).

The 10 px floor and the 1 px tolerance are common practice (a legibility floor; sub-pixel rounding), not
published rules. One Lab server and one run of the notebook serve the whole module; screenshots go to
``benchmarks/out/screenshots/``.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent))
import labkit  # noqa: E402

NARROW = {"width": 900, "height": 1000}  # with the file browser open
WIDE = {"width": 1280, "height": 1000}  # file browser closed
SIZES = {"900": (NARROW, True), "1280": (WIDE, False)}
FIRST_VIEW = (".lgs-headline-view", ".lgs-scale-view", ".lgs-correlogram-view")
TEXT_FLOOR_PX = 10.0  # common practice: a legibility floor for screen text
OVERLAP_PX = 1.0  # common practice: sub-pixel rounding of text boxes
WCAG_AA = 4.5  # W3C WCAG 2.x, success criterion 1.4.3 (normal text)
SECTION_TEXT = (".lgs-section-title", f".lgs-more {labkit.COLLAPSE_HEADER}")
THEMES = {"light": "JupyterLab Light", "dark": "JupyterLab Dark"}


@pytest.fixture(scope="module")
def lab(tmp_path_factory):
    root = tmp_path_factory.mktemp("lab-layout")
    with labkit.running(labkit.LabServer(root / "jupyter", root / "work")) as server:
        yield server


@pytest.fixture(scope="module")
def live(lab, browser):
    """The live notebook open in Lab at 1280 x 1000, every cell run, the kernel idle."""
    page = browser.new_page(viewport=WIDE)
    errors: list[str] = []
    page.on("pageerror", lambda e: errors.append(str(e)))
    try:
        run = labkit.run_live_notebook(page, lab)
        yield {"page": page, "errors": errors, **run}
    finally:
        page.close()


def _at_size(live, size: str):
    """Resize the window, open or close the file browser, and bring the panel's top to the top of the view."""
    page, panel = live["page"], live["panel"]
    viewport, browser_open = SIZES[size]
    page.set_viewport_size(viewport)
    labkit.side_panel(page, browser_open)
    labkit.scroll_to_top(panel)
    return page, panel


def _each_open_state(panel):
    """Yield a label for each state whose open parts are checked: the panel as shown, then with each on-demand
    section opened in turn (the Accordion keeps one open at a time)."""
    yield "as shown"
    for i, header in enumerate(labkit.section_headers(panel)):
        labkit.reveal(header)  # opens the section the header belongs to
        labkit.wait_kernel_idle(panel.page)  # a section may be drawn by the kernel when first opened
        panel.page.wait_for_timeout(300)  # its content lays out
        yield f"section {i + 1} ({header.inner_text().strip()[:40]!r}) open"


def _findings(live, size: str, check) -> list:
    """What ``check`` finds in each open state; a finding seen in several states is listed once, with them."""
    page, panel = _at_size(live, size)
    found: dict[str, dict] = {}
    for state in _each_open_state(panel):
        for item in check(panel):
            key = json.dumps(item, sort_keys=True)
            found.setdefault(key, {**item, "states": []})["states"].append(state)
    labkit.scroll_to_top(panel)
    return list(found.values())


@pytest.mark.parametrize("size", list(SIZES))
def test_no_overlapping_text(live, size):
    found = _findings(live, size, lambda p: labkit.overlapping_text(p, OVERLAP_PX))
    labkit.shot(live["page"], f"layout-{size}-light-overlap")
    assert not found, f"text boxes overlap in the panel at {size} px: {found}"


@pytest.mark.parametrize("size", list(SIZES))
def test_no_text_below_ten_pixels(live, size):
    found = _findings(live, size, lambda p: labkit.small_text(p, TEXT_FLOOR_PX))
    assert not found, f"text below {TEXT_FLOOR_PX:g} px in the panel at {size} px: {found}"


@pytest.mark.parametrize("size", list(SIZES))
def test_nothing_clipped_sideways(live, size):
    found = _findings(live, size, labkit.clipped)
    assert not found, f"clipped or overflowing elements in the panel at {size} px: {found}"


def test_verdict_scale_and_correlogram_in_the_first_view(live):
    page, panel = _at_size(live, "1280")
    where = labkit.in_view(panel, FIRST_VIEW)
    labkit.shot(page, "layout-1280-light-first-view")
    missing = [w["selector"] for w in where if not w["found"]]
    outside = [w for w in where if w["found"] and not w["inside"]]
    assert not missing and not outside, (
        f"not in the panel (or not visible): {missing}; "
        f"not inside the first 1280 x 1000 view with the panel at its top: {outside}"
    )


@pytest.mark.parametrize("theme", list(THEMES))
def test_text_contrast(live, theme):
    page, panel = live["page"], live["panel"]
    labkit.set_theme(page, THEMES[theme])
    try:
        for size in SIZES:
            _at_size(live, size)
            labkit.shot(page, f"layout-{size}-{theme}")
            labkit.shot_whole(panel, f"layout-{size}-{theme}-panel")
        samples = labkit.contrast(panel, (".lgs-headline-view", *SECTION_TEXT))
        assert any(s["selector"] == ".lgs-headline-view" for s in samples), "no visible headline text"
        assert any(s["selector"] != ".lgs-headline-view" for s in samples), "no visible section text"
        low = [s for s in samples if s["ratio"] < WCAG_AA]
        assert not low, f"text below {WCAG_AA}:1 contrast in the {theme} theme: {low}"
        assert not live["errors"], f"page errors: {live['errors']}"
    finally:
        labkit.set_theme(page, THEMES["light"])
