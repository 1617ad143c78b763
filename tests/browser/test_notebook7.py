"""The live panel in the Notebook 7 interface (``python -m notebook``), with a live kernel.

Notebook 7 is the classic single-document interface rebuilt on Lab's framework; users open notebooks there as
well as in Lab. The live notebook is opened in it, every cell is run, and the panel must show, redraw its
test view when the test toggle changes, and raise no page error. Screenshots go to
``benchmarks/out/screenshots/``.
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent))
import labkit  # noqa: E402

VIEWPORT = {"width": 1280, "height": 1000}
CHANGE_TIMEOUT = 30_000  # ms for a view to redraw after a control moved


@pytest.fixture(scope="module")
def nb7(tmp_path_factory):
    root = tmp_path_factory.mktemp("notebook7")
    with labkit.running(labkit.NotebookServer(root / "jupyter", root / "work")) as server:
        yield server


@pytest.fixture(scope="module")
def interface_errors(nb7, browser) -> set[str]:
    """Page errors Notebook 7 raises by itself: a one-cell notebook without lagsight, opened and run.

    (Notebook 7.6 with JupyterLab 4.6 throws "Cannot read properties of undefined (reading 'schema')" from its
    keyboard-shortcut settings handler while it loads; the live notebook must add no error to those.)
    """
    import nbformat

    nb = nbformat.v4.new_notebook(cells=[nbformat.v4.new_code_cell("1 + 1")])
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3 (ipykernel)", "language": "python"}
    nbformat.write(nb, nb7.work / "plain.ipynb")
    page = browser.new_page(viewport=VIEWPORT)
    errors: set[str] = set()
    page.on("pageerror", lambda e: errors.add(str(e)))
    try:
        labkit.open_in_notebook(page, nb7, "plain.ipynb", 1)
        labkit.wait_kernel_idle(page)
        labkit.run_all(page)
        page.wait_for_timeout(1000)
    finally:
        page.close()
    return errors


def _new_errors(live, interface_errors) -> list[str]:
    return [e for e in live["errors"] if e not in interface_errors]


@pytest.fixture(scope="module")
def live(nb7, browser, interface_errors):
    page = browser.new_page(viewport=VIEWPORT)
    errors: list[str] = []
    page.on("pageerror", lambda e: errors.append(str(e)))
    try:
        run = labkit.run_live_notebook(page, nb7, opener=labkit.open_in_notebook)
        yield {"page": page, "errors": errors, **run}
    finally:
        page.close()


def test_the_page_is_notebook_7(live):
    page = live["page"]
    # Notebook 7 names itself in the application object; Lab would say "JupyterLab"
    assert page.evaluate("() => window.jupyterapp.name") == "Jupyter Notebook"
    assert "/notebooks/" in page.url


def test_panel_shows_with_its_controls(live, interface_errors):
    panel, cell = live["panel"], live["cell"]
    assert labkit.visible_box(panel) is not None, "the live panel is not visible in Notebook 7"
    for cls in ("lgs-headline-view", "lgs-test-toggle", "lgs-lag-slider"):
        assert labkit.visible_box(panel.locator(f".{cls}")) is not None, f"the panel has no visible .{cls}"
    snapshot = cell.locator(".lgs-snapshot")
    assert snapshot.count() == 1 and not snapshot.first.is_visible(), "the static snapshot shows beside the panel"
    labkit.scroll_to_top(panel)
    labkit.shot(live["page"], "notebook7-1-panel")
    assert not _new_errors(live, interface_errors), f"page errors: {_new_errors(live, interface_errors)}"


def test_test_toggle_redraws_the_test_view(live, interface_errors):
    page, panel = live["page"], live["panel"]
    toggle = panel.locator(".lgs-test-toggle").first
    labkit.reveal(toggle)
    assert toggle.locator("button").count() >= 2, "the test toggle offers fewer than two tests"
    label = toggle.locator("button:not(.mod-active)").first.inner_text().strip()
    view = panel.locator(".lgs-test-view").first
    before = view.inner_html()
    choice = toggle.get_by_role("button", name=label, exact=True)
    choice.click()
    page.wait_for_function(
        "([v, before]) => v.innerHTML !== before", arg=[view.element_handle(), before], timeout=CHANGE_TIMEOUT
    )
    assert "mod-active" in (choice.get_attribute("class") or "")
    assert label in re.sub(r"<[^>]+>", " ", view.inner_html()), f"the test view does not name {label}"
    labkit.wait_kernel_idle(page)
    labkit.shot(live["page"], "notebook7-2-after-test-toggle")
    assert not _new_errors(live, interface_errors), f"page errors: {_new_errors(live, interface_errors)}"
